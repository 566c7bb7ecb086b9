package decode

import "fmt"

// Reason says why a message was not accepted as a reading.
type Reason uint8

const (
	// Accepted: no problem; the reading is good.
	Accepted Reason = iota
	// UnknownTopic: no configured topic or filter matches the topic.
	UnknownTopic
	// UnknownSensor: a {sensor} filter matched but the captured level
	// names no configured sensor.
	UnknownSensor
	// TooLarge: the payload is longer than Options.MaxPayload.
	TooLarge
	// Undecodable: the decoder could not read a value (or a time or a
	// unit) from the payload.
	Undecodable
	// UnknownUnit: the payload names a unit unknown for the sensor's
	// quantity.
	UnknownUnit
	// NotFinite: the value (or its conversion) is NaN or infinite.
	NotFinite
	// OutOfRange: the canonical value lies outside the sensor's Min..Max.
	OutOfRange
	// TooFarFuture: the reading's time is later than arrival + MaxFuture.
	TooFarFuture
	// TooFarPast: the reading's time is earlier than arrival - MaxPast.
	TooFarPast

	numReasons
)

// Reasons lists every rejection reason (all but Accepted), in order.
var Reasons = []Reason{UnknownTopic, UnknownSensor, TooLarge, Undecodable, UnknownUnit, NotFinite, OutOfRange, TooFarFuture, TooFarPast}

// String returns the word used in logs and metric labels.
func (r Reason) String() string {
	switch r {
	case Accepted:
		return "accepted"
	case UnknownTopic:
		return "unknown-topic"
	case UnknownSensor:
		return "unknown-sensor"
	case TooLarge:
		return "too-large"
	case Undecodable:
		return "undecodable"
	case UnknownUnit:
		return "unknown-unit"
	case NotFinite:
		return "not-finite"
	case OutOfRange:
		return "out-of-range"
	case TooFarFuture:
		return "too-far-future"
	case TooFarPast:
		return "too-far-past"
	}
	return fmt.Sprintf("Reason(%d)", uint8(r))
}

// ParseReason maps a word from String back to its Reason.
func ParseReason(s string) (Reason, bool) {
	for r := Accepted; r < numReasons; r++ {
		if r.String() == s {
			return r, true
		}
	}
	return 0, false
}
