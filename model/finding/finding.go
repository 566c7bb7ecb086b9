// Package finding holds what the detector concludes and what the
// simulator knows to be true: findings (leak, blockage, sensor fault) with
// ranked candidate locations, and ground-truth events, in the JSON forms of
// shared/CONTRACT.md.
package finding

import "time"

// Kind is what a finding or truth event is.
type Kind string

const (
	// Leak is water leaving the network unaccounted for.
	Leak Kind = "leak"
	// Blockage is a link passing less water than it should.
	Blockage Kind = "blockage"
	// SensorFault is an instrument reading wrongly.
	SensorFault Kind = "sensor-fault"
)

// Candidate is one ranked location: a node id for leaks, a link id for
// blockages, a sensor id for sensor faults. Score is in [0, 1], higher is
// more likely.
type Candidate struct {
	ID    string  `json:"id"`
	Score float64 `json:"score"`
}

// Finding is one detected event. Onset is the estimated start; Raised the
// time the detector first reported it.
type Finding struct {
	Kind       Kind        `json:"kind"`
	Zone       string      `json:"zone"`
	Onset      time.Time   `json:"onset"`
	Raised     time.Time   `json:"raised"`
	SizeLPS    float64     `json:"size_lps,omitempty"`
	OpenFrac   float64     `json:"open_fraction,omitempty"`
	Candidates []Candidate `json:"candidates"`
	Evidence   string      `json:"evidence"`
}

// Event is one ground-truth event of a scenario (truth.json).
type Event struct {
	Kind     Kind      `json:"kind"`
	At       string    `json:"at"`
	Start    time.Time `json:"start"`
	SizeLPS  float64   `json:"size_lps,omitempty"`
	OpenFrac float64   `json:"open_fraction,omitempty"`
	// Mode and Amount describe a sensor fault.
	Mode   string  `json:"mode,omitempty"`
	Amount float64 `json:"amount,omitempty"`
	Zone   string  `json:"zone,omitempty"`
}
