package detect

import (
	"math"
	"math/rand/v2"
	"testing"
	"time"
)

// Montgomery (2009), Introduction to Statistical Quality Control, 6th ed.,
// §9.1, tabulates the ARL of the two-sided tabular CUSUM with k = 0.5:
// 465 in control for h = 5 and 168 for h = 4, 10.4 for a 1σ shift at h = 5
// (values from memory). A two-sided scheme of two one-sided halves has
// 1/ARL = 1/ARL⁺ + 1/ARL⁻ (Montgomery, same section), so in control it
// is half the one-sided value; for a 1σ shift the lower half adds nothing.
func TestSiegmundARLAgainstTable(t *testing.T) {
	for _, c := range []struct {
		k, h, mu, want, tol float64
	}{
		{0.5, 5, 0, 465, 8},    // from memory, Montgomery Table 9.3
		{0.5, 5, 1, 10.4, 0.2}, // from memory, Montgomery Table 9.3
		{0.5, 4, 0, 168, 4},    // from memory, Montgomery Table 9.3
	} {
		got := SiegmundARL(c.k, c.h, c.mu)
		if c.mu == 0 {
			got /= 2 // two-sided: both halves alarm at the same rate
		}
		if math.Abs(got-c.want) > c.tol {
			t.Errorf("SiegmundARL(k=%g, h=%g, μ=%g) = %.2f, want %.2f ± %.2f", c.k, c.h, c.mu, got, c.want, c.tol)
		}
	}
}

// The designed threshold must give the wanted false-alarm rate on pure
// Gaussian noise, checked by simulating run lengths (Siegmund's
// approximation is accurate to a few per cent for normal data).
func TestDesignedCUSUMRunLengthBySimulation(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for _, c := range []struct{ delta, arl0 float64 }{{1, 200}, {1, 1000}, {2, 2000}} {
		proto, err := DesignCUSUM(c.delta, c.arl0)
		if err != nil {
			t.Fatal(err)
		}
		const runs = 3000
		total := 0.0
		t0 := time.Unix(0, 0)
		for r := 0; r < runs; r++ {
			cu := NewCUSUM(proto.K, proto.H)
			n := 0
			for {
				n++
				if cu.Update(t0.Add(time.Duration(n)*time.Minute), rng.NormFloat64()) {
					break
				}
			}
			total += float64(n)
		}
		mean := total / runs
		// Run lengths are roughly exponential: the standard error of the
		// mean is about arl0/√runs (≈ 2%); Siegmund's approximation itself
		// is good to a few per cent at these thresholds. Allow 10%.
		if math.Abs(mean-c.arl0)/c.arl0 > 0.10 {
			t.Errorf("δ=%g designed ARL0 %g: simulated mean run length %.1f (k=%.3f h=%.3f)", c.delta, c.arl0, mean, proto.K, proto.H)
		}
	}
}

func TestCUSUMOnsetAndShift(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	cu, err := DesignCUSUM(1, 1000)
	if err != nil {
		t.Fatal(err)
	}
	t0 := time.Date(2026, 3, 1, 0, 0, 0, 0, time.UTC)
	onset := 500
	var alarm int
	for i := 0; i < 2000; i++ {
		z := rng.NormFloat64()
		if i >= onset {
			z += 2
		}
		if cu.Update(t0.Add(time.Duration(i)*time.Minute), z) {
			alarm = i
			break
		}
	}
	if alarm < onset {
		t.Fatalf("alarm at %d before the shift at %d", alarm, onset)
	}
	est := int(cu.Onset.Sub(t0) / time.Minute)
	if est < onset-5 || est > onset+3 {
		t.Errorf("onset estimate %d, true %d (want within -5..+3 steps)", est, onset)
	}
	if s := cu.Shift(); math.Abs(s-2) > 1 {
		t.Errorf("shift estimate %.2f σ, true 2 σ", s)
	}
}

// On a first-order autoregressive series z_t = ρ z_{t−1} + √(1−ρ²) ε_t
// (unit variance, ε standard normal; Box & Jenkins 1976, §3.2.4, from
// memory), Serial must (a) estimate ρ, (b) give innovations with unit
// variance and no lag-1 correlation, and (c) restore the designed average
// run length of a CUSUM fed the innovations (Alwan & Roberts 1988),
// where the same CUSUM fed z alarms several times as often: the false
// alarms a run of busy hours makes.
func TestSerialWhitensAnAR1Series(t *testing.T) {
	const rho = 0.6
	rng := rand.New(rand.NewPCG(7, 8))
	t0 := time.Date(2026, 3, 1, 0, 0, 0, 0, time.UTC)
	var s Serial
	z := 0.0
	next := func() float64 {
		z = rho*z + math.Sqrt(1-rho*rho)*rng.NormFloat64()
		return z
	}
	var es []float64
	for i := 0; i < 20000; i++ {
		at := t0.Add(time.Duration(i) * time.Hour)
		x := next()
		es = append(es, s.Innovation(at, x))
		s.Learn(at, x, true)
	}
	// The estimate remembers a fortnight (336 pairs): its standard error
	// is about √((1−ρ²)/336) ≈ 0.04 (Bartlett 1946, from memory).
	if got := s.Rho(); math.Abs(got-rho) > 0.12 {
		t.Errorf("ρ estimate %.3f, true %.1f", got, rho)
	}
	es = es[2000:]
	m, v, c := 0.0, 0.0, 0.0
	for _, e := range es {
		m += e
	}
	m /= float64(len(es))
	for i, e := range es {
		v += (e - m) * (e - m)
		if i > 0 {
			c += (e - m) * (es[i-1] - m)
		}
	}
	if sd := math.Sqrt(v / float64(len(es))); math.Abs(sd-1) > 0.05 {
		t.Errorf("innovations' σ %.3f, want 1", sd)
	}
	if r := c / v; math.Abs(r) > 0.05 {
		t.Errorf("innovations' lag-1 correlation %.3f, want 0", r)
	}

	// Run lengths: a CUSUM for a 2σ shift designed for 500 hours between
	// false alarms, fed the raw series and the innovations (ρ known from
	// the learning above, frozen).
	proto, err := DesignCUSUM(2, 500)
	if err != nil {
		t.Fatal(err)
	}
	meanRun := func(whiten bool) float64 {
		total := 0.0
		const runs = 1500
		for r := 0; r < runs; r++ {
			cu := NewCUSUM(proto.K, proto.H)
			w := Serial{XY: rho, XX: 1, N: 1000}
			z = rng.NormFloat64()
			for n := 1; ; n++ {
				at := t0.Add(time.Duration(n) * time.Hour)
				x := next()
				in := x
				if whiten {
					in = w.Innovation(at, x)
					w.Learn(at, x, false)
				}
				if cu.Update(at, in) {
					total += float64(n)
					break
				}
			}
		}
		return total / runs
	}
	raw, white := meanRun(false), meanRun(true)
	t.Logf("designed ARL 500 h: raw AR(1) series %.0f h, innovations %.0f h", raw, white)
	// As in TestDesignedCUSUMRunLengthBySimulation: within 10% of design
	// (the first hour of each run has no predecessor and is not whitened).
	if math.Abs(white-500)/500 > 0.10 {
		t.Errorf("whitened mean run length %.0f h, designed 500 h", white)
	}
	if raw > 500/2.0 {
		t.Errorf("raw AR(1) mean run length %.0f h: expected far below the design of 500 h (that is the point of whitening)", raw)
	}
}
