package sparse

import (
	"errors"
	"math"
	"testing"
)

// FuzzAnalyzeSolve builds a pattern from arbitrary bytes (order, then pairs
// of indices, some out of range or on the diagonal), and checks that
// Analyze either rejects it with ErrShape or yields a factorisation whose
// solution has a small residual (a check needing no reference), for every
// ordering and with split plans.
func FuzzAnalyzeSolve(f *testing.F) {
	f.Add([]byte{5, 0, 1, 1, 2, 2, 3, 3, 4})
	f.Add([]byte{1})
	f.Add([]byte{0})
	f.Add([]byte{8, 0, 1, 0, 2, 0, 3, 0, 4, 0, 5, 0, 6, 0, 7, 1, 1})
	f.Add([]byte{40, 0, 1, 1, 2, 2, 3, 3, 0, 10, 20, 20, 30, 30, 39, 39, 10, 5, 5})
	f.Fuzz(func(t *testing.T, data []byte) {
		if len(data) == 0 {
			return
		}
		n := int(data[0]) % 70
		var rows, cols []int
		for k := 1; k+1 < len(data); k += 2 {
			rows = append(rows, int(data[k])%(n+2)-1) // may be -1 or n
			cols = append(cols, int(data[k+1])%(n+2)-1)
		}
		for _, o := range allOrderings {
			for v := 0; v < 4; v++ {
				split, m := v%2 == 1, methodSupernodal
				if v >= 2 {
					m = methodSimplicial
				}
				sym, err := Analyze(n, rows, cols, Options{Ordering: o, forceSplit: split, Workers: 2, method: m})
				if err != nil {
					if !errors.Is(err, ErrShape) {
						t.Fatalf("Analyze: unexpected error %v", err)
					}
					return
				}
				p := pattern{n: n, rows: rows, cols: cols}
				if got, want := sym.NNZ(), bruteForceNNZ(p, sym.Perm()); got != want {
					t.Fatalf("%v: NNZ %d, brute force %d", o, got, want)
				}
				diag, off := values(p, uint64(len(data)))
				fc := sym.NewFactor()
				if err := fc.Factorize(diag, off); err != nil {
					t.Fatalf("%v: Factorize of a diagonally dominant matrix: %v", o, err)
				}
				b := make([]float64, n)
				for i := range b {
					b[i] = float64(i%5) - 2
				}
				x := make([]float64, n)
				fc.Solve(x, b)
				ax := mulVec(p, diag, off, x)
				num, den := 0.0, 0.0
				for i := range b {
					num += (ax[i] - b[i]) * (ax[i] - b[i])
					den += b[i] * b[i]
				}
				if den > 0 && math.Sqrt(num/den) > 1e-12 {
					t.Fatalf("%v: residual %.3g > 1e-12", o, math.Sqrt(num/den))
				}
			}
		}
	})
}
