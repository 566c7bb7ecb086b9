package demand

import (
	"fmt"
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

// Base is, junction by junction, the base demand times PatternAt on the
// junction's zone clock (the rule of the package doc), bit for bit, also
// with more (pattern, zone) pairs than its short list holds and with
// junctions of one pair spread through the network; other nodes and
// junctions without demand get 0.
func TestBaseIsDemandTimesPattern(t *testing.T) {
	var nodes []network.Node
	for i := 0; i < 3000; i++ {
		n := network.Node{ID: fmt.Sprintf("J%d", i), Kind: network.Junction, Demand: 0.1 + float64(i%13)/7,
			Pattern: fmt.Sprintf("p%d", (i*7)%11), Zone: fmt.Sprintf("z%d", (i/5)%6)}
		switch {
		case i%97 == 0:
			n.Kind = network.Reservoir
		case i%89 == 0:
			n.Demand = 0
		case i%31 == 0:
			n.Pattern = "" // no pattern: multiplier 1
		}
		nodes = append(nodes, n)
	}
	net := network.New(nodes, nil)
	for p := 0; p < 11; p++ {
		vals := make([]float64, 24)
		for h := range vals {
			vals[h] = 0.3 + float64((h*(p+3))%17)/9
		}
		net.Patterns[fmt.Sprintf("p%d", p)] = vals
		if p%2 == 0 {
			net.Patterns[fmt.Sprintf("p%d-weekend", p)] = vals[:12]
		}
	}
	zoneLoc := map[string]*time.Location{"z1": time.FixedZone("east3", 3*3600), "z2": time.FixedZone("west5", -5*3600), "z4": time.FixedZone("east3b", 3*3600)}
	for _, at := range []time.Time{time.Date(2026, 3, 4, 3, 17, 0, 0, time.UTC), time.Date(2026, 3, 7, 22, 40, 0, 0, time.UTC)} {
		got := Base(net, at, zoneLoc, nil)
		for i := range net.Nodes {
			n := &net.Nodes[i]
			want := 0.0
			if n.Kind == network.Junction && n.Demand != 0 {
				want = n.Demand * PatternAt(net, n.Pattern, at, zoneLoc[n.Zone])
			}
			if math.Float64bits(got[i]) != math.Float64bits(want) {
				t.Fatalf("%s at %s: Base %v, demand × pattern %v", n.ID, at, got[i], want)
			}
		}
	}
}
