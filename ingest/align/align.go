package align

import (
	"cmp"
	"errors"
	"fmt"
	"math"
	"slices"
	"time"

	"plumbline/model/telemetry"
	"plumbline/model/units"
)

// Config sets up an Aligner. Zero values mean the documented defaults.
type Config struct {
	// Step is the model step (required, > 0).
	Step time.Duration
	// Lateness is how long after a step's end its readings are still
	// taken (default 0: readings must come in order across steps).
	Lateness time.Duration
	// Sensors in configuration order; snapshots list them in this order.
	Sensors []telemetry.Sensor
	// Start, if set, is the first step emitted (truncated to the step
	// grid); readings before it are late.
	Start time.Time
	// StaleAfter: a step with no reading of its own carries the last
	// value as stale if that reading is at most this old at the step's
	// end (default 3 steps; negative: never, always missing).
	StaleAfter time.Duration
	// StuckAfter: flag stuck when the value has not changed for longer
	// than this (default 0: off). StuckTolerance is the change, in
	// canonical units, below which a value counts as unchanged (default
	// 0: exactly equal).
	StuckAfter     time.Duration
	StuckTolerance float64
	// SpikeK is the threshold in robust standard deviations (default 5;
	// negative: spike detection off). SpikeWindow is the number of past
	// usable steps the median and MAD are taken over (default 12), and
	// SpikeMinHistory the number needed before spikes are flagged
	// (default 6).
	SpikeK          float64
	SpikeWindow     int
	SpikeMinHistory int
	// MaxPerStep bounds the readings kept per sensor per step (default
	// 4096).
	MaxPerStep int
}

// Defaults (our choices, common practice rather than a published value).
const (
	DefaultStaleSteps      = 3
	DefaultSpikeK          = 5.0
	DefaultSpikeWindow     = 12
	DefaultSpikeMinHistory = 6
	DefaultMaxPerStep      = 4096
	// madScale makes the MAD a consistent estimator of σ for normal data:
	// 1/Φ⁻¹(3/4) = 1.4826 (Rousseeuw and Croux 1993).
	madScale = 1.4826
)

// Stats are the aligner's counters.
type Stats struct {
	// Late readings per sensor (configuration order): for a step already
	// emitted, left out of the snapshots.
	Late []uint64
	// Unknown: readings of a sensor not in the configuration, or with a
	// time outside the years 1678..2261.
	Unknown uint64
	// Overflow: readings dropped beyond MaxPerStep.
	Overflow uint64
	// Emitted snapshots, and steps open now.
	Emitted uint64
	Open    int
}

type point struct {
	t int64 // Unix nanoseconds
	v float64
}

type openStep struct {
	pts [][]point // per sensor
}

type sensorState struct {
	s        telemetry.Sensor
	bounded  bool
	accuracy float64 // canonical

	hasLast bool
	lastT   int64
	lastV   float64

	hasRun   bool
	runV     float64
	runStart int64

	hist    []float64 // ring of past usable means
	histLen int
	histPos int
}

// Aligner aligns readings into snapshots; see the package doc.
type Aligner struct {
	cfg     Config
	step    int64
	late    int64 // lateness in ns
	emit    func(telemetry.Snapshot)
	sensors []sensorState
	index   map[string]int

	open      map[int64]*openStep
	free      []*openStep
	started   bool
	next      int64 // first step not yet closed
	watermark int64
	hasWM     bool

	pending    *telemetry.Snapshot // closed, waiting for the next step (spike check)
	spikeOn    bool
	staleAfter int64

	stats   Stats
	scratch []float64
}

// New checks the configuration and returns an Aligner that calls emit
// with each snapshot. The error names the bad setting or sensor.
func New(cfg Config, emit func(telemetry.Snapshot)) (*Aligner, error) {
	var errs []error
	if cfg.Step <= 0 {
		errs = append(errs, fmt.Errorf("align: step %v must be positive", cfg.Step))
	}
	if cfg.Lateness < 0 {
		errs = append(errs, fmt.Errorf("align: lateness %v must not be negative", cfg.Lateness))
	}
	if emit == nil {
		errs = append(errs, errors.New("align: emit function is required"))
	}
	if cfg.StaleAfter == 0 {
		cfg.StaleAfter = DefaultStaleSteps * cfg.Step
	}
	if cfg.SpikeK == 0 {
		cfg.SpikeK = DefaultSpikeK
	}
	if cfg.SpikeWindow <= 0 {
		cfg.SpikeWindow = DefaultSpikeWindow
	}
	if cfg.SpikeMinHistory <= 0 {
		cfg.SpikeMinHistory = DefaultSpikeMinHistory
	}
	if cfg.SpikeMinHistory > cfg.SpikeWindow {
		errs = append(errs, fmt.Errorf("align: spike_min_history %d exceeds spike_window %d", cfg.SpikeMinHistory, cfg.SpikeWindow))
	}
	if cfg.MaxPerStep <= 0 {
		cfg.MaxPerStep = DefaultMaxPerStep
	}
	if cfg.StuckTolerance < 0 || math.IsNaN(cfg.StuckTolerance) {
		errs = append(errs, fmt.Errorf("align: stuck_tolerance %v must not be negative", cfg.StuckTolerance))
	}
	a := &Aligner{
		cfg:     cfg,
		step:    int64(cfg.Step),
		late:    int64(cfg.Lateness),
		emit:    emit,
		index:   make(map[string]int, len(cfg.Sensors)),
		open:    map[int64]*openStep{},
		spikeOn: cfg.SpikeK > 0,
	}
	a.staleAfter = int64(cfg.StaleAfter)
	a.sensors = make([]sensorState, len(cfg.Sensors))
	for i, s := range cfg.Sensors {
		if _, dup := a.index[s.ID]; dup {
			errs = append(errs, fmt.Errorf("align: sensor %s: id used twice", s.ID))
		}
		a.index[s.ID] = i
		st := &a.sensors[i]
		st.s = s
		st.bounded = s.Min != s.Max
		if s.Accuracy > 0 {
			acc, err := units.ToCanonical(s.Quantity, s.Unit, s.Accuracy)
			if err != nil {
				errs = append(errs, fmt.Errorf("align: sensor %s: accuracy: %w", s.ID, err))
			}
			st.accuracy = math.Abs(acc)
		}
		st.hist = make([]float64, cfg.SpikeWindow)
	}
	a.stats.Late = make([]uint64, len(cfg.Sensors))
	if !cfg.Start.IsZero() && cfg.Step > 0 {
		a.started = true
		a.next = floorStep(cfg.Start.UnixNano(), a.step)
	}
	if len(errs) > 0 {
		return nil, errors.Join(errs...)
	}
	return a, nil
}

// floorStep rounds t down to a multiple of step (also for t < 0).
func floorStep(t, step int64) int64 {
	q := t / step
	if t%step != 0 && t < 0 {
		q--
	}
	return q * step
}

// Unix nanoseconds cover 1678-09-21 to 2262-04-11; stay inside.
var (
	minTime = time.Date(1678, 1, 1, 0, 0, 0, 0, time.UTC).Add(24 * time.Hour * 365)
	maxTime = time.Date(2261, 12, 31, 0, 0, 0, 0, time.UTC)
)

// Add takes one reading (canonical units). It returns true when the
// reading is late (its step was already emitted): it is then counted and
// not used. Add may emit snapshots.
func (a *Aligner) Add(r telemetry.Reading) (late bool) {
	i, ok := a.index[r.Sensor]
	if !ok || r.Time.Before(minTime) || r.Time.After(maxTime) || math.IsNaN(r.Value) || math.IsInf(r.Value, 0) {
		a.stats.Unknown++
		return false
	}
	t := r.Time.UnixNano()
	s := floorStep(t, a.step)
	if a.started && s < a.next {
		a.stats.Late[i]++
		return true
	}
	st := a.open[s]
	if st == nil {
		st = a.newStep()
		a.open[s] = st
	}
	if len(st.pts[i]) >= a.cfg.MaxPerStep {
		a.stats.Overflow++
	} else {
		st.pts[i] = append(st.pts[i], point{t: t, v: r.Value})
	}
	a.advance(t)
	return false
}

// Advance moves the watermark to t if t is later (for example the wall
// clock, so that steps close while sensors are silent) and emits the steps
// that closes. Readings later than the new watermark minus the lateness
// may then be late: live and replayed snapshots agree only for readings
// that arrive within the lateness of this time too.
func (a *Aligner) Advance(t time.Time) {
	if t.Before(minTime) || t.After(maxTime) {
		return
	}
	a.advance(t.UnixNano())
}

func (a *Aligner) advance(t int64) {
	if !a.hasWM || t > a.watermark {
		a.watermark, a.hasWM = t, true
	}
	for {
		if !a.started {
			if len(a.open) == 0 {
				return
			}
			first := int64(math.MaxInt64)
			for s := range a.open {
				first = min(first, s)
			}
			if a.watermark < first+a.step+a.late {
				return
			}
			a.started, a.next = true, first
		}
		if a.watermark < a.next+a.step+a.late {
			return
		}
		a.close(a.next)
		a.next += a.step
	}
}

// Flush closes and emits every step that starts before end, whatever the
// watermark, and the step held for the spike check: the end of a replay.
// Readings before end are late afterwards.
func (a *Aligner) Flush(end time.Time) {
	e := end.UnixNano()
	if !a.started {
		if len(a.open) == 0 {
			return
		}
		first := int64(math.MaxInt64)
		for s := range a.open {
			first = min(first, s)
		}
		a.started, a.next = true, first
	}
	for a.next < e {
		a.close(a.next)
		a.next += a.step
	}
	if a.pending != nil {
		a.finish(nil)
	}
}

// Stats returns a copy of the counters.
func (a *Aligner) Stats() Stats {
	s := a.stats
	s.Late = slices.Clone(a.stats.Late)
	s.Open = len(a.open)
	return s
}

// Watermark returns the watermark (the zero Time before any reading).
func (a *Aligner) Watermark() time.Time {
	if !a.hasWM {
		return time.Time{}
	}
	return time.Unix(0, a.watermark).UTC()
}

func (a *Aligner) newStep() *openStep {
	if n := len(a.free); n > 0 {
		st := a.free[n-1]
		a.free = a.free[:n-1]
		return st
	}
	return &openStep{pts: make([][]point, len(a.sensors))}
}

// close computes the aggregates of the step starting at s.
func (a *Aligner) close(s int64) {
	st := a.open[s]
	delete(a.open, s)
	end := s + a.step
	snap := telemetry.Snapshot{
		Step:   time.Unix(0, s).UTC(),
		Length: a.cfg.Step,
		Values: make([]telemetry.Aggregate, len(a.sensors)),
	}
	for i := range a.sensors {
		var pts []point
		if st != nil {
			pts = st.pts[i]
		}
		snap.Values[i] = a.aggregate(i, pts, end)
	}
	if st != nil {
		for i := range st.pts {
			st.pts[i] = st.pts[i][:0]
		}
		a.free = append(a.free, st)
	}
	if !a.spikeOn {
		a.stats.Emitted++
		a.emit(snap)
		return
	}
	if a.pending != nil {
		a.finish(&snap)
	}
	a.pending = &snap
}

// aggregate sorts and de-duplicates one sensor's readings of one step and
// computes its aggregate, updating the sensor's last reading and run.
func (a *Aligner) aggregate(i int, pts []point, end int64) telemetry.Aggregate {
	ss := &a.sensors[i]
	agg := telemetry.Aggregate{Sensor: ss.s.ID}
	if len(pts) == 0 {
		if ss.hasLast && a.staleAfter >= 0 && end-ss.lastT <= a.staleAfter {
			agg.Quality = telemetry.Stale
			agg.Value, agg.Min, agg.Max = ss.lastV, ss.lastV, ss.lastV
		} else {
			agg.Quality = telemetry.Missing
		}
		return agg
	}
	slices.SortFunc(pts, func(x, y point) int {
		if c := cmp.Compare(x.t, y.t); c != 0 {
			return c
		}
		return cmp.Compare(x.v, y.v)
	})
	pts = slices.CompactFunc(pts, func(x, y point) bool { return x.t == y.t })
	sum := 0.0
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, p := range pts {
		sum += p.v
		lo = min(lo, p.v)
		hi = max(hi, p.v)
	}
	agg.Count = len(pts)
	agg.Value = sum / float64(len(pts))
	agg.Min, agg.Max = lo, hi
	last := pts[len(pts)-1]
	ss.hasLast, ss.lastT, ss.lastV = true, last.t, last.v

	// The unchanged run: continue it if every reading equals its value,
	// else it starts at the earliest reading of the trailing unchanged
	// stretch of this step.
	tol := a.cfg.StuckTolerance
	if ss.hasRun && lo >= ss.runV-tol && hi <= ss.runV+tol {
		// run continues
	} else {
		k := len(pts) - 1
		for k > 0 && math.Abs(pts[k-1].v-last.v) <= tol {
			k--
		}
		ss.hasRun, ss.runV, ss.runStart = true, last.v, pts[k].t
	}

	switch {
	case ss.bounded && (lo < ss.s.Min || hi > ss.s.Max):
		agg.Quality = telemetry.OutOfRange
	case a.cfg.StuckAfter > 0 && time.Duration(last.t-ss.runStart) > a.cfg.StuckAfter:
		agg.Quality = telemetry.Stuck
	default:
		agg.Quality = telemetry.OK
	}
	return agg
}

// finish completes the pending snapshot with the spike check against the
// following step (nil at a flush: no check) and emits it.
func (a *Aligner) finish(next *telemetry.Snapshot) {
	p := a.pending
	a.pending = nil
	for i := range a.sensors {
		ss := &a.sensors[i]
		agg := &p.Values[i]
		if agg.Count == 0 {
			continue
		}
		if agg.Quality == telemetry.OK && next != nil && ss.histLen >= a.cfg.SpikeMinHistory {
			nx := next.Values[i]
			if nx.Count > 0 && nx.Quality != telemetry.OutOfRange {
				med, mad := a.medianMAD(ss)
				band := a.cfg.SpikeK * max(madScale*mad, ss.accuracy, 1e-6*max(1, math.Abs(med)))
				if math.Abs(agg.Value-med) > band && math.Abs(nx.Value-med) <= band {
					agg.Quality = telemetry.Spike
				}
			}
		}
		if agg.Quality == telemetry.OK || agg.Quality == telemetry.Stuck {
			ss.hist[ss.histPos] = agg.Value
			ss.histPos = (ss.histPos + 1) % len(ss.hist)
			ss.histLen = min(ss.histLen+1, len(ss.hist))
		}
	}
	a.stats.Emitted++
	a.emit(*p)
}

// medianMAD returns the median of the sensor's past means and their
// median absolute deviation from it.
func (a *Aligner) medianMAD(ss *sensorState) (float64, float64) {
	a.scratch = append(a.scratch[:0], ss.hist[:ss.histLen]...)
	med := median(a.scratch)
	for k, v := range a.scratch {
		a.scratch[k] = math.Abs(v - med)
	}
	return med, median(a.scratch)
}

// median sorts x in place and returns its median (mean of the two middle
// values for an even length).
func median(x []float64) float64 {
	slices.Sort(x)
	n := len(x)
	if n%2 == 1 {
		return x[n/2]
	}
	return (x[n/2-1] + x[n/2]) / 2
}
