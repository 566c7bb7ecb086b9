package detect

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/stat"
)

// The prediction interval of a new night holds its design coverage: a
// new night from the same normal distribution falls within 1.96 σ of the
// prediction from 8 to 28 past nights in 95% of draws (the property the
// t-widened prediction interval is built for, Hahn & Meeker 1991), the
// outlier pass included.
func TestPredictNightCoverage(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 11))
	const runs = 6000
	inside := 0
	for range runs {
		nights := make([]float64, 8+rng.IntN(21))
		for i := range nights {
			nights[i] = 1 + 0.4*rng.NormFloat64()
		}
		next := 1 + 0.4*rng.NormFloat64()
		if p := predictNight(nights); math.Abs(next-p.mean) <= 1.959964*p.sigma {
			inside++
		}
	}
	// A binomial σ at 6000 draws is 0.3%; the outlier pass trims about
	// one sample in a hundred, which narrows its interval a little.
	if cover := float64(inside) / runs; cover < 0.94 || cover > 0.96 {
		t.Errorf("coverage %.3f, want 0.95", cover)
	}
}

// One odd night (a hydrant flushed) is set aside and does not widen the
// band; a sample without one keeps all its nights.
func TestNightBaselineSetsAsideAnOddNight(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 8))
	xs := make([]float64, 14)
	for i := range xs {
		xs[i] = 2 + 0.3*rng.NormFloat64()
	}
	m0, s0 := nightBaseline(xs)
	if math.Abs(m0-stat.Mean(xs, nil)) > 1e-12 || math.Abs(s0-stat.StdDev(xs, nil)) > 1e-12 {
		t.Fatalf("clean sample: %.4f ± %.4f, gonum %.4f ± %.4f", m0, s0, stat.Mean(xs, nil), stat.StdDev(xs, nil))
	}
	xs[6] += 6
	m, s := nightBaseline(xs)
	if math.Abs(m-m0) > 0.3 || s > 1.5*s0 {
		t.Errorf("with a 20σ night: %.2f ± %.2f, without %.2f ± %.2f", m, s, m0, s0)
	}
}
