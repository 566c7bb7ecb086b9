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
