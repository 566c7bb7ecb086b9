// Package telemetry holds the types that readings travel in: sensor
// definitions, single readings in canonical units, per-step aggregates
// with a quality flag, and the snapshot that the detector consumes once
// per model step. It has no I/O; ingest/ fills these types from MQTT,
// files and the store, and model/ consumes them.
package telemetry

import (
	"fmt"
	"time"
)

// Quantity is what a sensor measures.
type Quantity uint8

const (
	// Pressure at a node, m of water above ground (canonical).
	Pressure Quantity = iota + 1
	// Flow through a link, L/s, positive in the link's From→To direction
	// (canonical).
	Flow
	// Level of water in a tank above its bottom, m (canonical).
	Level
	// Head at a node, m above datum (for reservoirs or pump stations).
	Head
)

// String returns the configuration word of the quantity.
func (q Quantity) String() string {
	switch q {
	case Pressure:
		return "pressure"
	case Flow:
		return "flow"
	case Level:
		return "level"
	case Head:
		return "head"
	}
	return fmt.Sprintf("Quantity(%d)", uint8(q))
}

// ParseQuantity maps a configuration word to its Quantity.
func ParseQuantity(s string) (Quantity, bool) {
	for q := Pressure; q <= Head; q++ {
		if q.String() == s {
			return q, true
		}
	}
	return 0, false
}

// CanonicalUnit returns the unit symbol the quantity is kept in.
func (q Quantity) CanonicalUnit() string {
	switch q {
	case Flow:
		return "L/s"
	default:
		return "m"
	}
}

// Sensor is one instrument as the service configuration defines it.
type Sensor struct {
	// ID is unique across the configuration.
	ID       string
	Quantity Quantity
	// At is a node id (pressure, level, head) or a link id (flow).
	At string
	// Topic is the MQTT topic or filter the sensor's readings arrive on.
	Topic string
	// Unit is the unit readings arrive in when the payload names none.
	Unit string
	// Accuracy is one standard deviation of the sensor's error, in Unit.
	Accuracy float64
	// Zone is the zone the sensor belongs to (from its node or link).
	Zone string
	// Min and Max bound plausible values in canonical units; equal values
	// mean no bound.
	Min, Max float64
}

// Reading is one measured value in canonical units.
type Reading struct {
	Sensor string
	Time   time.Time
	Value  float64
	// Unit is the unit the value arrived in (recorded, not used for
	// arithmetic: Value is already canonical).
	Unit string
}

// Quality flags a sensor's aggregate over one model step.
type Quality uint8

const (
	// OK: readings present and plausible.
	OK Quality = iota
	// Missing: no reading in the step.
	Missing
	// Stale: the newest reading is older than allowed.
	Stale
	// Stuck: the value has not changed for longer than allowed.
	Stuck
	// Spike: the value jumped implausibly and back.
	Spike
	// OutOfRange: the value lies outside the sensor's plausible range.
	OutOfRange
)

// String returns the word used in files, the API and the store.
func (q Quality) String() string {
	switch q {
	case OK:
		return "ok"
	case Missing:
		return "missing"
	case Stale:
		return "stale"
	case Stuck:
		return "stuck"
	case Spike:
		return "spike"
	case OutOfRange:
		return "out-of-range"
	}
	return fmt.Sprintf("Quality(%d)", uint8(q))
}

// Usable reports whether a value of this quality may be used as evidence.
func (q Quality) Usable() bool { return q == OK }

// Aggregate is one sensor's readings within one model step.
type Aggregate struct {
	Sensor   string
	Value    float64 // mean of the step's readings, canonical units
	Count    int
	Min, Max float64
	Quality  Quality
}

// Snapshot is every sensor's aggregate for one model step, the unit of
// work of the detector. Step is the start of the step interval
// [Step, Step+Length).
type Snapshot struct {
	Step   time.Time
	Length time.Duration
	// Values holds one aggregate per configured sensor, in configuration
	// order; a sensor without readings has Quality Missing.
	Values []Aggregate
}
