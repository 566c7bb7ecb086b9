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

// TestEvaluateInflowMatched checks the inflow-matched evaluation by
// conservation of mass (Kirchhoff's junction rule over each zone): with
// each zone's demand scaled to what its meters measure, the modelled
// flow into the high and low zones, each fed through one metered link,
// equals the measured one, and the central zone's inlet residual equals
// the pump meter's (the central zone passes the pump's water on to the
// hill tank: inflow less outflows is matched, so what the model gets
// wrong at the inlet is what it gets wrong at the pump). Without the day-
// to-day swing of consumption (5 % per zone and day in these readings)
// the loggers' residual scatter falls.
func TestEvaluateInflowMatched(t *testing.T) {
	net, err := netgen.DemoTown()
	if err != nil {
		t.Fatal(err)
	}
	sensors := netgen.DemoSensors(net)
	snaps := simulate(t, net, sensors, monday, 6, 8, func(s *sim.Settings) { s.DailyVariation = 0.05 })
	bal := map[string]ZoneMeters{}
	for _, z := range netgen.DemoZones(net, sensors) {
		bal[z.Zone] = ZoneMeters{Inlets: z.Inlets, Outlets: z.Outlets}
	}
	p := Problem{Network: net, Sensors: sensors, Snapshots: snaps}
	plain, err := Evaluate(context.Background(), p, Settings{})
	if err != nil {
		t.Fatal(err)
	}
	p.Balances = bal
	ev, err := Evaluate(context.Background(), p, Settings{})
	if err != nil {
		t.Fatal(err)
	}
	if !ev.InflowMatched || plain.InflowMatched || ev.Matched != 3*ev.Snapshots || ev.Unmatched != 0 {
		t.Fatalf("matched %v (plain %v), %d zone-snapshots matched, %d not, over %d snapshots; want 3 zones each time",
			ev.InflowMatched, plain.InflowMatched, ev.Matched, ev.Unmatched, ev.Snapshots)
	}
	by := map[string]SensorResiduals{}
	for _, sr := range ev.Sensors {
		by[sr.ID] = sr
	}
	for _, id := range []string{"F-in-high", "F-in-low"} {
		if r := by[id].Fit.RMSE; r > 1e-4 {
			t.Errorf("%s: residual RMSE %.3g L/s with the zone matched to it, want 0 (mass balance)", id, r)
		}
	}
	for h := range 24 {
		c, pm := by["F-in-central"].HourMean[h], by["F-pump-hill"].HourMean[h]
		if math.Abs(c-pm) > 1e-4 {
			t.Errorf("hour %02d: central inlet residual %.5f L/s, pump %.5f L/s: want equal (mass balance)", h, c, pm)
		}
	}
	var sm, sp float64
	n := 0
	for _, sr := range ev.Sensors {
		if sr.Quantity != "pressure" {
			continue
		}
		n += 24
		for _, q := range plain.Sensors {
			if q.ID == sr.ID {
				for h := range 24 {
					sm += sr.HourSigma[h] * sr.HourSigma[h]
					sp += q.HourSigma[h] * q.HourSigma[h]
				}
			}
		}
	}
	if sm >= sp {
		t.Errorf("loggers' residual variance %.4g m² inflow-matched, %.4g on the patterns: want lower matched", sm, sp)
	}
	t.Logf("loggers' pooled residual σ: %.3f m matched, %.3f m on the patterns", math.Sqrt(sm/float64(n)), math.Sqrt(sp/float64(n)))

	p.Balances = map[string]ZoneMeters{"high": {Inlets: []string{"P-high-01"}}}
	ev, err = Evaluate(context.Background(), p, Settings{})
	if err != nil {
		t.Fatal(err)
	}
	if ev.Matched != 0 || !strings.Contains(strings.Join(ev.Warnings, "\n"), "P-high-01") {
		t.Errorf("a pressure logger as balance meter: %d matched, warnings %q; want none matched and a warning naming it", ev.Matched, ev.Warnings)
	}
}
