package sparse

import (
	"fmt"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// benchSizes are the grid sides of the benchmark networks: about 1k, 10k and
// 100k junctions.
var benchSizes = []int{32, 100, 316}

// benchPattern returns the benchmark graph of a kind on a k×k layout:
// "network" is a street grid with a quarter of the segments missing (average
// degree ≈ 3.1, like a town's pipe network), "grid+" the full 5-point grid
// with 5 % diagonals and n/500 long random links, "grid" the plain 5-point
// grid.
func benchPattern(kind string, k int) pattern {
	switch kind {
	case "network":
		return networkPattern(k, 0.75, 2026)
	case "grid+":
		return networkPattern(k, 1, 2026)
	}
	return gridPattern(k, k)
}

var benchKinds = []string{"network", "grid+", "grid"}

// BenchmarkAnalyze measures ordering plus symbolic factorisation on
// the benchmark graphs (benchPattern, fixed seed).
func BenchmarkAnalyze(b *testing.B) {
	for _, kind := range benchKinds {
		for _, k := range benchSizes {
			p := benchPattern(kind, k)
			for _, o := range []Ordering{MinimumDegree, ReverseCuthillMcKee} {
				if o == ReverseCuthillMcKee && k > 100 {
					continue
				}
				b.Run(fmt.Sprintf("%s/n=%d/%s", kind, p.n, shortName(o)), func(b *testing.B) {
					var sym *Symbolic
					for b.Loop() {
						var err error
						sym, err = Analyze(p.n, p.rows, p.cols, Options{Ordering: o})
						if err != nil {
							b.Fatal(err)
						}
					}
					b.ReportMetric(float64(sym.NNZ()), "nnzL")
					b.ReportMetric(float64(sym.StoredNNZ()), "storedL")
					b.ReportMetric(float64(len(p.rows)), "edges")
				})
			}
		}
	}
}

// BenchmarkFactorizeSolve measures one numeric factorisation and one solve,
// the work of one Newton iteration of the hydraulic solver; at 100k nodes
// also with Workers: 2.
func BenchmarkFactorizeSolve(b *testing.B) {
	for _, kind := range benchKinds {
		for _, k := range benchSizes {
			p := benchPattern(kind, k)
			for _, v := range []struct {
				w int
				m method
			}{{1, methodSupernodal}, {2, methodSupernodal}, {1, methodSimplicial}} {
				w := v.w
				if w == 2 && k < 300 {
					continue
				}
				name := "supernodal"
				if v.m == methodSimplicial {
					name = "simplicial"
				}
				b.Run(fmt.Sprintf("%s/n=%d/w=%d/%s", kind, p.n, w, name), func(b *testing.B) {
					sym, err := Analyze(p.n, p.rows, p.cols, Options{Workers: w, method: v.m})
					if err != nil {
						b.Fatal(err)
					}
					f := sym.NewFactor()
					d, o := values(p, 1)
					rhs := make([]float64, p.n)
					for i := range rhs {
						rhs[i] = 1
					}
					x := make([]float64, p.n)
					for b.Loop() {
						if err := f.Factorize(d, o); err != nil {
							b.Fatal(err)
						}
						f.Solve(x, rhs)
					}
					b.ReportMetric(float64(sym.NNZ()), "nnzL")
					b.ReportMetric(sym.flopsPerCol, "flops/column")
				})
			}
		}
	}
}

// BenchmarkDenseCholesky is gonum's dense Cholesky factorisation and solve
// at n = 2000, for the ratio to the sparse solver.
func BenchmarkDenseCholesky(b *testing.B) {
	const n = 2000
	rng := rand.New(rand.NewPCG(1, 2))
	a := mat.NewSymDense(n, nil)
	for i := 0; i < n; i++ {
		for j := 0; j < i; j++ {
			v := rng.Float64() - 0.5
			a.SetSym(i, j, v)
		}
		a.SetSym(i, i, float64(n))
	}
	rhs := mat.NewVecDense(n, nil)
	for i := 0; i < n; i++ {
		rhs.SetVec(i, 1)
	}
	var ch mat.Cholesky
	var x mat.VecDense
	for b.Loop() {
		if !ch.Factorize(a) {
			b.Fatal("not positive definite")
		}
		if err := ch.SolveVecTo(&x, rhs); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(n*(n+1)/2), "nnzL")
}

func shortName(o Ordering) string {
	switch o {
	case MinimumDegree:
		return "md"
	case ReverseCuthillMcKee:
		return "rcm"
	}
	return "natural"
}
