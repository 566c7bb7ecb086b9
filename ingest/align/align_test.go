package align

import (
	"math"
	"math/rand/v2"
	"reflect"
	"slices"
	"sort"
	"testing"
	"time"

	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/stat"
	"gonum.org/v1/gonum/stat/distuv"

	"plumbline/model/telemetry"
)

var t0 = time.Date(2026, 3, 2, 0, 0, 0, 0, time.UTC)

func rd(sensor string, at time.Duration, v float64) telemetry.Reading {
	return telemetry.Reading{Sensor: sensor, Time: t0.Add(at), Value: v, Unit: "m"}
}

type sink struct{ snaps []telemetry.Snapshot }

func (s *sink) emit(x telemetry.Snapshot) { s.snaps = append(s.snaps, x) }

func newAligner(t *testing.T, cfg Config) (*Aligner, *sink) {
	t.Helper()
	s := &sink{}
	a, err := New(cfg, s.emit)
	if err != nil {
		t.Fatal(err)
	}
	return a, s
}

// TestAggregates checks mean, min and max against gonum (an independent
// implementation), the half-open step interval and the removal of repeats.
func TestAggregates(t *testing.T) {
	a, s := newAligner(t, Config{Step: 5 * time.Minute, Sensors: []telemetry.Sensor{{ID: "A"}, {ID: "B"}}, SpikeK: -1})
	rng := rand.New(rand.NewPCG(7, 8))
	var vals []float64
	for k := 0; k < 50; k++ {
		v := 30 + rng.NormFloat64()
		at := time.Duration(k) * 6 * time.Second // 0 .. 294 s: all in step 0
		a.Add(rd("A", at, v))
		a.Add(rd("A", at, v)) // a repeat (at-least-once delivery)
		vals = append(vals, v)
	}
	a.Add(rd("B", 5*time.Minute-time.Nanosecond, 7))
	a.Add(rd("A", 5*time.Minute, 99)) // exactly at the end: belongs to step 1, closes step 0
	if !a.Add(rd("B", 5*time.Minute-time.Nanosecond, 8)) {
		t.Error("a reading for the closed step 0 (lateness 0) was not late")
	}
	a.Flush(t0.Add(10 * time.Minute))
	if len(s.snaps) != 2 {
		t.Fatalf("%d snapshots, want 2", len(s.snaps))
	}
	g := s.snaps[0].Values[0]
	if g.Count != 50 {
		t.Errorf("count %d, want 50 (repeats dropped, the reading at the step end in the next step)", g.Count)
	}
	if want := stat.Mean(vals, nil); math.Abs(g.Value-want) > 1e-12 {
		t.Errorf("mean %.15g, gonum stat.Mean %.15g (tol 1e-12)", g.Value, want)
	}
	if g.Min != floats.Min(vals) || g.Max != floats.Max(vals) {
		t.Errorf("min/max %v/%v, gonum %v/%v", g.Min, g.Max, floats.Min(vals), floats.Max(vals))
	}
	if g.Quality != telemetry.OK {
		t.Errorf("quality %v, want ok", g.Quality)
	}
	if b := s.snaps[0].Values[1]; b.Count != 1 || b.Value != 7 {
		t.Errorf("B in step 0: %+v", b)
	}
	if n := s.snaps[1].Values[0]; n.Count != 1 || n.Value != 99 {
		t.Errorf("A in step 1: %+v", n)
	}
	if !s.snaps[1].Step.Equal(t0.Add(5*time.Minute)) || s.snaps[1].Length != 5*time.Minute {
		t.Errorf("step 1 at %v length %v", s.snaps[1].Step, s.snaps[1].Length)
	}
}

// TestWatermark: a step is emitted once the watermark passes its end plus
// the lateness; later readings for it are late; gaps are emitted missing.
func TestWatermark(t *testing.T) {
	step, late := time.Minute, 30*time.Second
	a, s := newAligner(t, Config{Step: step, Lateness: late, Sensors: []telemetry.Sensor{{ID: "A"}}, SpikeK: -1, StaleAfter: -1})
	a.Add(rd("A", 10*time.Second, 1))
	a.Add(rd("A", 89*time.Second, 2)) // watermark 89 s < 60 + 30
	if len(s.snaps) != 0 {
		t.Fatalf("emitted %d before the watermark passed end+lateness", len(s.snaps))
	}
	if late := a.Add(rd("A", 20*time.Second, 3)); late {
		t.Fatal("a reading within the lateness was called late")
	}
	a.Add(rd("A", 90*time.Second, 2)) // watermark = 60 s + 30 s: step 0 closes
	if len(s.snaps) != 1 || s.snaps[0].Values[0].Count != 2 || s.snaps[0].Values[0].Value != 2 {
		t.Fatalf("after watermark 90 s: %+v", s.snaps)
	}
	if late := a.Add(rd("A", 59*time.Second, 5)); !late {
		t.Fatal("a reading for an emitted step was not late")
	}
	if got := a.Stats().Late[0]; got != 1 {
		t.Errorf("late count %d, want 1", got)
	}
	a.Add(rd("A", 10*time.Minute, 4)) // jump: steps 1..8 close, 2..8 missing
	if len(s.snaps) != 9 {
		t.Fatalf("%d snapshots after the jump, want 9", len(s.snaps))
	}
	for k, sn := range s.snaps {
		if !sn.Step.Equal(t0.Add(time.Duration(k) * step)) {
			t.Errorf("snapshot %d at %v, want %v", k, sn.Step, t0.Add(time.Duration(k)*step))
		}
		if k >= 2 && sn.Values[0].Quality != telemetry.Missing {
			t.Errorf("snapshot %d quality %v, want missing", k, sn.Values[0].Quality)
		}
	}
	if s.snaps[1].Values[0].Count != 2 {
		t.Errorf("step 1 count %d, want 2", s.snaps[1].Values[0].Count)
	}
	// Advance (the wall clock) closes steps while sensors are silent.
	a.Advance(t0.Add(20 * time.Minute))
	if len(s.snaps) != 19 {
		t.Errorf("%d snapshots after Advance, want 19", len(s.snaps))
	}
}

func TestStartAndFlush(t *testing.T) {
	a, s := newAligner(t, Config{Step: time.Minute, Start: t0.Add(90 * time.Second), Sensors: []telemetry.Sensor{{ID: "A"}}, SpikeK: -1})
	if !a.Add(rd("A", 30*time.Second, 1)) {
		t.Error("a reading before Start was not late")
	}
	a.Add(rd("A", 3*time.Minute, 1))
	a.Flush(t0.Add(5 * time.Minute))
	if len(s.snaps) != 4 || !s.snaps[0].Step.Equal(t0.Add(time.Minute)) {
		t.Fatalf("got %d snapshots from %v, want 4 from %v", len(s.snaps), s.snaps[0].Step, t0.Add(time.Minute))
	}
	if q := s.snaps[0].Values[0].Quality; q != telemetry.Missing {
		t.Errorf("first step quality %v, want missing", q)
	}
	if q := s.snaps[3].Values[0].Quality; q != telemetry.Stale {
		t.Errorf("step after the reading: %v, want stale", q)
	}
}

func TestQuality(t *testing.T) {
	step := time.Minute
	sensors := []telemetry.Sensor{
		{ID: "R", Min: 0, Max: 80}, // range
		{ID: "S", Quantity: telemetry.Pressure, Unit: "m", Accuracy: 0.05}, // spike
		{ID: "K"}, // stuck
		{ID: "G"}, // gaps: stale then missing
		{ID: "L"}, // level shift: not a spike
	}
	a, s := newAligner(t, Config{Step: step, Sensors: sensors, StuckAfter: 10 * time.Minute, StaleAfter: 3 * step})
	rng := rand.New(rand.NewPCG(1, 1))
	for k := 0; k < 40; k++ {
		at := time.Duration(k)*step + 30*time.Second
		r := 50 + rng.NormFloat64()
		if k == 20 {
			r = 85
		}
		a.Add(rd("R", at, r))
		sv := 40 + 0.1*rng.NormFloat64()
		if k == 25 {
			sv = 45 // jump of ~50 σ and back at k = 26
		}
		a.Add(rd("S", at, sv))
		kv := 30 + 0.1*rng.NormFloat64()
		if k >= 10 {
			kv = 31.25 // frozen from k = 10
		}
		a.Add(rd("K", at, kv))
		if k < 10 {
			a.Add(rd("G", at, 12))
		}
		lv := 20 + 0.1*rng.NormFloat64()
		if k >= 25 {
			lv = 25 + 0.1*rng.NormFloat64() // a lasting shift, e.g. a pump start
		}
		a.Add(rd("L", at, lv))
	}
	a.Flush(t0.Add(40 * step))
	if len(s.snaps) != 40 {
		t.Fatalf("%d snapshots, want 40", len(s.snaps))
	}
	q := func(k, i int) telemetry.Quality { return s.snaps[k].Values[i].Quality }
	for k := 0; k < 40; k++ {
		wantR := telemetry.OK
		if k == 20 {
			wantR = telemetry.OutOfRange
		}
		if q(k, 0) != wantR {
			t.Errorf("R step %d: %v, want %v", k, q(k, 0), wantR)
		}
		wantS := telemetry.OK
		if k == 25 {
			wantS = telemetry.Spike
		}
		if q(k, 1) != wantS {
			t.Errorf("S step %d: %v, want %v (value %v)", k, q(k, 1), wantS, s.snaps[k].Values[1].Value)
		}
		// Frozen from the reading at 10 min 30 s; stuck once more than
		// 10 min have passed since: from the reading at 21 min 30 s.
		wantK := telemetry.OK
		if k >= 21 {
			wantK = telemetry.Stuck
		}
		if q(k, 2) != wantK {
			t.Errorf("K step %d: %v, want %v", k, q(k, 2), wantK)
		}
		// Last reading at 9 min 30 s: steps 10 and 11 end within 3 min of
		// it (stale, carrying 12), then missing.
		wantG := telemetry.OK
		switch {
		case k == 10 || k == 11:
			wantG = telemetry.Stale
		case k >= 12:
			wantG = telemetry.Missing
		}
		if q(k, 3) != wantG {
			t.Errorf("G step %d: %v, want %v", k, q(k, 3), wantG)
		}
		if q(k, 4) != telemetry.OK {
			t.Errorf("L step %d: %v, want ok (a lasting shift is not a spike)", k, q(k, 4))
		}
	}
	if g := s.snaps[10].Values[3]; g.Value != 12 || g.Count != 0 {
		t.Errorf("stale carry %+v, want value 12 count 0", g)
	}
}

// TestShuffledIdentical feeds the same readings sorted and in a random
// order within the lateness, with repeats, and requires identical
// snapshots (bit for bit).
func TestShuffledIdentical(t *testing.T) {
	step, late := 5*time.Minute, 7*time.Minute
	var sensors []telemetry.Sensor
	for _, id := range []string{"P-1", "P-2", "P-3", "F-1"} {
		sensors = append(sensors, telemetry.Sensor{ID: id, Quantity: telemetry.Pressure, Unit: "m", Accuracy: 0.02, Min: 0, Max: 100})
	}
	rng := rand.New(rand.NewPCG(42, 43))
	var rs []telemetry.Reading
	for k := 0; k < 3000; k++ {
		id := sensors[rng.IntN(len(sensors))].ID
		at := time.Duration(rng.Int64N(int64(24 * time.Hour)))
		if at > 6*time.Hour && at < 7*time.Hour && id == "P-2" {
			continue // a gap
		}
		v := 40 + 3*math.Sin(float64(at)/float64(time.Hour)) + 0.05*rng.NormFloat64()
		if rng.IntN(200) == 0 {
			v += 10 // occasional spikes
		}
		if id == "P-3" && at > 12*time.Hour && at < 15*time.Hour {
			v = 41 // stuck
		}
		rs = append(rs, rd(id, at, v))
	}
	cfg := Config{Step: step, Lateness: late, Sensors: sensors, StuckAfter: time.Hour}
	end := t0.Add(24 * time.Hour)

	sorted := slices.Clone(rs)
	sort.SliceStable(sorted, func(i, j int) bool { return sorted[i].Time.Before(sorted[j].Time) })
	a1, s1 := newAligner(t, cfg)
	for _, r := range sorted {
		if a1.Add(r) {
			t.Fatal("a sorted reading was late")
		}
	}
	a1.Flush(end)

	for trial := 0; trial < 5; trial++ {
		// Arrival order: time + a random delay below the lateness, plus
		// repeats of some readings (redelivery).
		type arrival struct {
			r   telemetry.Reading
			key time.Time
		}
		var arr []arrival
		for _, r := range rs {
			arr = append(arr, arrival{r, r.Time.Add(time.Duration(rng.Int64N(int64(late))))})
			if rng.IntN(10) == 0 {
				arr = append(arr, arrival{r, r.Time.Add(time.Duration(rng.Int64N(int64(late))))})
			}
		}
		sort.SliceStable(arr, func(i, j int) bool { return arr[i].key.Before(arr[j].key) })
		a2, s2 := newAligner(t, cfg)
		maxOpen := 0
		for _, x := range arr {
			if a2.Add(x.r) {
				t.Fatalf("trial %d: reading %v late though within the lateness", trial, x.r)
			}
			maxOpen = max(maxOpen, a2.Stats().Open)
		}
		a2.Flush(end)
		if len(s2.snaps) != len(s1.snaps) {
			t.Fatalf("trial %d: %d snapshots, sorted gave %d", trial, len(s2.snaps), len(s1.snaps))
		}
		if !reflect.DeepEqual(s1.snaps, s2.snaps) {
			for k := range s1.snaps {
				if !reflect.DeepEqual(s1.snaps[k], s2.snaps[k]) {
					t.Fatalf("trial %d: step %v differs:\nsorted   %+v\nshuffled %+v", trial, s1.snaps[k].Step, s1.snaps[k].Values, s2.snaps[k].Values)
				}
			}
		}
		// Memory: open steps stay within lateness/step + 2.
		if bound := int(late/step) + 2; maxOpen > bound {
			t.Errorf("trial %d: %d open steps, bound %d", trial, maxOpen, bound)
		}
	}
	if len(s1.snaps) != 288 {
		t.Errorf("%d snapshots for a day of 5-minute steps, want 288", len(s1.snaps))
	}
	counts := map[telemetry.Quality]int{}
	for _, sn := range s1.snaps {
		for _, v := range sn.Values {
			counts[v.Quality]++
		}
	}
	for _, q := range []telemetry.Quality{telemetry.OK, telemetry.Stuck, telemetry.Spike, telemetry.Missing} {
		if counts[q] == 0 {
			t.Errorf("no %v step in the test data: the comparison does not cover it (%v)", q, counts)
		}
	}
}

// TestMedianMAD checks the robust statistics against gonum and the MAD
// scale against the normal quantile: 1/Φ⁻¹(0.75) = 1.4826 (Rousseeuw and
// Croux 1993).
func TestMedianMAD(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for n := 1; n < 40; n += 2 { // odd lengths: the empirical median is the middle value
		x := make([]float64, n)
		for i := range x {
			x[i] = rng.NormFloat64()
		}
		sorted := slices.Clone(x)
		slices.Sort(sorted)
		want := stat.Quantile(0.5, stat.Empirical, sorted, nil)
		if got := median(slices.Clone(x)); got != want {
			t.Errorf("n=%d: median %v, gonum %v", n, got, want)
		}
	}
	if q := distuv.UnitNormal.Quantile(0.75); math.Abs(1/q-madScale) > 1e-4 {
		t.Errorf("1/Φ⁻¹(0.75) = %.6f, madScale %.6f (tol 1e-4)", 1/q, madScale)
	}
	// On a large normal sample 1.4826·MAD estimates σ.
	x := make([]float64, 20001)
	for i := range x {
		x[i] = 3 * rng.NormFloat64()
	}
	a := &Aligner{}
	ss := &sensorState{hist: x, histLen: len(x)}
	_, mad := a.medianMAD(ss)
	if got := madScale * mad; math.Abs(got-3) > 0.1 {
		t.Errorf("1.4826·MAD = %.3f for σ = 3 (tol 0.1)", got)
	}
}

func TestConfigErrors(t *testing.T) {
	_, err := New(Config{Step: 0, Lateness: -time.Second, SpikeWindow: 3, SpikeMinHistory: 5,
		Sensors: []telemetry.Sensor{{ID: "A"}, {ID: "A"}, {ID: "B", Quantity: telemetry.Flow, Unit: "bar", Accuracy: 1}}}, nil)
	if err == nil {
		t.Fatal("no error")
	}
	for _, want := range []string{"step 0s must be positive", "lateness -1s", "emit function", "spike_min_history 5 exceeds", "sensor A: id used twice", "sensor B: accuracy"} {
		if !contains(err.Error(), want) {
			t.Errorf("error %q lacks %q", err, want)
		}
	}
}

func contains(s, sub string) bool {
	return len(sub) == 0 || (len(s) >= len(sub) && indexOf(s, sub) >= 0)
}

func indexOf(s, sub string) int {
	for i := 0; i+len(sub) <= len(s); i++ {
		if s[i:i+len(sub)] == sub {
			return i
		}
	}
	return -1
}

func TestUnknownAndBad(t *testing.T) {
	a, s := newAligner(t, Config{Step: time.Minute, Sensors: []telemetry.Sensor{{ID: "A"}}})
	a.Add(rd("nobody", 0, 1))
	a.Add(rd("A", 0, math.NaN()))
	a.Add(telemetry.Reading{Sensor: "A", Time: time.Date(1500, 1, 1, 0, 0, 0, 0, time.UTC), Value: 1})
	if got := a.Stats().Unknown; got != 3 {
		t.Errorf("unknown %d, want 3", got)
	}
	a.Flush(t0.Add(time.Hour))
	if len(s.snaps) != 0 {
		t.Errorf("%d snapshots from no good reading", len(s.snaps))
	}
}

func BenchmarkAdd(b *testing.B) {
	var sensors []telemetry.Sensor
	for i := 0; i < 200; i++ {
		sensors = append(sensors, telemetry.Sensor{ID: string(rune('A'+i%26)) + string(rune('a'+i/26))})
	}
	a, err := New(Config{Step: 5 * time.Minute, Lateness: 5 * time.Minute, Sensors: sensors, StuckAfter: time.Hour}, func(telemetry.Snapshot) {})
	if err != nil {
		b.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(1, 2))
	b.ReportAllocs()
	i := 0
	for b.Loop() {
		// 200 sensors reporting every 10 s, slightly out of order.
		at := time.Duration(i/len(sensors))*10*time.Second - time.Duration(rng.Int64N(int64(time.Minute)))
		a.Add(telemetry.Reading{Sensor: sensors[i%len(sensors)].ID, Time: t0.Add(at), Value: rng.Float64()})
		i++
	}
	b.ReportMetric(float64(b.N)/b.Elapsed().Seconds(), "readings/s")
}
