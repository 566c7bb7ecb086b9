package sparse

import (
	"errors"
	"slices"
	"testing"
)

// TestPlanCovers checks that a split plan covers every supernode exactly
// once and that no subtree of one part has an ancestor in the other.
func TestPlanCovers(t *testing.T) {
	for _, p := range testPatterns() {
		sym, err := Analyze(p.n, p.rows, p.cols, Options{forceSplit: true})
		if err != nil {
			t.Fatal(err)
		}
		ns := sym.Supernodes()
		owner := make([]int, ns)
		for k := range owner {
			owner[k] = -1
		}
		for w, rgs := range sym.plan {
			for _, rg := range rgs {
				for k := rg[0]; k < rg[1]; k++ {
					if owner[k] != -1 {
						t.Fatalf("%s: supernode %d in two places", p.name, k)
					}
					owner[k] = w
				}
			}
		}
		for _, k := range sym.top {
			if owner[k] != -1 {
				t.Fatalf("%s: top supernode %d also in part %d", p.name, k, owner[k])
			}
			owner[k] = 2
		}
		for k, o := range owner {
			if o == -1 {
				t.Fatalf("%s: supernode %d not in the plan", p.name, k)
			}
			// The parent of a part's supernode is in the same part or on top.
			last := sym.superStart[k+1] - 1
			if par := sym.parent[last]; par != -1 && o < 2 {
				po := owner[sym.colSuper[par]]
				if po != o && po != 2 {
					t.Fatalf("%s: supernode %d (part %d) has its parent in part %d", p.name, k, o, po)
				}
			}
		}
		if ns >= 2 && len(sym.plan[1]) == 0 {
			t.Logf("%s: no split (%d supernodes)", p.name, ns)
		}
	}
}

// TestSplitPlanSolves runs the dense comparison, the pivot-failure checks
// and the refactorisation checks with split plans, and checks that one and
// two goroutines give bit-identical factors.
func TestSplitPlanSolves(t *testing.T) {
	checkAgainstDense(t, true, methodSupernodal)
	checkNotPositiveDefinite(t, true, methodSupernodal)
	checkRefactorize(t, true, methodSupernodal)
	for _, p := range []pattern{networkPattern(30, 0.75, 8), gridPattern(25, 20), treePlusPattern(500, 50, 3)} {
		d, o := values(p, 6)
		var got [2][]float64
		for w := 1; w <= 2; w++ {
			sym, err := Analyze(p.n, p.rows, p.cols, Options{Workers: w, forceSplit: true})
			if err != nil {
				t.Fatal(err)
			}
			if len(sym.plan[1]) == 0 {
				t.Fatalf("%s: plan not split", p.name)
			}
			f := sym.NewFactor()
			if err := f.Factorize(d, o); err != nil {
				t.Fatal(err)
			}
			got[w-1] = slices.Clone(f.values)
			if w == 2 {
				allocs := testing.AllocsPerRun(10, func() {
					if err := f.Factorize(d, o); err != nil {
						t.Fatal(err)
					}
				})
				if allocs != 0 {
					t.Errorf("%s: two-goroutine Factorize allocates %v times, want 0", p.name, allocs)
				}
			}
		}
		if !slices.Equal(got[0], got[1]) {
			t.Errorf("%s: factors with 1 and 2 goroutines differ, want bit-identical", p.name)
		}
		// A failed pivot in either part is reported at the first failing
		// column in elimination order.
		sym, _ := Analyze(p.n, p.rows, p.cols, Options{Workers: 2, forceSplit: true})
		perm := sym.Perm()
		for _, k := range []int{0, p.n / 3, p.n - 1} {
			bad := slices.Clone(d)
			bad[perm[k]] = -1 // a negative diagonal fails at its own pivot at the latest
			err := sym.NewFactor().Factorize(bad, o)
			var npd *NotPositiveDefiniteError
			if !errors.As(err, &npd) {
				t.Fatalf("%s: got %v, want *NotPositiveDefiniteError", p.name, err)
			}
			// Columns before k are unaffected by the change, so the
			// failure is at k (a negative diagonal minus a positive
			// Schur update stays negative).
			if npd.Row != perm[k] {
				t.Errorf("%s: error names row %d, want %d", p.name, npd.Row, perm[k])
			}
		}
	}
}

// TestWorkersOption checks the validation of Options.Workers.
func TestWorkersOption(t *testing.T) {
	if _, err := Analyze(2, nil, nil, Options{Workers: 3}); err == nil {
		t.Error("Workers 3: want an error")
	}
	if _, err := Analyze(2, nil, nil, Options{Workers: -1}); err == nil {
		t.Error("Workers -1: want an error")
	}
}
