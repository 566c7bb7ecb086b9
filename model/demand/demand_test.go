package demand

import (
	"math"
	"testing"
	"time"

	"plumbline/model/network"
)

func patternNet() *network.Network {
	n := network.New([]network.Node{{ID: "J1", Kind: network.Junction, Demand: 2, Pattern: "res"}}, nil)
	hourly := make([]float64, 24)
	for h := range hourly {
		hourly[h] = float64(h) // multiplier = hour of day, easy to check by hand
	}
	n.Patterns["res"] = hourly
	n.Patterns["res-weekend"] = []float64{5}
	return n
}

// Interpolation is checked against values computed by hand from the
// pattern (multiplier = hour), not against the code's own arithmetic.
func TestPatternAtInterpolatesAndAnchorsAtMidnight(t *testing.T) {
	net := patternNet()
	wed := time.Date(2026, 3, 4, 0, 0, 0, 0, time.UTC) // a Wednesday
	for _, c := range []struct {
		at   time.Duration
		want float64
	}{
		{0, 0}, {time.Hour, 1}, {90 * time.Minute, 1.5}, {13*time.Hour + 15*time.Minute, 13.25},
		{23*time.Hour + 30*time.Minute, 11.5}, // halfway from 23 back to 0
	} {
		if got := PatternAt(net, "res", wed.Add(c.at), nil); math.Abs(got-c.want) > 1e-12 {
			t.Errorf("PatternAt(+%v) = %g, want %g", c.at, got, c.want)
		}
	}
	if got := PatternAt(net, "res", time.Date(2026, 3, 7, 10, 0, 0, 0, time.UTC), nil); got != 5 {
		t.Errorf("Saturday uses the weekend pattern: got %g, want 5", got)
	}
	if got := PatternAt(net, "", wed, nil); got != 1 {
		t.Errorf("no pattern: got %g, want 1", got)
	}
	// 06:00 in a zone two hours east of UTC is 04:00 UTC.
	loc := time.FixedZone("east2", 2*3600)
	if got := PatternAt(net, "res", time.Date(2026, 3, 4, 4, 0, 0, 0, time.UTC), loc); got != 6 {
		t.Errorf("local time: got %g, want 6", got)
	}
}

func TestBase(t *testing.T) {
	net := patternNet()
	got := Base(net, time.Date(2026, 3, 4, 3, 0, 0, 0, time.UTC), nil, nil)
	if got[0] != 6 {
		t.Errorf("Base = %g, want 2 L/s × 3 = 6", got[0])
	}
}
