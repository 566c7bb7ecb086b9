package detect

import (
	"math"
	"testing"
	"time"

	"plumbline/model/finding"
	"plumbline/model/sim"
	"plumbline/model/telemetry"
)

// The solve-ahead must not change what the detector decides: over a run
// with a leak and a run whose inlet meter fails (it is excluded from the
// balance part way through, so that the workers' guesses of the
// conditions go wrong for a while), the detector fed through Ahead
// raises the same findings as Step alone, and its expected values agree
// to within what the solver's tolerance allows (a last flow change of
// 0.001 L/s moves a head by far less than 1 mm here). Most steps must
// take the workers' solves, or the test would not test them.
func TestAheadDecidesAsStepAlone(t *testing.T) {
	net := gridTown()
	for _, tc := range []struct {
		name string
		ev   sim.Event
	}{
		{"leak", sim.Event{Kind: finding.Leak, At: "J-24", Start: t0.Add(8*24*time.Hour + 22*time.Hour), SizeLPS: 1.5}},
		{"meter", sim.Event{Kind: finding.SensorFault, At: "F-in", Start: t0.Add(9*24*time.Hour + 3*time.Hour), Mode: "stuck"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			snaps := simulate(t, net, 11, 5, []sim.Event{tc.ev})
			one, _ := New(gridConfig(net))
			two, _ := New(gridConfig(net))
			ahead, err := two.NewAhead()
			if err != nil {
				t.Fatal(err)
			}
			defer ahead.Close()
			var want, got []finding.Finding
			worst, presolved, steps := 0.0, 0, 0
			step := func(s telemetry.Snapshot) {
				r1, err := one.Step(s)
				if err != nil {
					t.Fatal(err)
				}
				r2, err := ahead.Step(s)
				if err != nil {
					t.Fatal(err)
				}
				want, got = append(want, r1.Findings...), append(got, r2.Findings...)
				for i := range r1.Expected {
					if d := math.Abs(r1.Expected[i] - r2.Expected[i]); d > worst {
						worst = d
					}
				}
				steps++
				if r2.Presolved {
					presolved++
				}
			}
			for k, s := range snaps {
				if err := ahead.Queue(s); err != nil {
					t.Fatal(err)
				}
				if k >= 2 {
					step(snaps[k-2])
				}
			}
			for ahead.Len() > 0 {
				step(ahead.Oldest())
			}
			if len(want) == 0 {
				t.Fatal("no finding to compare")
			}
			if len(got) != len(want) {
				t.Fatalf("with the solve-ahead %d findings, without %d", len(got), len(want))
			}
			for i := range want {
				if got[i].Kind != want[i].Kind || !got[i].Raised.Equal(want[i].Raised) || got[i].Candidates[0].ID != want[i].Candidates[0].ID ||
					math.Abs(got[i].SizeLPS-want[i].SizeLPS) > 0.01 {
					t.Errorf("finding %d: with the solve-ahead %+v, without %+v", i, got[i], want[i])
				}
			}
			if worst > 1e-3 {
				t.Errorf("expected values differ by up to %g", worst)
			}
			if presolved < steps*9/10 {
				t.Errorf("only %d of %d steps took the workers' solves", presolved, steps)
			}
			t.Logf("%d findings; %d of %d steps presolved; expected values within %.2g", len(want), presolved, steps, worst)
		})
	}
}
