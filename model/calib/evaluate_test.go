package calib

import (
	"context"
	"math"
	"strings"
	"testing"

	"plumbline/model/netgen"
	"plumbline/model/sim"
	"plumbline/model/units"
)

// TestEvaluateTrueNetworkSeesOnlyInstrumentNoise compares the network
// the readings were simulated from, with demand noise off, with its own
// readings: what is left is the instruments' Gaussian noise of their
// stated accuracy, so the mean (r/σ)² is 1 (the expectation of a χ² of
// one degree of freedom) and each hour's residual σ is the accuracy
// (sample standard deviation of a normal sample; with 10 values per hour
// its relative standard error is about 1/√18 ≈ 24 %, about 5 % for the
// mean over the 24 hours, from the χ² distribution, from memory; the
// mean is checked to 25 %, since loggers next to pump stations also see
// the pumps' switching within the hour). A network with aged pipes it does not know
// of fits worse.
func TestEvaluateTrueNetworkSeesOnlyInstrumentNoise(t *testing.T) {
	net, err := netgen.DemoTown()
	if err != nil {
		t.Fatal(err)
	}
	sensors := netgen.DemoSensors(net)
	snaps := simulate(t, net, sensors, monday, 10, 5, func(s *sim.Settings) { s.NoDemandNoise = true })
	ev, err := Evaluate(context.Background(), Problem{Network: net, Sensors: sensors, Snapshots: snaps}, Settings{})
	if err != nil {
		t.Fatal(err)
	}
	if ev.Snapshots != len(snaps) || ev.Failed != 0 {
		t.Fatalf("evaluated %d snapshots (%d failed), want %d", ev.Snapshots, ev.Failed, len(snaps))
	}
	if ev.Misfit < 0.85 || ev.Misfit > 1.15 {
		t.Errorf("misfit of the true network = %.3f, want 1 ± 0.15 (χ² of one degree of freedom per reading)", ev.Misfit)
	}
	checked := 0
	for _, sr := range ev.Sensors {
		if sr.Quantity != "pressure" {
			continue
		}
		var sen = sensors[0]
		for _, s := range sensors {
			if s.ID == sr.ID {
				sen = s
			}
		}
		acc, err := units.ToCanonical(sen.Quantity, sen.Unit, sen.Accuracy)
		if err != nil {
			t.Fatal(err)
		}
		var mean float64
		for h := range 24 {
			if sr.HourCount[h] != 10 {
				t.Errorf("%s hour %d: %d values, want 10", sr.ID, h, sr.HourCount[h])
			}
			mean += sr.HourSigma[h] / 24
		}
		if math.Abs(mean-acc) > 0.25*acc {
			t.Errorf("%s: mean hourly residual σ = %.4f m, want %.4f m ± 25 %%", sr.ID, mean, acc)
		}
		checked++
	}
	if checked == 0 {
		t.Fatal("no pressure logger evaluated")
	}

	aged := net.Clone()
	for l := range aged.Links {
		aged.Links[l].Roughness *= 1.4 // the records say new, the pipes are old
	}
	ev2, err := Evaluate(context.Background(), Problem{Network: aged, Sensors: sensors, Snapshots: snaps}, Settings{})
	if err != nil {
		t.Fatal(err)
	}
	if ev2.Misfit < 2*ev.Misfit {
		t.Errorf("misfit with wrong roughness = %.3f, want well above the true network's %.3f", ev2.Misfit, ev.Misfit)
	}
}

func TestEvaluateBadInput(t *testing.T) {
	if _, err := Evaluate(context.Background(), Problem{}, Settings{}); err == nil || !strings.Contains(err.Error(), "no network") {
		t.Errorf("no network: error %v, want one saying so", err)
	}
	net, err := netgen.DemoTown()
	if err != nil {
		t.Fatal(err)
	}
	sensors := netgen.DemoSensors(net)
	if _, err := Evaluate(context.Background(), Problem{Network: net, Sensors: sensors}, Settings{}); err == nil || !strings.Contains(err.Error(), "snapshots") {
		t.Errorf("no snapshots: error %v, want one saying so", err)
	}
}
