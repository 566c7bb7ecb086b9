package alerts

import (
	"errors"
	"testing"
)

// TestTransitionTable checks every state against every event. The expected
// column is read off the ISA-18.2 (2016) alarm state transition diagram,
// states A (normal), B (unacknowledged), C (acknowledged), D (returned to
// normal unacknowledged) and F (shelved), with Cleared as our closed record;
// "-" means the event is refused in that state.
func TestTransitionTable(t *testing.T) {
	const refused = State("-")
	events := []Event{Evidence, ReturnToNormal, Acknowledge, Shelve, ShelfExpired, ClearByHand}
	want := map[State][]State{
		//                      evidence                 rtn                      ack           shelve   expired         clear
		Normal:                 {Unacknowledged, refused, refused, refused, refused, refused},
		Unacknowledged:         {Unacknowledged, ReturnedUnacknowledged, Acknowledged, Shelved, refused, Cleared},
		Acknowledged:           {Acknowledged, Cleared, refused, Shelved, refused, Cleared},
		ReturnedUnacknowledged: {Unacknowledged, refused, Cleared, Shelved, refused, Cleared},
		Shelved:                {Shelved, Cleared, refused, Shelved, Unacknowledged, Cleared},
		Cleared:                {refused, refused, refused, refused, refused, refused},
	}
	if len(want) != len(States) {
		t.Fatalf("table covers %d states, want %d", len(want), len(States))
	}
	for _, s := range States {
		for i, e := range events {
			got, err := Transition(s, e)
			w := want[s][i]
			if w == refused {
				if err == nil || !errors.Is(err, ErrTransition) {
					t.Errorf("Transition(%s, %s) = %s, %v; want an ErrTransition", s, e, got, err)
				}
				if got != s {
					t.Errorf("refused Transition(%s, %s) changed state to %s", s, e, got)
				}
				continue
			}
			if err != nil || got != w {
				t.Errorf("Transition(%s, %s) = %s, %v; want %s", s, e, got, err, w)
			}
		}
	}
}

func TestTransitionUnknown(t *testing.T) {
	if _, err := Transition("latched", Evidence); !errors.Is(err, ErrTransition) {
		t.Errorf("unknown state: got %v, want ErrTransition", err)
	}
	if _, err := Transition(Unacknowledged, "silence"); !errors.Is(err, ErrTransition) {
		t.Errorf("unknown event: got %v, want ErrTransition", err)
	}
	if _, err := Transition("", ""); err == nil {
		t.Error("empty state and event: got nil error")
	}
}
