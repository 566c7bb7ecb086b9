package sparse

import (
	"math/rand/v2"
)

// pattern is a test sparsity pattern: off-diagonal pairs of an n×n matrix.
type pattern struct {
	name       string
	n          int
	rows, cols []int
}

func (p *pattern) add(i, j int) {
	p.rows = append(p.rows, i)
	p.cols = append(p.cols, j)
}

// gridPattern is the 5-point k1×k2 grid graph.
func gridPattern(k1, k2 int) pattern {
	p := pattern{name: "grid", n: k1 * k2}
	for y := 0; y < k2; y++ {
		for x := 0; x < k1; x++ {
			i := y*k1 + x
			if x+1 < k1 {
				p.add(i, i+1)
			}
			if y+1 < k2 {
				p.add(i+k1, i) // other triangle on purpose
			}
		}
	}
	return p
}

// networkPattern is a grid-like graph that looks like a pipe network: a
// k×k street grid where each street segment exists with probability keep,
// a few diagonals, and n/500 random cross links (long mains). A spanning
// path along the first column and each row keeps it connected.
func networkPattern(k int, keep float64, seed uint64) pattern {
	rng := rand.New(rand.NewPCG(seed, 7))
	p := pattern{name: "network", n: k * k}
	for y := 0; y < k; y++ {
		for x := 0; x < k; x++ {
			i := y*k + x
			if x+1 < k && (y%8 == 0 || rng.Float64() < keep) {
				p.add(i, i+1)
			}
			if y+1 < k && (x == 0 || rng.Float64() < keep) {
				p.add(i, i+k)
			}
			if x+1 < k && y+1 < k && rng.Float64() < 0.05 {
				p.add(i, i+k+1)
			}
		}
	}
	for c := 0; c < p.n/500; c++ {
		i, j := rng.IntN(p.n), rng.IntN(p.n)
		if i != j {
			p.add(i, j)
		}
	}
	return p
}

// treePlusPattern is a random tree on n nodes with extra random edges.
func treePlusPattern(n, extra int, seed uint64) pattern {
	rng := rand.New(rand.NewPCG(seed, 11))
	p := pattern{name: "tree+", n: n}
	for i := 1; i < n; i++ {
		p.add(i, rng.IntN(i))
	}
	for e := 0; e < extra && n > 1; e++ {
		i, j := rng.IntN(n), rng.IntN(n)
		if i != j {
			p.add(i, j)
		}
	}
	return p
}

// values returns random values for the pattern making an SPD matrix: the
// off-diagonal values are of both signs and the diagonal dominates strictly
// (Gershgorin's theorem then gives positive eigenvalues), like the weighted
// Laplacian plus a positive shift of the Todini-Pilati Schur complement.
func values(p pattern, seed uint64) (diag, off []float64) {
	rng := rand.New(rand.NewPCG(seed, 3))
	diag = make([]float64, p.n)
	off = make([]float64, len(p.rows))
	for k := range off {
		v := 0.1 + rng.Float64()
		if rng.IntN(4) == 0 {
			v = -v
		}
		off[k] = -v
		a := v
		if a < 0 {
			a = -a
		}
		diag[p.rows[k]] += a
		diag[p.cols[k]] += a
	}
	for i := range diag {
		diag[i] += 0.01 + 0.5*rng.Float64()
	}
	return diag, off
}

// dense returns the full matrix as a row-major slice.
func dense(p pattern, diag, off []float64) []float64 {
	a := make([]float64, p.n*p.n)
	for i := 0; i < p.n; i++ {
		a[i*p.n+i] = diag[i]
	}
	for k := range off {
		i, j := p.rows[k], p.cols[k]
		a[i*p.n+j] += off[k]
		a[j*p.n+i] += off[k]
	}
	return a
}

// mulVec returns A x for the sparse pattern with values, without forming A.
func mulVec(p pattern, diag, off, x []float64) []float64 {
	y := make([]float64, p.n)
	for i := range y {
		y[i] = diag[i] * x[i]
	}
	for k := range off {
		i, j := p.rows[k], p.cols[k]
		y[i] += off[k] * x[j]
		y[j] += off[k] * x[i]
	}
	return y
}
