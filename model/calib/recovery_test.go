package calib

import (
	"bytes"
	"context"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"plumbline/model/netgen"
	"plumbline/model/network"
)

// recoveryRun simulates readings from a true demo town whose roughness
// groups and zone demand shapes differ from the records by known
// factors, fits the recorded town to them, and returns the result with
// the true values by parameter name.
func recoveryRun(t *testing.T, seed uint64) (*Result, map[string]float64) {
	return recoveryRunWith(t, seed, false)
}

// recoveryRunWith is recoveryRun; with balanced, the problem carries the
// zones' balance meters (netgen.DemoZones), so that each zone is modelled
// at its metered consumption and its multipliers come from the meters.
func recoveryRunWith(t *testing.T, seed uint64, balanced bool) (*Result, map[string]float64) {
	t.Helper()
	net := demoTown(t)
	rng := rand.New(rand.NewPCG(seed, 99))
	groups := buildGroups(net)
	rough := map[string]float64{}
	truth := map[string]float64{}
	for _, g := range groups {
		f := 0.75 + 0.35*rng.Float64() // C from 75 % to 110 % of the record
		rough[g.name] = f
		truth["roughness "+g.name] = g.mean * f
	}
	mult := map[string][24]float64{}
	for _, z := range net.Zones() {
		var c [24]float64
		ph := 2 * math.Pi * rng.Float64()
		for h := range c {
			c[h] = 1 + 0.15*math.Sin(2*math.Pi*float64(h)/24+ph) + 0.08*(rng.Float64()-0.5)
			truth["demand "+z+" weekday "+two(h)+":00"] = c[h]
		}
		mult[z] = c
	}
	tn := trueTown(net, rough, mult)
	sensors := netgen.DemoSensors(net)
	snaps := simulate(t, tn, sensors, monday, 3, seed, nil)
	p := Problem{Network: net, Sensors: sensors, Snapshots: snaps}
	if balanced {
		p.Balances = map[string]ZoneMeters{}
		for _, z := range netgen.DemoZones(net, sensors) {
			p.Balances[z.Zone] = ZoneMeters{Inlets: z.Inlets, Outlets: z.Outlets}
		}
	}
	res, err := Fit(context.Background(), p, Settings{SuspectCandidates: -1})
	if err != nil {
		t.Fatal(err)
	}
	return res, truth
}

func two(h int) string {
	if h < 10 {
		return "0" + string(rune('0'+h))
	}
	return string(rune('0'+h/10)) + string(rune('0'+h%10))
}

// TestRecovery checks that the fit recovers known roughness groups and
// zone demand multipliers within the uncertainty it reports: for a
// correct standard error and near-normal errors, the true value lies
// within two standard errors of the estimate in about 95 % of cases
// (the normal distribution's 95.4 % within ±2σ; any statistics text).
// The issue asks for at least 90 % over seeded runs; the readings carry
// the simulator's default demand noise (15 % per junction, 5 % per zone
// and day) and each sensor's accuracy as instrument noise. It holds for
// the multipliers fitted from the flows and for those taken from the
// zones' balance meters (the zones modelled inflow-matched).
func TestRecovery(t *testing.T) {
	t.Run("fitted", func(t *testing.T) { testRecovery(t, false) })
	t.Run("balanced", func(t *testing.T) { testRecovery(t, true) })
}

func testRecovery(t *testing.T, balanced bool) {
	var inside, total, roughInside, roughTotal int
	for seed := uint64(1); seed <= 4; seed++ {
		res, truth := recoveryRunWith(t, seed, balanced)
		if balanced && res.InflowMatched == 0 {
			t.Fatalf("seed %d: no zone-snapshot inflow-matched", seed)
		}
		if res.Status != Converged {
			t.Errorf("seed %d: status %s, want converged", seed, res.Status)
		}
		if res.MisfitAfter >= res.MisfitBefore {
			t.Errorf("seed %d: misfit %.4g after, %.4g before: the fit did not improve", seed, res.MisfitAfter, res.MisfitBefore)
		}
		if res.Validation.Snapshots == 0 || res.Validation.MisfitAfter >= res.Validation.MisfitBefore {
			t.Errorf("seed %d: validation misfit %.4g after, %.4g before over %d snapshots: want an improvement on held-out days",
				seed, res.Validation.MisfitAfter, res.Validation.MisfitBefore, res.Validation.Snapshots)
		}
		for _, p := range res.Parameters {
			want, ok := truth[p.Name]
			if !ok || !p.Identifiable {
				continue
			}
			total++
			in := math.Abs(p.Estimate-want) <= 2*p.StdErr
			if in {
				inside++
			}
			if p.Kind == Roughness {
				roughTotal++
				if in {
					roughInside++
				}
			}
			if !in && testing.Verbose() {
				t.Logf("seed %d: %s estimate %.4g ± %.2g, true %.4g (%.1f s.e.)", seed, p.Name, p.Estimate, p.StdErr, want, (p.Estimate-want)/p.StdErr)
			}
		}
		if seed == 1 && testing.Verbose() {
			var buf bytes.Buffer
			if err := res.WriteText(&buf); err != nil {
				t.Fatal(err)
			}
			t.Log(buf.String())
		}
	}
	t.Logf("true value within 2 s.e. in %d of %d cases (roughness %d of %d)", inside, total, roughInside, roughTotal)
	if total < 100 || roughTotal < 8 {
		t.Fatalf("only %d identifiable parameter cases (%d roughness): the test does not test enough", total, roughTotal)
	}
	if float64(inside) < 0.9*float64(total) {
		t.Errorf("true value within 2 s.e. in %d of %d cases (%.1f %%), want at least 90 %%", inside, total, 100*float64(inside)/float64(total))
	}
}

// TestUnidentifiable checks that a roughness group no water moves in,
// and weekend demand multipliers when no weekend is in the data, are
// named as unidentifiable and keep their recorded values.
func TestUnidentifiable(t *testing.T) {
	res, _ := recoveryRun(t, 11)
	p, ok := res.Parameter("roughness spur")
	if !ok {
		t.Fatal("no parameter for the spur group")
	}
	if p.Identifiable || p.Estimate != p.Prior {
		t.Errorf("spur: identifiable %v, estimate %.4g, prior %.4g: want unidentifiable at the prior", p.Identifiable, p.Estimate, p.Prior)
	}
	weekend := 0
	for _, q := range res.Parameters {
		if q.Kind == DemandMultiplier && q.DayType == "weekend" {
			weekend++
			if q.Identifiable || q.Estimate != 1 {
				t.Errorf("%s: identifiable %v, estimate %.4g: want unidentifiable at 1 with no weekend data", q.Name, q.Identifiable, q.Estimate)
			}
		}
	}
	if weekend == 0 {
		t.Error("no weekend multipliers reported")
	}
	var buf bytes.Buffer
	if err := res.WriteText(&buf); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(buf.String(), "Not identifiable") || !strings.Contains(buf.String(), "roughness spur") {
		t.Errorf("report does not name the unidentifiable spur group:\n%s", buf.String())
	}
	// The calibrated network carries the zone patterns.
	for _, z := range res.Network.Zones() {
		if _, ok := res.Network.Patterns[z+"-residential-calibrated"]; !ok {
			if _, ok2 := res.Network.Patterns[z+"-calibrated"]; !ok2 {
				t.Errorf("zone %s: no calibrated pattern in the network (patterns %v)", z, keys(res.Network.Patterns))
			}
		}
	}
	var _ = network.Pipe
}

func keys(m map[string][]float64) []string {
	var out []string
	for k := range m {
		out = append(out, k)
	}
	return out
}

// TestBalancedWeekendFollowsWeekday checks the measured multipliers of a
// balanced fit on weekdays alone: every weekend knot is unidentified and
// takes its weekday knot's value, so the calibrated network's weekend
// pattern equals its weekday one at every step (no step in the expected
// consumption at midnight between a Friday and a Saturday), and every
// weekday knot is identified from its days.
func TestBalancedWeekendFollowsWeekday(t *testing.T) {
	res, _ := recoveryRunWith(t, 11, true)
	wd := map[string]float64{}
	for _, p := range res.Parameters {
		if p.Kind == DemandMultiplier && p.DayType == "weekday" {
			if !p.Identifiable {
				t.Errorf("%s: not identified from three weekdays", p.Name)
			}
			wd[p.Zone+two(p.Hour)] = p.Estimate
		}
	}
	n := 0
	for _, p := range res.Parameters {
		if p.Kind == DemandMultiplier && p.DayType == "weekend" {
			n++
			if p.Identifiable || p.Estimate != wd[p.Zone+two(p.Hour)] {
				t.Errorf("%s: identifiable %v, estimate %.4g; want unidentified at the weekday's %.4g", p.Name, p.Identifiable, p.Estimate, wd[p.Zone+two(p.Hour)])
			}
		}
	}
	if n == 0 {
		t.Fatal("no weekend multipliers reported")
	}
	pairs := 0
	for name, v := range res.Network.Patterns {
		we, ok := res.Network.Patterns[name+"-weekend"]
		if !ok {
			continue
		}
		pairs++
		for i := range v {
			if we[i] != v[i] {
				t.Errorf("pattern %s step %d: weekend %.6g, weekday %.6g", name, i, we[i], v[i])
				break
			}
		}
	}
	if pairs == 0 {
		t.Errorf("no weekday and weekend calibrated patterns in the network (patterns %v)", keys(res.Network.Patterns))
	}
}
