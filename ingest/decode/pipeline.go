package decode

import (
	"errors"
	"fmt"
	"math"
	"sort"
	"sync/atomic"
	"time"

	"github.com/rs/zerolog"

	"plumbline/model/telemetry"
	"plumbline/model/units"
)

// Route is a topic filter given outside the sensor list (a `topics` entry
// of the configuration), usually to attach a decoder to many sensors.
type Route struct {
	// Filter is an exact topic or an MQTT filter, with at most one
	// {sensor} level.
	Filter string
	// Sensor is the sensor the filter feeds when it has no {sensor} level;
	// with a {sensor} level it must be empty and the captured level names
	// any configured sensor.
	Sensor string
	// Decoder for this filter's payloads; nil means the sensor's decoder.
	Decoder Decoder
}

// Options tunes a Pipeline. The zero value gives the documented defaults.
type Options struct {
	// SensorDecoders maps a sensor id to its decoder (its `decode` block);
	// sensors not in the map use Auto.
	SensorDecoders map[string]Decoder
	// Routes are extra topic filters, tried after the sensors' own exact
	// topics and before the sensors' wildcard topics.
	Routes []Route
	// MaxFuture is how far after its arrival a reading may be stamped
	// (device clocks run fast); default 5 minutes.
	MaxFuture time.Duration
	// MaxPast is how far before its arrival a reading may be stamped
	// (devices buffer during outages); default 7 days.
	MaxPast time.Duration
	// MaxPayload bounds a payload's length in bytes; default 64 KiB.
	MaxPayload int
	// Log receives one warning per rejected message, at most LogBurst per
	// LogPeriod (zerolog BurstSampler; defaults 10 per 10 s). The zero
	// Logger logs nothing.
	Log       zerolog.Logger
	LogBurst  uint32
	LogPeriod time.Duration
}

// Default option values.
const (
	DefaultMaxFuture  = 5 * time.Minute
	DefaultMaxPast    = 7 * 24 * time.Hour
	DefaultMaxPayload = 64 << 10
)

type wildRoute struct {
	filter  *Filter
	sensor  int            // fixed sensor, or -1 with a capture
	byID    map[string]int // capture candidates
	decoder Decoder        // nil: the sensor's
}

type exactRoute struct {
	sensor  int
	decoder Decoder
}

type sensorState struct {
	s        telemetry.Sensor
	unit     units.Unit // the configured unit
	decoder  Decoder
	lastName string // last payload unit name and its resolution
	lastUnit units.Unit
	bounded  bool
}

// Pipeline routes a message to its sensor, decodes it, converts it to
// canonical units and validates it. Process must be called from one
// goroutine at a time; the counters may be read from any goroutine.
type Pipeline struct {
	sensors  []sensorState
	index    map[string]int
	exact    map[string]exactRoute
	wild     []wildRoute
	subs     []string
	opt      Options
	log      zerolog.Logger
	accepted []atomic.Uint64 // per sensor
	rejected []atomic.Uint64 // (len(sensors)+1) × numReasons; last row: no sensor
	total    atomic.Uint64
	sample   Sample // scratch for Process (a Sample passed to an interface escapes)
}

// NewPipeline checks the sensors' topics and units and builds the routing
// tables. Every problem is returned (errors.Join), each naming the sensor
// or filter.
func NewPipeline(sensors []telemetry.Sensor, opt Options) (*Pipeline, error) {
	if opt.MaxFuture <= 0 {
		opt.MaxFuture = DefaultMaxFuture
	}
	if opt.MaxPast <= 0 {
		opt.MaxPast = DefaultMaxPast
	}
	if opt.MaxPayload <= 0 {
		opt.MaxPayload = DefaultMaxPayload
	}
	if opt.LogBurst == 0 {
		opt.LogBurst = 10
	}
	if opt.LogPeriod <= 0 {
		opt.LogPeriod = 10 * time.Second
	}
	p := &Pipeline{
		index: make(map[string]int, len(sensors)),
		exact: make(map[string]exactRoute),
		opt:   opt,
		log:   opt.Log.Sample(&zerolog.BurstSampler{Burst: opt.LogBurst, Period: opt.LogPeriod}),
	}
	var errs []error
	p.sensors = make([]sensorState, len(sensors))
	for i, s := range sensors {
		if _, dup := p.index[s.ID]; dup {
			errs = append(errs, fmt.Errorf("sensor %s: id used twice", s.ID))
			continue
		}
		p.index[s.ID] = i
		st := &p.sensors[i]
		st.s = s
		st.bounded = s.Min != s.Max
		u, err := units.Lookup(s.Quantity, s.Unit)
		if err != nil {
			errs = append(errs, fmt.Errorf("sensor %s: %w", s.ID, err))
		}
		st.unit = u
		st.decoder = Auto{}
		if d, ok := opt.SensorDecoders[s.ID]; ok && d != nil {
			st.decoder = d
		}
	}
	for id := range opt.SensorDecoders {
		if _, ok := p.index[id]; !ok {
			errs = append(errs, fmt.Errorf("decoder for sensor %s: no such sensor", id))
		}
	}
	seen := map[string]bool{}
	addSub := func(f *Filter) {
		if s := f.Subscription(); !seen[s] {
			seen[s] = true
			p.subs = append(p.subs, s)
		}
	}
	// Explicit routes first, then the sensors' wildcard topics grouped by
	// filter (a {sensor} filter shared by many sensors is one route).
	for _, r := range opt.Routes {
		f, err := CompileFilter(r.Filter)
		if err != nil {
			errs = append(errs, fmt.Errorf("topic %s: %w", r.Filter, err))
			continue
		}
		wr := wildRoute{filter: f, sensor: -1, decoder: r.Decoder}
		switch {
		case f.HasCapture() && r.Sensor != "":
			errs = append(errs, fmt.Errorf("topic %s: has %s and also names sensor %s", r.Filter, Capture, r.Sensor))
			continue
		case f.HasCapture():
			wr.byID = p.index
		default:
			i, ok := p.index[r.Sensor]
			if !ok {
				errs = append(errs, fmt.Errorf("topic %s: sensor %q is not configured (give sensor or a %s level)", r.Filter, r.Sensor, Capture))
				continue
			}
			wr.sensor = i
		}
		addSub(f)
		if !f.Wildcard() {
			if _, dup := p.exact[r.Filter]; dup {
				errs = append(errs, fmt.Errorf("topic %s: used twice", r.Filter))
				continue
			}
			p.exact[r.Filter] = exactRoute{sensor: wr.sensor, decoder: r.Decoder}
			continue
		}
		p.wild = append(p.wild, wr)
	}
	shared := map[string]int{} // filter → index in p.wild
	for i, s := range sensors {
		if s.Topic == "" {
			continue // fed only by routes (or not over MQTT at all)
		}
		f, err := CompileFilter(s.Topic)
		if err != nil {
			errs = append(errs, fmt.Errorf("sensor %s: %w", s.ID, err))
			continue
		}
		addSub(f)
		switch {
		case !f.Wildcard():
			if prev, dup := p.exact[s.Topic]; dup {
				other := "a topic entry"
				if prev.sensor >= 0 {
					other = "sensor " + sensors[prev.sensor].ID
				}
				errs = append(errs, fmt.Errorf("sensor %s: topic %s is also %s's", s.ID, s.Topic, other))
				continue
			}
			p.exact[s.Topic] = exactRoute{sensor: i}
		case f.HasCapture():
			k, ok := shared[s.Topic]
			if !ok {
				k = len(p.wild)
				shared[s.Topic] = k
				p.wild = append(p.wild, wildRoute{filter: f, sensor: -1, byID: map[string]int{}})
			}
			p.wild[k].byID[s.ID] = i
		default:
			p.wild = append(p.wild, wildRoute{filter: f, sensor: i})
		}
	}
	p.accepted = make([]atomic.Uint64, len(sensors))
	p.rejected = make([]atomic.Uint64, (len(sensors)+1)*int(numReasons))
	if len(errs) > 0 {
		return nil, errors.Join(errs...)
	}
	return p, nil
}

// Subscriptions returns the filters to subscribe to, {sensor} levels
// replaced by '+', each once, in configuration order.
func (p *Pipeline) Subscriptions() []string { return append([]string(nil), p.subs...) }

// Sensors returns the number of configured sensors.
func (p *Pipeline) Sensors() int { return len(p.sensors) }

// Route finds the sensor a topic feeds: its index in the sensor list and
// the decoder to use. Exact topics win over filters; filters are tried in
// order (routes, then sensors' topics) and the first that matches and
// whose {sensor} level names a configured sensor wins.
func (p *Pipeline) Route(topic string) (sensor int, dec Decoder, reason Reason) {
	if r, ok := p.exact[topic]; ok {
		return r.sensor, p.decoderFor(r.sensor, r.decoder), Accepted
	}
	reason = UnknownTopic
	for k := range p.wild {
		w := &p.wild[k]
		id, ok := w.filter.Match(topic)
		if !ok {
			continue
		}
		if w.sensor >= 0 {
			return w.sensor, p.decoderFor(w.sensor, w.decoder), Accepted
		}
		if i, ok := w.byID[id]; ok {
			return i, p.decoderFor(i, w.decoder), Accepted
		}
		reason = UnknownSensor
	}
	return -1, nil, reason
}

func (p *Pipeline) decoderFor(i int, d Decoder) Decoder {
	if d != nil {
		return d
	}
	return p.sensors[i].decoder
}

// Process turns one message into a reading. arrival is when the message
// arrived; it is the reading's time when the payload has none. The reason
// is Accepted for a good reading; otherwise the message is counted under
// its sensor (if known) and reason, logged (rate-limited) and the reading
// is the zero value. Process never panics on bad input.
func (p *Pipeline) Process(topic string, payload []byte, arrival time.Time) (telemetry.Reading, Reason) {
	p.total.Add(1)
	i, dec, reason := p.Route(topic)
	if reason != Accepted {
		p.reject(-1, reason, topic, nil)
		return telemetry.Reading{}, reason
	}
	if len(payload) > p.opt.MaxPayload {
		p.reject(i, TooLarge, topic, nil)
		return telemetry.Reading{}, TooLarge
	}
	st := &p.sensors[i]
	s := &p.sample
	*s = Sample{}
	if err := safeDecode(dec, payload, s); err != nil {
		p.reject(i, Undecodable, topic, err)
		return telemetry.Reading{}, Undecodable
	}
	if math.IsNaN(s.Value) || math.IsInf(s.Value, 0) {
		p.reject(i, NotFinite, topic, nil)
		return telemetry.Reading{}, NotFinite
	}
	u := st.unit
	if s.Unit != nil {
		if string(s.Unit) == st.lastName {
			u = st.lastUnit
		} else {
			name := string(s.Unit)
			nu, err := units.Lookup(st.s.Quantity, name)
			if err != nil {
				p.reject(i, UnknownUnit, topic, err)
				return telemetry.Reading{}, UnknownUnit
			}
			st.lastName, st.lastUnit = name, nu
			u = nu
		}
	}
	v := u.ToCanonical(s.Value)
	if math.IsInf(v, 0) {
		p.reject(i, NotFinite, topic, nil)
		return telemetry.Reading{}, NotFinite
	}
	t := s.Time
	arrival = arrival.UTC()
	if t.IsZero() {
		t = arrival
	} else {
		if t.After(arrival.Add(p.opt.MaxFuture)) {
			p.reject(i, TooFarFuture, topic, nil)
			return telemetry.Reading{}, TooFarFuture
		}
		if t.Before(arrival.Add(-p.opt.MaxPast)) {
			p.reject(i, TooFarPast, topic, nil)
			return telemetry.Reading{}, TooFarPast
		}
	}
	if st.bounded && (v < st.s.Min || v > st.s.Max) {
		p.reject(i, OutOfRange, topic, nil)
		return telemetry.Reading{}, OutOfRange
	}
	p.accepted[i].Add(1)
	return telemetry.Reading{Sensor: st.s.ID, Time: t, Value: v, Unit: u.Symbol}, Accepted
}

// safeDecode calls a decoder, turning a panic in a third-party decoder
// into an error so that one bad payload cannot stop ingest.
func safeDecode(d Decoder, payload []byte, s *Sample) (err error) {
	defer func() {
		if r := recover(); r != nil {
			err = fmt.Errorf("decoder panicked: %v", r)
		}
	}()
	return d.Decode(payload, s)
}

func (p *Pipeline) reject(i int, r Reason, topic string, err error) {
	row := i
	if row < 0 {
		row = len(p.sensors)
	}
	p.rejected[row*int(numReasons)+int(r)].Add(1)
	ev := p.log.Warn()
	if ev == nil {
		return
	}
	ev = ev.Str("topic", topic).Str("reason", r.String())
	if i >= 0 {
		ev = ev.Str("sensor", p.sensors[i].s.ID)
	}
	if err != nil {
		ev = ev.Err(err)
	}
	ev.Msg("reading rejected")
}

// Count is one counter of rejected messages.
type Count struct {
	// Sensor id, "" for messages no sensor was found for.
	Sensor string
	Reason Reason
	N      uint64
}

// Rejections returns every non-zero rejection counter, by sensor in
// configuration order (no-sensor last), then by reason.
func (p *Pipeline) Rejections() []Count {
	var out []Count
	for row := 0; row <= len(p.sensors); row++ {
		id := ""
		if row < len(p.sensors) {
			id = p.sensors[row].s.ID
		}
		for r := Reason(1); r < numReasons; r++ {
			if n := p.rejected[row*int(numReasons)+int(r)].Load(); n > 0 {
				out = append(out, Count{Sensor: id, Reason: r, N: n})
			}
		}
	}
	return out
}

// RejectedBy returns the number of messages rejected for a reason, all
// sensors together.
func (p *Pipeline) RejectedBy(r Reason) uint64 {
	var n uint64
	if r == Accepted || r >= numReasons {
		return 0
	}
	for row := 0; row <= len(p.sensors); row++ {
		n += p.rejected[row*int(numReasons)+int(r)].Load()
	}
	return n
}

// AcceptedCount returns the number of readings accepted for the sensor with
// index i (all sensors when i < 0).
func (p *Pipeline) AcceptedCount(i int) uint64 {
	if i >= 0 {
		if i >= len(p.accepted) {
			return 0
		}
		return p.accepted[i].Load()
	}
	var n uint64
	for k := range p.accepted {
		n += p.accepted[k].Load()
	}
	return n
}

// Processed returns the number of messages given to Process.
func (p *Pipeline) Processed() uint64 { return p.total.Load() }

// SensorIndex returns the index of the sensor with the given id.
func (p *Pipeline) SensorIndex(id string) (int, bool) {
	i, ok := p.index[id]
	return i, ok
}

// ReasonTotals returns rejected counts per reason word (all reasons, zero
// included), sorted by word, for metrics.
func (p *Pipeline) ReasonTotals() []Count {
	out := make([]Count, 0, len(Reasons))
	for _, r := range Reasons {
		out = append(out, Count{Reason: r, N: p.RejectedBy(r)})
	}
	sort.Slice(out, func(a, b int) bool { return out[a].Reason.String() < out[b].Reason.String() })
	return out
}
