package calib

import (
	"bytes"
	"math"
	"math/rand/v2"
	"strings"
	"testing"
	"time"
)

func TestNoiseTableRoundTrip(t *testing.T) {
	var s [24]float64
	for h := range s {
		s[h] = 0.1 + 0.01*float64(h)
	}
	s[4] = math.NaN()
	in := &NoiseTable{Made: time.Date(2026, 3, 16, 0, 0, 0, 0, time.UTC), Snapshots: 9,
		Sensors: []SensorNoise{{ID: "P-1", Unit: "m", Accuracy: 0.2, SigmaByHour: s}}}
	var buf bytes.Buffer
	if err := in.WriteJSON(&buf); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(buf.String(), "null") {
		t.Errorf("a NaN hour should be written as null:\n%s", buf.String())
	}
	out, err := ReadNoise(&buf, "x.json")
	if err != nil {
		t.Fatal(err)
	}
	if len(out.Sensors) != 1 || out.Sensors[0].ID != "P-1" || out.Snapshots != 9 || !out.Made.Equal(in.Made) {
		t.Fatalf("read back %+v, want %+v", out, in)
	}
	for h := range s {
		got, want := out.Sensors[0].SigmaByHour[h], s[h]
		if !(got == want || math.IsNaN(got) && math.IsNaN(want)) {
			t.Errorf("hour %d: got %v, want %v", h, got, want)
		}
	}
}

func TestReadNoiseBadInput(t *testing.T) {
	hours := func(n int, v string) string { return strings.TrimSuffix(strings.Repeat(v+",", n), ",") }
	for _, c := range []struct{ in, want string }{
		{`{"sensors": [{"id": "P-1", "sigma_by_hour": [` + hours(23, "0.1") + `]}]}`, "sensor P-1: sigma_by_hour has 23 values, want 24"},
		{`{"sensors": [{"id": "P-1", "sigma_by_hour": [` + hours(23, "0.1") + `,-1]}]}`, "sensor P-1: sigma_by_hour[23] = -1 is negative"},
		{`{"sensors": [{"sigma_by_hour": [` + hours(24, "0.1") + `]}]}`, "sensor without an id"},
		{`{"sensors": [{"id": "P-1", "sigma_by_hour": [` + hours(24, "0.1") + `]}, {"id": "P-1", "sigma_by_hour": [` + hours(24, "0.1") + `]}]}`, "sensor P-1 listed twice"},
		{`{"sensor": []}`, `unknown field "sensor"`},
		{`[`, "unexpected EOF"},
	} {
		_, err := ReadNoise(strings.NewReader(c.in), "n.json")
		if err == nil || !strings.Contains(err.Error(), c.want) || !strings.Contains(err.Error(), "n.json") {
			t.Errorf("ReadNoise(%.40s...): error %v, want one naming n.json and containing %q", c.in, err, c.want)
		}
	}
}

// TestHourlyMeanSigmaByMonteCarlo checks the conversion from the σ of one
// reading's residual to the σ of an hourly mean against simulated
// hours: a model error common to the hour plus independent instrument
// noise, whose mean over n readings has variance m² + a²/n (Bienaymé's
// identity for the variance of a sum of independent variables).
func TestHourlyMeanSigmaByMonteCarlo(t *testing.T) {
	const m, a = 0.15, 0.2 // model and instrument σ, m
	const step = 5 * time.Minute
	n := int(time.Hour / step)
	rng := rand.New(rand.NewPCG(1, 2))
	var one, mean []float64
	for range 20000 {
		e := m * rng.NormFloat64()
		sum := 0.0
		for k := range n {
			r := e + a*rng.NormFloat64()
			if k == 0 {
				one = append(one, r)
			}
			sum += r
		}
		mean = append(mean, sum/float64(n))
	}
	sd := func(xs []float64) float64 {
		var s, q float64
		for _, x := range xs {
			s += x
			q += x * x
		}
		k := float64(len(xs))
		return math.Sqrt((q - s*s/k) / (k - 1))
	}
	var sig [24]float64
	for h := range sig {
		sig[h] = sd(one)
	}
	got := SensorNoise{Accuracy: a, SigmaByHour: sig}.HourlyMeanSigma(step)[0]
	want := sd(mean)
	// 20 000 samples: the relative standard error of a σ is 1/√40000 = 0.5 %.
	if math.Abs(got-want) > 0.03*want {
		t.Errorf("σ of an hourly mean = %.4f, simulated %.4f (± 3 %%)", got, want)
	}
}

func FuzzReadNoise(f *testing.F) {
	f.Add([]byte(`{"made":"2026-03-16T00:00:00Z","snapshots":2,"sensors":[{"id":"P-1","unit":"m","accuracy":0.2,"sigma_by_hour":[0.1,0.1,0.1,0.1,0.1,0.1,0.1,0.1,0.1,0.1,0.1,0.1,0.1,0.1,0.1,0.1,0.1,0.1,0.1,0.1,0.1,0.1,0.1,null]}]}`))
	f.Fuzz(func(t *testing.T, b []byte) {
		tab, err := ReadNoise(bytes.NewReader(b), "fuzz")
		if err != nil {
			return
		}
		// What was read writes and reads back the same.
		var buf bytes.Buffer
		if err := tab.WriteJSON(&buf); err != nil {
			t.Fatal(err)
		}
		again, err := ReadNoise(&buf, "again")
		if err != nil {
			t.Fatalf("re-read: %v\n%s", err, buf.String())
		}
		if len(again.Sensors) != len(tab.Sensors) {
			t.Fatalf("re-read %d sensors, want %d", len(again.Sensors), len(tab.Sensors))
		}
	})
}
