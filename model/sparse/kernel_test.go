package sparse

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestGemmNT checks the dense kernel (vector tiles and plain edges) against
// the defining triple loop C -= A Bᵀ on random blocks of many shapes.
func TestGemmNT(t *testing.T) {
	vec := useVector
	defer func() { useVector = vec }()
	for _, v := range []bool{vec, false} {
		useVector = v
		checkGemmNT(t)
	}
}

func checkGemmNT(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	for trial := 0; trial < 300; trial++ {
		m, n, k := 1+rng.IntN(21), 1+rng.IntN(11), rng.IntN(13)
		if trial%10 == 0 {
			m, n, k = 8*(1+rng.IntN(4)), 4*(1+rng.IntN(3)), 2+rng.IntN(40)
		}
		lda, ldb, ldc := m+rng.IntN(3), n+rng.IntN(4), m+rng.IntN(2)
		a := make([]float64, lda*max(k, 1))
		b := make([]float64, ldb*max(k, 1))
		c := make([]float64, ldc*n)
		for i := range a {
			a[i] = rng.NormFloat64()
		}
		for i := range b {
			b[i] = rng.NormFloat64()
		}
		for i := range c {
			c[i] = rng.NormFloat64()
		}
		want := make([]float64, len(c))
		copy(want, c)
		for j := 0; j < n; j++ {
			for i := 0; i < m; i++ {
				s := 0.0
				for tt := 0; tt < k; tt++ {
					s += a[i+tt*lda] * b[j+tt*ldb]
				}
				want[i+j*ldc] -= s
			}
		}
		gemmNT(m, n, k, a, lda, b, ldb, c, ldc)
		for i := range c {
			// Only summation order (and fused multiply-add) differ.
			if d := math.Abs(c[i] - want[i]); d > 1e-12*(1+math.Abs(want[i])) {
				t.Fatalf("m=%d n=%d k=%d: c[%d] = %v, want %v (diff %.3g > 1e-12 rel)", m, n, k, i, c[i], want[i], d)
			}
		}
	}
}
