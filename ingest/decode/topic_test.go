package decode

import (
	"errors"
	"strings"
	"testing"
)

// TestFilterMatch follows the examples of MQTT Version 3.1.1 (OASIS
// Standard, 29 October 2014), section 4.7, clause by clause.
func TestFilterMatch(t *testing.T) {
	cases := []struct {
		clause, filter, topic string
		match                 bool
	}{
		// §4.7.1.2 multi-level wildcard
		{"4.7.1.2", "sport/tennis/player1/#", "sport/tennis/player1", true},
		{"4.7.1.2", "sport/tennis/player1/#", "sport/tennis/player1/ranking", true},
		{"4.7.1.2", "sport/tennis/player1/#", "sport/tennis/player1/score/wimbledon", true},
		{"4.7.1.2", "sport/#", "sport", true},
		{"4.7.1.2", "#", "sport/tennis", true},
		{"4.7.1.2", "#", "/", true},
		{"4.7.1.2", "sport/tennis/player1/#", "sport/tennis/player2", false},
		{"4.7.1.2", "sport/#", "sports", false},
		// §4.7.1.3 single-level wildcard
		{"4.7.1.3", "sport/tennis/+", "sport/tennis/player1", true},
		{"4.7.1.3", "sport/tennis/+", "sport/tennis/player2", true},
		{"4.7.1.3", "sport/tennis/+", "sport/tennis/player1/ranking", false},
		{"4.7.1.3", "sport/+", "sport", false},
		{"4.7.1.3", "sport/+", "sport/", true},
		{"4.7.1.3", "+/+", "/finance", true},
		{"4.7.1.3", "/+", "/finance", true},
		{"4.7.1.3", "+", "/finance", false},
		{"4.7.1.3", "sport/+/player1", "sport/tennis/player1", true},
		{"4.7.1.3", "+/tennis/#", "sport/tennis/player1/ranking", true},
		{"4.7.1.3", "+", "finance", true},
		// §4.7.1.1 empty levels are levels
		{"4.7.1.1", "a//b", "a//b", true},
		{"4.7.1.1", "a/+/b", "a//b", true},
		{"4.7.1.1", "a/b", "a/b/", false},
		// §4.7.2 topics beginning with $
		{"4.7.2", "#", "$SYS/broker/uptime", false},
		{"4.7.2", "+/monitor/Clients", "$SYS/monitor/Clients", false},
		{"4.7.2", "$SYS/#", "$SYS/monitor/Clients", true},
		{"4.7.2", "$SYS/monitor/+", "$SYS/monitor/Clients", true},
		{"4.7.2", "{sensor}/x", "$P-1/x", false}, // the capture is a wildcard too
		// §4.7.3 case sensitive
		{"4.7.3", "ACCOUNTS", "Accounts", false},
		{"4.7.3", "Accounts", "Accounts", true},
		{"4.7.3", "town/+", "Town/p", false},
	}
	for _, c := range cases {
		f, err := CompileFilter(c.filter)
		if err != nil {
			t.Errorf("§%s: CompileFilter(%q): %v", c.clause, c.filter, err)
			continue
		}
		if _, got := f.Match(c.topic); got != c.match {
			t.Errorf("§%s: %q matches %q = %v, want %v", c.clause, c.filter, c.topic, got, c.match)
		}
		if got := refMatch(c.filter, c.topic); got != c.match {
			t.Errorf("§%s: reference matcher: %q matches %q = %v, want %v (the test's own reference is wrong)", c.clause, c.filter, c.topic, got, c.match)
		}
	}
}

func TestFilterValid(t *testing.T) {
	cases := []struct {
		clause, filter string
		err            string // "" = valid
	}{
		{"4.7.1.2", "#", ""},
		{"4.7.1.2", "sport/tennis/#", ""},
		{"4.7.1.2", "sport/tennis#", "whole level"},
		{"4.7.1.2", "sport/tennis/#/ranking", "last level"},
		{"4.7.1.3", "+", ""},
		{"4.7.1.3", "+/tennis/#", ""},
		{"4.7.1.3", "sport+", "whole level"},
		{"4.7.1.3", "sport/+/player1", ""},
		{"4.7.3", "", "empty"},
		{"4.7.3", "a\x00b", "U+0000"},
		{"4.7.3", "a\xffb", "UTF-8"},
		{"capture", "town/+/{sensor}", ""},
		{"capture", "{sensor}/{sensor}", "more than one"},
		{"capture", "town/{sensor}x", ""}, // not a whole level: a plain literal
	}
	for _, c := range cases {
		_, err := CompileFilter(c.filter)
		if c.err == "" {
			if err != nil {
				t.Errorf("§%s: CompileFilter(%q): %v, want valid", c.clause, c.filter, err)
			}
			continue
		}
		if err == nil || !strings.Contains(err.Error(), c.err) || !errors.Is(err, ErrBadFilter) {
			t.Errorf("§%s: CompileFilter(%q) error = %v, want ErrBadFilter containing %q", c.clause, c.filter, err, c.err)
		}
	}
	for _, topic := range []string{"a/+", "a/#", "", "x\x00"} {
		if err := ValidTopic(topic); !errors.Is(err, ErrBadTopic) {
			t.Errorf("ValidTopic(%q) = %v, want ErrBadTopic (§3.3.2.1, §4.7.3)", topic, err)
		}
	}
}

func TestCapture(t *testing.T) {
	f, err := CompileFilter("town/+/{sensor}/#")
	if err != nil {
		t.Fatal(err)
	}
	if got, want := f.Subscription(), "town/+/+/#"; got != want {
		t.Errorf("Subscription() = %q, want %q", got, want)
	}
	cases := []struct {
		topic, id string
		ok        bool
	}{
		{"town/north/P-104", "P-104", true},
		{"town/north/P-104/raw", "P-104", true},
		{"town/north/", "", true}, // an empty level is a level (§4.7.1.3)
		{"town/north", "", false},
	}
	for _, c := range cases {
		id, ok := f.Match(c.topic)
		if id != c.id || ok != c.ok {
			t.Errorf("Match(%q) = %q, %v; want %q, %v", c.topic, id, ok, c.id, c.ok)
		}
	}
	n := testing.AllocsPerRun(100, func() { f.Match("town/north/P-104/raw") })
	if n != 0 {
		t.Errorf("Match allocates %v times, want 0", n)
	}
}

// refMatch is an independent, deliberately simple matcher written from the
// clauses of MQTT 3.1.1 §4.7 (split into levels and compare), used as the
// reference in tests and fuzzing.
func refMatch(filter, topic string) bool {
	fl := strings.Split(filter, "/")
	tl := strings.Split(topic, "/")
	if strings.HasPrefix(topic, "$") && (fl[0] == "+" || fl[0] == "#" || fl[0] == Capture) {
		return false
	}
	for i, f := range fl {
		if f == "#" {
			return true
		}
		if i >= len(tl) {
			return false
		}
		if f != "+" && f != Capture && f != tl[i] {
			return false
		}
	}
	return len(fl) == len(tl)
}
