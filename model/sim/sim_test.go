package sim

import (
	"context"
	"math"
	"testing"
	"time"

	"plumbline/model/finding"
	"plumbline/model/network"
	"plumbline/model/telemetry"
)

// testTown is a small invented network: a reservoir feeding a looped
// square of junctions, a pump lifting from J-2 into a tank that feeds J-5.
func testTown() *network.Network {
	nodes := []network.Node{
		{ID: "R-1", Kind: network.Reservoir, Head: 80, Elevation: 80},
		{ID: "J-1", Kind: network.Junction, Elevation: 30, Demand: 2, Pattern: "res", Zone: "low"},
		{ID: "J-2", Kind: network.Junction, Elevation: 32, Demand: 1.5, Pattern: "res", Zone: "low"},
		{ID: "J-3", Kind: network.Junction, Elevation: 31, Demand: 1, Pattern: "res", Zone: "low"},
		{ID: "J-4", Kind: network.Junction, Elevation: 29, Demand: 2.5, Pattern: "res", Zone: "low"},
		{ID: "T-1", Kind: network.Tank, Elevation: 95, Level: 3, MinLevel: 0.5, MaxLevel: 5, TankDiameter: 8, Zone: "high"},
		{ID: "J-5", Kind: network.Junction, Elevation: 60, Demand: 1, Pattern: "res", Zone: "high"},
	}
	pipe := func(id string, a, b int, l, d float64) network.Link {
		return network.Link{ID: id, Kind: network.Pipe, From: a, To: b, Length: l, Diameter: d, Roughness: 120}
	}
	links := []network.Link{
		pipe("P-1", 0, 1, 500, 200),
		pipe("P-2", 1, 2, 300, 150),
		pipe("P-3", 2, 3, 300, 150),
		pipe("P-4", 3, 4, 300, 150),
		pipe("P-5", 4, 1, 300, 150),
		{ID: "PU-1", Kind: network.Pump, From: 2, To: 5, Curve: [][2]float64{{0, 90}, {5, 80}, {10, 55}}, Speed: 1},
		pipe("P-6", 5, 6, 400, 100),
	}
	n := network.New(nodes, links)
	n.Patterns["res"] = []float64{0.4, 0.35, 0.3, 0.3, 0.4, 0.6, 1.0, 1.4, 1.4, 1.2, 1.1, 1.0, 1.1, 1.0, 0.95, 0.9, 1.0, 1.2, 1.5, 1.5, 1.3, 1.0, 0.8, 0.6}
	return n
}

func baseSettings() Settings {
	return Settings{
		Start:    time.Date(2026, 3, 2, 0, 0, 0, 0, time.UTC),
		Duration: 48 * time.Hour,
		Step:     5 * time.Minute,
		Seed:     11,
		Sensors: []telemetry.Sensor{
			{ID: "P-J3", Quantity: telemetry.Pressure, At: "J-3", Unit: "bar", Accuracy: 0.02},
			{ID: "F-in", Quantity: telemetry.Flow, At: "P-1", Unit: "L/s", Accuracy: 0.05},
			{ID: "L-T1", Quantity: telemetry.Level, At: "T-1", Unit: "m", Accuracy: 0.01},
		},
	}
}

// Mass balance (Kirchhoff's junction rule over the whole network): at
// every step the net outflow of reservoirs and tanks equals consumption
// plus leakage; and each tank's level moves by its net inflow over its
// plan area (conservation of volume), checked from the solution's flows.
func TestMassBalanceAndTankVolume(t *testing.T) {
	net := testTown()
	s := baseSettings()
	s.Events = []Event{{Kind: finding.Leak, At: "J-4", Start: s.Start.Add(20 * time.Hour), SizeLPS: 1.5, Exponent: 0.5}}
	tk, _ := net.NodeIndex("T-1")
	area := math.Pi * 8 * 8 / 4
	var prevLevel, prevInflow float64
	steps := 0
	pumpSwitches, lastPump := 0, ""
	res, err := Run(context.Background(), net, s, func(Reading) error { return nil }, Options{OnStep: func(st *StepState) error {
		if e := math.Abs(st.SourceFlow - st.Consumed - st.Leaked); e > 1e-5 {
			t.Errorf("%s: sources give %.6f L/s, junctions take %.6f + leak %.6f", st.Time, st.SourceFlow, st.Consumed, st.Leaked)
		}
		lv := st.TankLevel["T-1"]
		if steps > 0 {
			want := prevLevel + prevInflow/1000*300/area
			if want > 5 || want < 0.5 {
				want = math.Min(5, math.Max(0.5, want))
			}
			if math.Abs(lv-want) > 1e-9 {
				t.Errorf("%s: tank level %.6f m, volume balance gives %.6f m", st.Time, lv, want)
			}
		}
		in := 0.0
		for l, lk := range net.Links {
			if lk.To == tk {
				in += st.Solution.Flow[l]
			}
			if lk.From == tk {
				in -= st.Solution.Flow[l]
			}
		}
		state := st.Solution.State[5].String()
		if lastPump != "" && state != lastPump {
			pumpSwitches++
		}
		lastPump = state
		prevLevel, prevInflow = lv, in
		steps++
		return nil
	}})
	if err != nil {
		t.Fatal(err)
	}
	if res.Steps != 576 || steps != 576 {
		t.Errorf("solved %d steps, want 48h/5m = 576", res.Steps)
	}
	if pumpSwitches == 0 {
		t.Error("the pump never switched: tank control not exercised")
	}
	if len(res.Truth) != 1 || res.Truth[0].Zone != "low" || res.Truth[0].SizeLPS != 1.5 {
		t.Errorf("truth = %+v", res.Truth)
	}
}

// A FAVAD leak (May 1994) follows q = C·p^N1 as pressure varies over the
// day, with C fixed from the size at the start pressure.
func TestLeakFollowsFAVAD(t *testing.T) {
	net := testTown()
	s := baseSettings()
	s.NoDemandNoise = true
	start := s.Start.Add(3 * time.Hour)
	s.Events = []Event{{Kind: finding.Leak, At: "J-4", Start: start, SizeLPS: 2, Exponent: 1.18}}
	j4, _ := net.NodeIndex("J-4")
	var c float64
	var prevP float64
	var minQ, maxQ = math.Inf(1), 0.0
	_, err := Run(context.Background(), net, s, func(Reading) error { return nil }, Options{OnStep: func(st *StepState) error {
		p := st.Solution.Pressure[j4]
		q := st.Solution.Leak[j4]
		switch {
		case st.Time.Before(start):
			if q != 0 {
				t.Fatalf("leak before its start: %g", q)
			}
		case st.Time.Equal(start):
			c = 2 / math.Pow(prevP, 1.18)
			fallthrough
		default:
			want := c * math.Pow(p, 1.18)
			if math.Abs(q-want) > 1e-6*want {
				t.Errorf("%s: leak %.6f L/s at %.3f m, FAVAD gives %.6f", st.Time, q, p, want)
			}
			minQ, maxQ = math.Min(minQ, q), math.Max(maxQ, q)
		}
		prevP = p
		return nil
	}})
	if err != nil {
		t.Fatal(err)
	}
	if maxQ-minQ < 0.01 {
		t.Errorf("leak outflow did not vary with pressure over the day (%.4f..%.4f)", minQ, maxQ)
	}
}

// Reading noise has the configured standard deviation: with demand noise
// off and a flat pattern, the level of a reservoir-fed pressure logger is
// constant, so the readings' scatter is the instrument's alone.
func TestNoiseStandardDeviation(t *testing.T) {
	net := testTown()
	net.Patterns["res"] = []float64{1}
	for i := range net.Links {
		if net.Links[i].Kind == network.Pump {
			net.Links[i].Status = network.Closed
		}
	}
	s := baseSettings()
	s.NoDemandNoise = true
	s.Duration = 72 * time.Hour
	s.Sensors = []telemetry.Sensor{{ID: "P-J3", Quantity: telemetry.Pressure, At: "J-3", Unit: "m"}}
	s.Noise = map[telemetry.Quantity]float64{telemetry.Pressure: 0.1}
	var xs []float64
	_, err := Run(context.Background(), net, s, func(r Reading) error { xs = append(xs, r.Value); return nil }, Options{})
	if err != nil {
		t.Fatal(err)
	}
	mean := 0.0
	for _, x := range xs {
		mean += x
	}
	mean /= float64(len(xs))
	v := 0.0
	for _, x := range xs {
		v += (x - mean) * (x - mean)
	}
	sd := math.Sqrt(v / float64(len(xs)-1))
	// The sample σ of n normal values has a relative standard error of
	// about 1/√(2(n−1)) (≈ 2.4% for n = 864); allow 8%.
	if math.Abs(sd-0.1)/0.1 > 0.08 {
		t.Errorf("reading σ = %.4f m from %d readings, want 0.1", sd, len(xs))
	}
}

// Same settings and seed, same readings bit for bit; another seed differs.
// Late delivery keeps every reading and emits in arrival order.
func TestDeterministicAndLateDelivery(t *testing.T) {
	net := testTown()
	run := func(seed uint64) []Reading {
		s := baseSettings()
		s.Seed = seed
		s.Duration = 12 * time.Hour
		s.LateFraction, s.MaxDelay, s.MissingFraction = 0.2, 20*time.Minute, 0.05
		s.Resolution = map[telemetry.Quantity]float64{telemetry.Pressure: 0.01}
		var out []Reading
		if _, err := Run(context.Background(), net, s, func(r Reading) error { out = append(out, r); return nil }, Options{}); err != nil {
			t.Fatal(err)
		}
		return out
	}
	a, b, c := run(5), run(5), run(6)
	if len(a) != len(b) {
		t.Fatalf("reruns gave %d and %d readings", len(a), len(b))
	}
	for i := range a {
		if a[i] != b[i] {
			t.Fatalf("reading %d differs between reruns: %+v vs %+v", i, a[i], b[i])
		}
	}
	same := len(a) == len(c)
	for i := 0; same && i < len(a); i++ {
		same = a[i] == c[i]
	}
	if same {
		t.Error("another seed gave the same readings")
	}
	late, outOfOrder := 0, 0
	for i, r := range a {
		if r.Arrival.After(r.Time) {
			late++
		}
		if i > 0 && r.Arrival.Before(a[i-1].Arrival) {
			t.Fatalf("reading %d emitted before an earlier arrival", i)
		}
		if i > 0 && r.Time.Before(a[i-1].Time) {
			outOfOrder++
		}
	}
	// 3 sensors × 144 readings, 5% missing: about 410 delivered.
	if len(a) < 380 || len(a) > 432 {
		t.Errorf("%d readings delivered, want about 410", len(a))
	}
	if late == 0 || outOfOrder == 0 {
		t.Errorf("late %d, out of order %d: late delivery not exercised", late, outOfOrder)
	}
}

func TestSensorFaults(t *testing.T) {
	net := testTown()
	s := baseSettings()
	s.Duration = 24 * time.Hour
	s.Noise = map[telemetry.Quantity]float64{telemetry.Pressure: 0.01}
	start := s.Start.Add(6 * time.Hour)
	s.Events = []Event{{Kind: finding.SensorFault, At: "P-J3", Start: start, Mode: "stuck"}}
	var vals []float64
	_, err := Run(context.Background(), net, s, func(r Reading) error {
		if r.Sensor == "P-J3" && !r.Time.Before(start) {
			vals = append(vals, r.Value)
		}
		return nil
	}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	for _, v := range vals {
		if v != vals[0] {
			t.Fatalf("stuck sensor moved: %g then %g", vals[0], v)
		}
	}
	if len(vals) < 200 {
		t.Errorf("only %d readings after the fault", len(vals))
	}
}
