package calib

import (
	"context"
	"math"
	"testing"

	"plumbline/model/netgen"
)

// TestReweightFindsTheNoisySensor simulates readings in which one
// pressure logger scatters far more than its stated accuracy (noise of
// 30 times the 0.02 bar the problem says), from a town whose pipe groups
// are rougher than recorded, and fits it with the stated accuracies.
// The reweighted fit must report that logger's noise factor near 30 and
// every other logger's near one (the sample standard deviation of n
// normal values has a relative standard error of about 1/√(2n), under
// 5 % here, any statistics text; 15 % and 1.5 leave room for the fit's
// own model error: consumption noise at the junctions), and, weighing the logger for what it is, recover
// the groups' true roughness better than the fit that trusts it: a
// smaller sum of squared log errors over the identified groups, over
// three seeded runs (least squares weighted by the inverse variance is
// the most efficient linear estimate, Aitken 1935).
func TestReweightFindsTheNoisySensor(t *testing.T) {
	net := demoTown(t)
	sensors := netgen.DemoSensors(net)
	noisy := -1
	for i, s := range sensors {
		if s.ID == "P-high-03" {
			noisy = i
		}
	}
	if noisy < 0 {
		t.Fatal("no P-high-03 in the demo sensors")
	}
	simSensors := append(sensors[:0:0], sensors...)
	simSensors[noisy].Accuracy *= 30
	groups := buildGroups(net)
	rough := map[string]float64{}
	for i, g := range groups {
		rough[g.name] = 0.8 + 0.04*float64(i%5)
	}
	tn := trueTown(net, rough, nil)
	var errW, errP float64
	for seed := uint64(1); seed <= 3; seed++ {
		snaps := simulate(t, tn, simSensors, monday, 3, 40+seed, nil)
		p := Problem{Network: net, Sensors: sensors, Snapshots: snaps}
		set := Settings{SuspectCandidates: -1, PipeSpread: -1}
		res, err := Fit(context.Background(), p, set)
		if err != nil {
			t.Fatal(err)
		}
		set.NoReweight = true
		plain, err := Fit(context.Background(), p, set)
		if err != nil {
			t.Fatal(err)
		}
		for _, f := range res.Sensors {
			if f.Quantity != "pressure" {
				continue
			}
			if f.ID == sensors[noisy].ID {
				if math.Abs(f.NoiseFactor-30) > 4.5 {
					t.Errorf("seed %d: %s: noise factor %.2f, want 30 ± 4.5", seed, f.ID, f.NoiseFactor)
				}
			} else if f.NoiseFactor > 1.5 {
				t.Errorf("seed %d: %s: noise factor %.2f, want about 1 (≤ 1.5)", seed, f.ID, f.NoiseFactor)
			}
		}
		sq := func(r *Result) float64 {
			s := 0.0
			for _, pr := range r.Parameters {
				if pr.Kind == Roughness && pr.Identifiable {
					d := math.Log(pr.Estimate / (pr.Prior * rough[pr.Group]))
					s += d * d
				}
			}
			return s
		}
		errW += sq(res)
		errP += sq(plain)
	}
	t.Logf("sum of squared log errors of the groups: reweighted %.4g, accuracy weights %.4g", errW, errP)
	if errW >= errP {
		t.Errorf("reweighted fit's squared log error %.4g, the accuracy-weighted fit's %.4g: want smaller", errW, errP)
	}
}
