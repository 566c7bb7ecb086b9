package alerts

import (
	"errors"
	"fmt"
)

// State is where an alert stands in its lifecycle, in the vocabulary of
// ISA-18.2 / IEC 62682 (alarm states A, B, C, D and F of the state
// diagram, plus a closed record state).
type State string

const (
	// Normal: no condition; the state before an alert is raised.
	Normal State = "normal"
	// Unacknowledged: the condition is active and nobody has responded yet.
	Unacknowledged State = "unacknowledged"
	// Acknowledged: the condition is active and an operator has responded.
	Acknowledged State = "acknowledged"
	// ReturnedUnacknowledged: the evidence is gone but nobody acknowledged it.
	ReturnedUnacknowledged State = "returned-unacknowledged"
	// Shelved: an operator has suppressed the alert for a set time.
	Shelved State = "shelved"
	// Cleared: closed (returned to normal and acknowledged, or cleared by
	// hand); the record is kept, and new evidence raises a new alert.
	Cleared State = "cleared"
)

// States lists every state in lifecycle order.
var States = []State{Normal, Unacknowledged, Acknowledged, ReturnedUnacknowledged, Shelved, Cleared}

// Event is what happens to an alert: evidence arrives or goes, or an
// operator acts, or a shelf time runs out.
type Event string

const (
	// Evidence: a finding for the alert's event arrived (raises or updates).
	Evidence Event = "evidence"
	// ReturnToNormal: no evidence arrived for the hysteresis time clear_after.
	ReturnToNormal Event = "return-to-normal"
	// Acknowledge: an operator acknowledged the alert.
	Acknowledge Event = "acknowledge"
	// Shelve: an operator shelved the alert for a duration.
	Shelve Event = "shelve"
	// ShelfExpired: the shelving duration ran out with evidence still present.
	ShelfExpired Event = "shelf-expired"
	// ClearByHand: an operator closed the alert with a reason.
	ClearByHand Event = "clear"
	// Escalate is recorded in the audit log when an alert moves to the next
	// escalation level; it is not a state transition (Transition refuses it).
	Escalate Event = "escalate"
)

// ErrTransition is the sentinel wrapped by every refused transition.
var ErrTransition = errors.New("alerts: transition not allowed")

// Valid reports whether s is one of the defined states.
func (s State) Valid() bool {
	for _, v := range States {
		if s == v {
			return true
		}
	}
	return false
}

// Open reports whether an alert in state s still needs attention (it is
// neither normal nor cleared).
func (s State) Open() bool {
	return s != Normal && s != Cleared && s.Valid()
}

// Transition is the one lifecycle function: the state after event e in
// state s. It returns an error wrapping ErrTransition for an unknown state,
// an unknown event, or an event the state does not accept (for example
// acknowledging an alert that is already acknowledged); it never panics.
//
// The table follows the ISA-18.2 state diagram: evidence raises or keeps an
// alert active and re-annunciates one that had returned unacknowledged;
// returning to normal keeps an unacknowledged alert visible until
// acknowledged, and closes an acknowledged one; a shelved alert closes
// quietly if its evidence goes and becomes unacknowledged again when the
// shelf time runs out.
func Transition(s State, e Event) (State, error) {
	if !s.Valid() {
		return s, fmt.Errorf("%w: unknown state %q", ErrTransition, s)
	}
	next, ok := transitions[s][e]
	if !ok {
		if !knownEvent(e) {
			return s, fmt.Errorf("%w: unknown event %q", ErrTransition, e)
		}
		return s, fmt.Errorf("%w: %s in state %s", ErrTransition, e, s)
	}
	return next, nil
}

func knownEvent(e Event) bool {
	switch e {
	case Evidence, ReturnToNormal, Acknowledge, Shelve, ShelfExpired, ClearByHand:
		return true
	}
	return false
}

// transitions is the state table read by Transition.
var transitions = map[State]map[Event]State{
	Normal: {
		Evidence: Unacknowledged,
	},
	Unacknowledged: {
		Evidence:       Unacknowledged,
		ReturnToNormal: ReturnedUnacknowledged,
		Acknowledge:    Acknowledged,
		Shelve:         Shelved,
		ClearByHand:    Cleared,
	},
	Acknowledged: {
		Evidence:       Acknowledged,
		ReturnToNormal: Cleared,
		Shelve:         Shelved,
		ClearByHand:    Cleared,
	},
	ReturnedUnacknowledged: {
		Evidence:    Unacknowledged,
		Acknowledge: Cleared,
		Shelve:      Shelved,
		ClearByHand: Cleared,
	},
	Shelved: {
		Evidence:       Shelved,
		ReturnToNormal: Cleared,
		Shelve:         Shelved,
		ShelfExpired:   Unacknowledged,
		ClearByHand:    Cleared,
	},
	Cleared: {},
}
