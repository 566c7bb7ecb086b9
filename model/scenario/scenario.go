package scenario

import (
	"fmt"
	"math"
	"time"

	"plumbline/model/finding"
	"plumbline/model/network"
	"plumbline/model/telemetry"
)

// DefaultStep is the model step of a scenario that gives none (the step of
// the example service configuration in shared/CONTRACT.md).
const DefaultStep = 5 * time.Minute

// DefaultLeakExponent is the FAVAD N1 of a leak that gives none: 1.0, the
// value recommended for mixed-material networks when nothing is known
// (Lambert 2001, from memory). See the package doc.
const DefaultLeakExponent = 1.0

// DefaultBurstExponent is the FAVAD N1 of a burst that gives none: 0.5, the
// orifice law for a fixed-area opening (Torricelli; May 1994).
const DefaultBurstExponent = 0.5

// MaxLeakExponent bounds the FAVAD N1 a scenario may ask for. Field values
// reported range from about 0.5 to 2.5 (Lambert 2001, from memory); 3 leaves
// room without admitting typos such as 15.
const MaxLeakExponent = 3.0

// DefaultSpikeEvery is the time between spikes of a spiking sensor that
// gives none.
const DefaultSpikeEvery = time.Hour

// FaultMode is how a faulty sensor misreads.
type FaultMode string

const (
	// Stuck freezes the reading at its last true value.
	Stuck FaultMode = "stuck"
	// Drift adds Amount per day since the fault started.
	Drift FaultMode = "drift"
	// Spike puts ±Amount on one reading every Event.Every.
	Spike FaultMode = "spike"
	// Offset adds Amount to every reading.
	Offset FaultMode = "offset"
)

// knownModes lists the fault modes in documentation order.
var knownModes = []FaultMode{Stuck, Drift, Spike, Offset}

// Event is one injected event. Units are canonical: L/s for SizeLPS, m or
// L/s (the sensor's quantity) for Amount.
type Event struct {
	Kind finding.Kind
	// At is a junction id (leak), a link id (blockage) or a sensor id
	// (sensor fault).
	At string
	// Start is when the event begins; End when it stops (zero: it lasts to
	// the end of the run).
	Start, End time.Time

	// SizeLPS is a leak's full-size outflow, L/s (see the package doc for
	// the pressure it refers to).
	SizeLPS float64
	// Ramp is the time over which a leak or blockage grows to full size.
	Ramp time.Duration
	// Exponent is a leak's FAVAD N1; zero means the default (see
	// LeakExponent).
	Exponent float64
	// Burst marks a sudden leak of fixed area.
	Burst bool

	// OpenFraction is the fraction of a blocked link's flow area left
	// open, in (0, 1).
	OpenFraction float64

	// Mode and Amount describe a sensor fault; Every is the time between
	// spikes (mode spike).
	Mode   FaultMode
	Amount float64
	Every  time.Duration

	// Line is the YAML line the event starts on (0 when built in code);
	// lines holds the line of each key, for messages.
	Line  int
	lines map[string]int
	// badStart and badEnd mark times that did not parse (already reported).
	badStart, badEnd bool
}

// LeakExponent returns the FAVAD N1 of a leak: Exponent, or the default
// for a burst (0.5) or a leak (1.0) when Exponent is zero.
func (e *Event) LeakExponent() float64 {
	if e.Exponent > 0 {
		return e.Exponent
	}
	if e.Burst {
		return DefaultBurstExponent
	}
	return DefaultLeakExponent
}

// LeakCoeff returns the FAVAD coefficient C of the leak, such that
// C·p^N1 = SizeLPS at the reference pressure p (m). A pressure at or below
// zero gives C = 0: no outflow can be derived from it.
func (e *Event) LeakCoeff(p float64) float64 {
	if p <= 0 {
		return 0
	}
	return e.SizeLPS / math.Pow(p, e.LeakExponent())
}

// Active reports whether the event is under way at t: Start ≤ t and,
// when End is set, t < End.
func (e *Event) Active(t time.Time) bool {
	if t.Before(e.Start) {
		return false
	}
	return e.End.IsZero() || t.Before(e.End)
}

// Growth returns how far a leak or blockage has grown at t, in [0, 1]:
// 0 when the event is not active, rising linearly over Ramp from Start,
// then 1. A leak's outflow is Growth·SizeLPS (at the reference pressure);
// a blockage's open fraction is 1 − Growth·(1 − OpenFraction).
func (e *Event) Growth(t time.Time) float64 {
	if !e.Active(t) {
		return 0
	}
	if e.Ramp <= 0 {
		return 1
	}
	g := float64(t.Sub(e.Start)) / float64(e.Ramp)
	return math.Min(1, g)
}

// String names the event for messages: "leak at J-7".
func (e *Event) String() string { return fmt.Sprintf("%s at %s", e.Kind, e.At) }

// line returns the YAML line of the event's key, else the event's line.
func (e *Event) line(key string) int {
	if l, ok := e.lines[key]; ok {
		return l
	}
	return e.Line
}

// Scenario is a parsed scenario file. Build one with Load or LoadFile;
// the zero value of every optional setting means its documented default
// (Load fills Step, LoggingInterval and MaxDelay).
type Scenario struct {
	// File is the name the scenario was loaded under (for messages).
	File string
	// Start of the run (UTC), its Duration and its model Step.
	Start    time.Time
	Duration time.Duration
	Step     time.Duration
	// Seed seeds every random draw of the run.
	Seed int64

	// Sensors to sample, in file order. SensorsFile is the resolved path
	// of the sensors file, empty when the list is inline; SensorLines the
	// YAML line of each sensor in the file it came from.
	Sensors     []telemetry.Sensor
	SensorsFile string
	SensorLines []int

	// Noise is the standard deviation of reading noise per quantity in
	// canonical units, replacing the sensors' accuracy.
	Noise map[telemetry.Quantity]float64

	// Events to inject, in file order.
	Events []Event

	// Instrument settings (see the package doc).
	LoggingInterval time.Duration
	Resolution      map[telemetry.Quantity]float64
	MissingFraction float64
	LateFraction    float64
	MaxDelay        time.Duration

	// Demand variability (relative standard deviations).
	DemandNoise    float64
	DailyVariation float64
	// WeekendPattern names the network pattern used on Saturdays and
	// Sundays; empty: none.
	WeekendPattern string

	// TrueNetwork is the resolved path of the network the readings are
	// generated from; empty: the main network.
	TrueNetwork string

	// lines holds the YAML line of each top-level key; bad marks the keys
	// that did not parse (already reported by Load).
	lines map[string]int
	bad   map[string]bool
}

// End returns the end of the run, Start + Duration (exclusive).
func (s *Scenario) End() time.Time { return s.Start.Add(s.Duration) }

// Sensor returns the sensor with the given id.
func (s *Scenario) Sensor(id string) (*telemetry.Sensor, bool) {
	for i := range s.Sensors {
		if s.Sensors[i].ID == id {
			return &s.Sensors[i], true
		}
	}
	return nil, false
}

// NoiseSD returns the standard deviation of a sensor's reading noise in
// canonical units when the scenario overrides it for the sensor's
// quantity, and false when the sensor's own accuracy (in its unit)
// applies.
func (s *Scenario) NoiseSD(sn *telemetry.Sensor) (float64, bool) {
	v, ok := s.Noise[sn.Quantity]
	return v, ok
}

// Truth returns the scenario's events as ground truth (truth.json), with
// each event's zone taken from the network when net is not nil: a leak's
// node zone, a blockage's link zone (its To node's zone, else its From
// node's: the zone a link feeds, as for an inlet meter; model/sim and
// model/score use the same rule), a sensor fault's sensor zone (the sensor's own Zone, else that
// of the node or link it sits on).
func (s *Scenario) Truth(net *network.Network) []finding.Event {
	out := make([]finding.Event, 0, len(s.Events))
	for i := range s.Events {
		e := &s.Events[i]
		t := finding.Event{
			Kind:     e.Kind,
			At:       e.At,
			Start:    e.Start,
			SizeLPS:  e.SizeLPS,
			OpenFrac: e.OpenFraction,
			Mode:     string(e.Mode),
			Amount:   e.Amount,
		}
		switch e.Kind {
		case finding.Leak:
			t.Zone = nodeZone(net, e.At)
		case finding.Blockage:
			t.Zone = linkZone(net, e.At)
		case finding.SensorFault:
			if sn, ok := s.Sensor(e.At); ok {
				t.Zone = sn.Zone
				if t.Zone == "" {
					if sn.Quantity == telemetry.Flow {
						t.Zone = linkZone(net, sn.At)
					} else {
						t.Zone = nodeZone(net, sn.At)
					}
				}
			}
		}
		out = append(out, t)
	}
	return out
}

// nodeZone returns the zone of the node id, "" if unknown or net is nil.
func nodeZone(net *network.Network, id string) string {
	if net == nil {
		return ""
	}
	if i, ok := net.NodeIndex(id); ok {
		return net.Nodes[i].Zone
	}
	return ""
}

// linkZone returns the zone of the link id: its To node's zone, else its
// From node's; "" if unknown or net is nil.
func linkZone(net *network.Network, id string) string {
	if net == nil {
		return ""
	}
	i, ok := net.LinkIndex(id)
	if !ok {
		return ""
	}
	l := net.Links[i]
	if l.To >= 0 && l.To < len(net.Nodes) && net.Nodes[l.To].Zone != "" {
		return net.Nodes[l.To].Zone
	}
	if l.From >= 0 && l.From < len(net.Nodes) {
		return net.Nodes[l.From].Zone
	}
	return ""
}

// Error is one problem of a scenario file, at a place.
type Error struct {
	// File is the file the problem is in; Line its YAML line (0: unknown).
	File string
	Line int
	// Msg says what is wrong.
	Msg string
}

// Error formats the problem as "file:line: msg".
func (e *Error) Error() string {
	f := e.File
	if f == "" {
		f = "scenario"
	}
	if e.Line > 0 {
		return fmt.Sprintf("%s:%d: %s", f, e.Line, e.Msg)
	}
	return fmt.Sprintf("%s: %s", f, e.Msg)
}
