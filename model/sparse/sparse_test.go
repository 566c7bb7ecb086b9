package sparse

import (
	"errors"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"gonum.org/v1/gonum/mat"
)

var allOrderings = []Ordering{MinimumDegree, ReverseCuthillMcKee, Natural}

func testPatterns() []pattern {
	var ps []pattern
	ps = append(ps, pattern{name: "empty", n: 0})
	ps = append(ps, pattern{name: "single", n: 1})
	ps = append(ps, pattern{name: "diagonal", n: 7})
	g := gridPattern(9, 7)
	ps = append(ps, g)
	ps = append(ps, treePlusPattern(80, 30, 1))
	ps = append(ps, treePlusPattern(150, 0, 2))
	// Duplicates, both triangles.
	d := treePlusPattern(40, 20, 3)
	d.name = "duplicates"
	for k := 0; k < 30; k++ {
		d.add(d.cols[k], d.rows[k])
		d.add(d.rows[k], d.cols[k])
	}
	ps = append(ps, d)
	// Disconnected components: two grids and isolated nodes.
	dc := gridPattern(5, 6)
	dc.name = "disconnected"
	off := dc.n
	g2 := gridPattern(4, 4)
	for k := range g2.rows {
		dc.add(g2.rows[k]+off, g2.cols[k]+off)
	}
	dc.n += g2.n + 5
	ps = append(ps, dc)
	ps = append(ps, networkPattern(14, 0.75, 5))
	// A star: its centre is a dense row for the minimum degree ordering.
	st := pattern{name: "star", n: 300}
	for i := 1; i < st.n; i++ {
		st.add(0, i)
		if i+1 < st.n && i%3 == 0 {
			st.add(i, i+1)
		}
	}
	ps = append(ps, st)
	// A complete graph.
	kc := pattern{name: "complete", n: 12}
	for i := 0; i < kc.n; i++ {
		for j := 0; j < i; j++ {
			kc.add(i, j)
		}
	}
	ps = append(ps, kc)
	return ps
}

func norm(v []float64) float64 {
	s := 0.0
	for _, x := range v {
		s += x * x
	}
	return math.Sqrt(s)
}

// TestAgainstDenseCholesky compares the solution with gonum's dense
// Cholesky (gonum.org/v1/gonum/mat.Cholesky, an independent solver) and
// checks the residual ‖Ax−b‖/‖b‖, which needs no reference.
// It runs with the vector tile kernels (where the processor has them) and
// with the plain Go kernels.
func TestAgainstDenseCholesky(t *testing.T) {
	vec := useVector
	defer func() { useVector = vec }()
	for _, v := range []bool{vec, false} {
		useVector = v
		checkAgainstDense(t, false, methodSupernodal)
		checkAgainstDense(t, false, methodSimplicial)
		checkAgainstDense(t, false, methodAuto)
	}
}

func checkAgainstDense(t *testing.T, split bool, m method) {
	for _, p := range testPatterns() {
		for _, o := range allOrderings {
			sym, err := Analyze(p.n, p.rows, p.cols, Options{Ordering: o, forceSplit: split, method: m})
			if err != nil {
				t.Fatalf("%s/%v: Analyze: %v", p.name, o, err)
			}
			if got := sym.N(); got != p.n {
				t.Fatalf("%s/%v: N() = %d, want %d", p.name, o, got, p.n)
			}
			diag, off := values(p, 42)
			f := sym.NewFactor()
			if err := f.Factorize(diag, off); err != nil {
				t.Fatalf("%s/%v: Factorize: %v", p.name, o, err)
			}
			rng := rand.New(rand.NewPCG(9, 9))
			b := make([]float64, p.n)
			for i := range b {
				b[i] = rng.NormFloat64()
			}
			x := make([]float64, p.n)
			f.Solve(x, b)
			// Residual check.
			ax := mulVec(p, diag, off, x)
			res := make([]float64, p.n)
			for i := range res {
				res[i] = ax[i] - b[i]
			}
			if nb := norm(b); nb > 0 {
				if rel := norm(res) / nb; rel > 1e-12 {
					t.Errorf("%s/%v: residual ‖Ax−b‖/‖b‖ = %.3g, want ≤ 1e-12", p.name, o, rel)
				}
			}
			if p.n == 0 {
				continue
			}
			// Dense reference.
			a := mat.NewSymDense(p.n, dense(p, diag, off))
			var ch mat.Cholesky
			if ok := ch.Factorize(a); !ok {
				t.Fatalf("%s: gonum Cholesky says not positive definite", p.name)
			}
			var want mat.VecDense
			if err := ch.SolveVecTo(&want, mat.NewVecDense(p.n, slices.Clone(b))); err != nil {
				t.Fatalf("%s: gonum SolveVecTo: %v", p.name, err)
			}
			diff := make([]float64, p.n)
			for i := range diff {
				diff[i] = x[i] - want.AtVec(i)
			}
			if rel := norm(diff) / norm(want.RawVector().Data); rel > 1e-10 {
				t.Errorf("%s/%v: ‖x−x_dense‖/‖x_dense‖ = %.3g, want ≤ 1e-10", p.name, o, rel)
			}
			// Aliased solve gives the same answer.
			bb := slices.Clone(b)
			f.Solve(bb, bb)
			for i := range bb {
				if bb[i] != x[i] {
					t.Fatalf("%s/%v: aliased Solve x[%d] = %v, want %v", p.name, o, i, bb[i], x[i])
				}
			}
		}
	}
}

// TestPermIsPermutation checks that Perm is a permutation of 0..n-1.
func TestPermIsPermutation(t *testing.T) {
	for _, p := range testPatterns() {
		for _, o := range allOrderings {
			sym, err := Analyze(p.n, p.rows, p.cols, Options{Ordering: o})
			if err != nil {
				t.Fatal(err)
			}
			perm := sym.Perm()
			if len(perm) != p.n {
				t.Fatalf("%s/%v: len(Perm) = %d, want %d", p.name, o, len(perm), p.n)
			}
			seen := make([]bool, p.n)
			for k, v := range perm {
				if v < 0 || v >= p.n || seen[v] {
					t.Fatalf("%s/%v: Perm[%d] = %d repeats or is out of range", p.name, o, k, v)
				}
				seen[v] = true
			}
		}
	}
}

// bruteForceNNZ counts the nonzeros of L by eliminating the boolean pattern
// of P A Pᵀ densely: eliminating column k joins all its later neighbours
// (the graph model of elimination, George & Liu 1981, §5.1.2).
func bruteForceNNZ(p pattern, perm []int) int {
	count, _ := bruteForceSymbolic(p, perm)
	return count
}

// bruteForceSymbolic returns the nonzero count of L and its elimination
// tree, parent[j] = min{i > j : L(i,j) != 0} (Liu 1990, §2), by dense
// symbolic elimination.
func bruteForceSymbolic(p pattern, perm []int) (int, []int) {
	n := p.n
	iperm := invert(perm)
	nz := make([][]bool, n)
	for i := range nz {
		nz[i] = make([]bool, n)
	}
	for k := range p.rows {
		i, j := iperm[p.rows[k]], iperm[p.cols[k]]
		nz[i][j] = true
		nz[j][i] = true
	}
	count := 0
	parent := make([]int, n)
	for k := 0; k < n; k++ {
		count++ // diagonal
		var below []int
		for i := k + 1; i < n; i++ {
			if nz[i][k] {
				below = append(below, i)
			}
		}
		parent[k] = -1
		if len(below) > 0 {
			parent[k] = below[0]
		}
		count += len(below)
		for _, a := range below {
			for _, b := range below {
				if a != b {
					nz[a][b] = true
				}
			}
		}
	}
	return count, parent
}

// TestNNZBruteForce checks NNZ against an independent dense symbolic
// elimination in the returned order.
func TestNNZBruteForce(t *testing.T) {
	ps := testPatterns()
	ps = append(ps, gridPattern(12, 11), treePlusPattern(200, 120, 8), networkPattern(15, 0.6, 9))
	for _, p := range ps {
		for _, o := range allOrderings {
			sym, err := Analyze(p.n, p.rows, p.cols, Options{Ordering: o})
			if err != nil {
				t.Fatal(err)
			}
			want, parent := bruteForceSymbolic(p, sym.Perm())
			if got := sym.NNZ(); got != want {
				t.Errorf("%s/%v: NNZ = %d, want %d (brute force)", p.name, o, got, want)
			}
			if !slices.Equal(sym.parent, parent) {
				t.Errorf("%s/%v: elimination tree differs from the brute-force one", p.name, o)
			}
			if sym.StoredNNZ() < sym.NNZ() {
				t.Errorf("%s/%v: StoredNNZ %d < NNZ %d", p.name, o, sym.StoredNNZ(), sym.NNZ())
			}
		}
	}
}

// TestMinimumDegreeFill checks that the minimum degree ordering is a real
// fill reducer: on a 40×40 grid, a banded (RCM) order fills like k³ while a
// minimum degree order fills like k² log k (George & Liu 1981, ch. 4 and 8).
func TestMinimumDegreeFill(t *testing.T) {
	p := gridPattern(40, 40)
	nnz := map[Ordering]int{}
	for _, o := range allOrderings {
		sym, err := Analyze(p.n, p.rows, p.cols, Options{Ordering: o})
		if err != nil {
			t.Fatal(err)
		}
		nnz[o] = sym.NNZ()
	}
	t.Logf("40×40 grid nnz(L): MD %d, RCM %d, natural %d", nnz[MinimumDegree], nnz[ReverseCuthillMcKee], nnz[Natural])
	if float64(nnz[MinimumDegree]) > 0.6*float64(nnz[ReverseCuthillMcKee]) {
		t.Errorf("minimum degree nnz(L) = %d, want ≤ 0.6 × RCM's %d", nnz[MinimumDegree], nnz[ReverseCuthillMcKee])
	}
	// In the natural order of a k×k grid all fill stays inside the envelope
	// and fills it (George & Liu 1981, §4.1-4.2): row i of L runs from its
	// first nonzero of A, column i−k (i−1 on the first grid row), to i.
	k, n := 40, 1600
	want := 0
	for i := 0; i < n; i++ {
		first := max(i-k, 0)
		if i < k {
			first = max(i-1, 0)
		}
		want += i - first + 1
	}
	if nnz[Natural] != want {
		t.Errorf("natural grid nnz(L) = %d, want envelope count %d", nnz[Natural], want)
	}
}

// TestNotPositiveDefinite checks that an indefinite matrix is reported at
// the original row whose pivot fails.
func TestNotPositiveDefinite(t *testing.T) {
	for _, m := range []method{methodAuto, methodSupernodal, methodSimplicial} {
		checkNotPositiveDefinite(t, false, m)
	}
}

func checkNotPositiveDefinite(t *testing.T, split bool, m method) {
	// A diagonal matrix with one negative entry: the failing row is that
	// entry whatever the ordering.
	for _, o := range allOrderings {
		p := pattern{n: 6}
		sym, err := Analyze(p.n, nil, nil, Options{Ordering: o, forceSplit: split, method: m})
		if err != nil {
			t.Fatal(err)
		}
		f := sym.NewFactor()
		err = f.Factorize([]float64{1, 2, 3, -4, 5, 6}, nil)
		var npd *NotPositiveDefiniteError
		if !errors.As(err, &npd) {
			t.Fatalf("%v: got error %v, want *NotPositiveDefiniteError", o, err)
		}
		if npd.Row != 3 || npd.Pivot != -4 {
			t.Errorf("%v: got row %d pivot %g, want row 3 pivot -4", o, npd.Row, npd.Pivot)
		}
	}
	// A grid matrix made indefinite at one node: the expected row is found
	// by dense elimination in the same order (first non-positive Schur
	// complement pivot).
	p := gridPattern(6, 6)
	for _, o := range allOrderings {
		for _, bad := range []int{0, 14, 35} {
			diag, off := values(p, 4)
			diag[bad] = -0.5
			sym, err := Analyze(p.n, p.rows, p.cols, Options{Ordering: o, forceSplit: split, method: m})
			if err != nil {
				t.Fatal(err)
			}
			perm := sym.Perm()
			a := dense(p, diag, off)
			n := p.n
			wantRow := -1
			pa := make([]float64, n*n)
			for i := 0; i < n; i++ {
				for j := 0; j < n; j++ {
					pa[i*n+j] = a[perm[i]*n+perm[j]]
				}
			}
			for k := 0; k < n && wantRow < 0; k++ {
				d := pa[k*n+k]
				if !(d > 0) {
					wantRow = perm[k]
					break
				}
				for i := k + 1; i < n; i++ {
					l := pa[i*n+k] / d
					for j := k + 1; j < n; j++ {
						pa[i*n+j] -= l * pa[k*n+j]
					}
				}
			}
			f := sym.NewFactor()
			err = f.Factorize(diag, off)
			var npd *NotPositiveDefiniteError
			if !errors.As(err, &npd) {
				t.Fatalf("%v bad=%d: got %v, want *NotPositiveDefiniteError", o, bad, err)
			}
			if npd.Row != wantRow {
				t.Errorf("%v bad=%d: error names row %d, want %d (dense elimination)", o, bad, npd.Row, wantRow)
			}
			if npd.Error() == "" {
				t.Error("empty error message")
			}
		}
	}
}

// TestRefactorize checks that a reused Factor with new values gives exactly
// the result of a fresh Analyze+Factorize, and that reruns are bit-identical.
func TestRefactorize(t *testing.T) {
	for _, m := range []method{methodAuto, methodSupernodal, methodSimplicial} {
		checkRefactorize(t, false, m)
	}
}

func checkRefactorize(t *testing.T, split bool, m method) {
	p := networkPattern(20, 0.7, 12)
	sym, err := Analyze(p.n, p.rows, p.cols, Options{forceSplit: split, method: m})
	if err != nil {
		t.Fatal(err)
	}
	f := sym.NewFactor()
	d1, o1 := values(p, 1)
	d2, o2 := values(p, 2)
	b := make([]float64, p.n)
	for i := range b {
		b[i] = float64(i%7) - 3
	}
	if err := f.Factorize(d1, o1); err != nil {
		t.Fatal(err)
	}
	x1 := make([]float64, p.n)
	f.Solve(x1, b)
	if err := f.Factorize(d2, o2); err != nil {
		t.Fatal(err)
	}
	x2 := make([]float64, p.n)
	f.Solve(x2, b)

	sym2, err := Analyze(p.n, p.rows, p.cols, Options{forceSplit: split, method: m})
	if err != nil {
		t.Fatal(err)
	}
	g := sym2.NewFactor()
	if err := g.Factorize(d2, o2); err != nil {
		t.Fatal(err)
	}
	y2 := make([]float64, p.n)
	g.Solve(y2, b)
	for i := range x2 {
		if x2[i] != y2[i] {
			t.Fatalf("x[%d]: refactorised %v, fresh %v, want bit-identical", i, x2[i], y2[i])
		}
	}
	// Back to the first values.
	if err := f.Factorize(d1, o1); err != nil {
		t.Fatal(err)
	}
	f.Solve(y2, b)
	for i := range x1 {
		if x1[i] != y2[i] {
			t.Fatalf("x[%d]: rerun %v, first run %v, want bit-identical", i, y2[i], x1[i])
		}
	}
	// A failed factorisation does not spoil the next one.
	bad := slices.Clone(d1)
	bad[5] = -1
	if err := f.Factorize(bad, o1); err == nil {
		t.Fatal("want an error for a negative diagonal")
	}
	if err := f.Factorize(d1, o1); err != nil {
		t.Fatal(err)
	}
	f.Solve(y2, b)
	for i := range x1 {
		if x1[i] != y2[i] {
			t.Fatalf("x[%d] after a failed factorisation: %v, want %v", i, y2[i], x1[i])
		}
	}
}

// TestNoAllocations checks that Factorize and Solve allocate nothing.
func TestNoAllocations(t *testing.T) {
	for _, m := range []method{methodAuto, methodSupernodal, methodSimplicial} {
		p := networkPattern(30, 0.75, 3)
		sym, err := Analyze(p.n, p.rows, p.cols, Options{method: m})
		if err != nil {
			t.Fatal(err)
		}
		f := sym.NewFactor()
		d, o := values(p, 5)
		b := make([]float64, p.n)
		x := make([]float64, p.n)
		allocs := testing.AllocsPerRun(20, func() {
			if err := f.Factorize(d, o); err != nil {
				t.Fatal(err)
			}
			f.Solve(x, b)
		})
		if allocs != 0 {
			t.Errorf("method %d: Factorize+Solve allocate %v times per run, want 0", m, allocs)
		}
	}
}

// TestBadInput checks the errors for malformed input.
func TestBadInput(t *testing.T) {
	cases := []struct {
		name       string
		n          int
		rows, cols []int
	}{
		{"negative n", -1, nil, nil},
		{"length mismatch", 3, []int{0, 1}, []int{1}},
		{"out of range", 3, []int{0, 3}, []int{1, 0}},
		{"negative index", 3, []int{0}, []int{-1}},
		{"diagonal entry", 3, []int{1}, []int{1}},
	}
	for _, c := range cases {
		_, err := Analyze(c.n, c.rows, c.cols, Options{})
		if !errors.Is(err, ErrShape) {
			t.Errorf("%s: got %v, want ErrShape", c.name, err)
		}
	}
	if _, err := Analyze(3, nil, nil, Options{Ordering: Ordering(99)}); err == nil {
		t.Error("unknown ordering: want an error")
	}
	sym, err := Analyze(3, []int{0}, []int{1}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	f := sym.NewFactor()
	if err := f.Factorize([]float64{1, 1}, []float64{0.1}); !errors.Is(err, ErrShape) {
		t.Errorf("short diag: got %v, want ErrShape", err)
	}
	if err := f.Factorize([]float64{1, 1, 1}, nil); !errors.Is(err, ErrShape) {
		t.Errorf("short offdiag: got %v, want ErrShape", err)
	}
}

// TestManyFactorsOneSymbolic checks that Factors of one Symbolic are
// independent (and, under -race, safe to use from separate goroutines).
func TestManyFactorsOneSymbolic(t *testing.T) {
	p := networkPattern(16, 0.7, 4)
	sym, err := Analyze(p.n, p.rows, p.cols, Options{})
	if err != nil {
		t.Fatal(err)
	}
	b := make([]float64, p.n)
	for i := range b {
		b[i] = 1
	}
	results := make([][]float64, 2)
	done := make(chan int)
	for g := 0; g < 2; g++ {
		go func(g int) {
			defer func() { done <- g }()
			f := sym.NewFactor()
			d, o := values(p, uint64(g))
			for it := 0; it < 5; it++ {
				if err := f.Factorize(d, o); err != nil {
					t.Error(err)
					return
				}
			}
			x := make([]float64, p.n)
			f.Solve(x, b)
			results[g] = x
		}(g)
	}
	<-done
	<-done
	for g := 0; g < 2; g++ {
		d, o := values(p, uint64(g))
		f := sym.NewFactor()
		if err := f.Factorize(d, o); err != nil {
			t.Fatal(err)
		}
		x := make([]float64, p.n)
		f.Solve(x, b)
		for i := range x {
			if results[g] == nil || results[g][i] != x[i] {
				t.Fatalf("factor %d: concurrent result differs at %d", g, i)
			}
		}
	}
}

// TestPoissonChain checks the discrete 1D Poisson matrix tridiag(−1,2,−1),
// whose solution for b = 1 is x_i = i(n+1−i)/2, i = 1..n (the second
// difference of a quadratic; e.g. Strang 2007, "Computational Science and
// Engineering", §1.2, from memory). The entries come shuffled, in both
// triangles, and split into duplicates that must be summed.
func TestPoissonChain(t *testing.T) {
	const n = 2000
	rng := rand.New(rand.NewPCG(4, 4))
	var rows, cols []int
	var off []float64
	for i := 0; i+1 < n; i++ {
		// −1 split as −0.25 + −0.75, one half in each triangle.
		rows = append(rows, i, i+1)
		cols = append(cols, i+1, i)
		off = append(off, -0.25, -0.75)
	}
	idx := rng.Perm(len(rows))
	r2, c2, o2 := make([]int, len(idx)), make([]int, len(idx)), make([]float64, len(idx))
	for k, j := range idx {
		r2[k], c2[k], o2[k] = rows[j], cols[j], off[j]
	}
	diag := make([]float64, n)
	for i := range diag {
		diag[i] = 2
	}
	for _, o := range allOrderings {
		sym, err := Analyze(n, r2, c2, Options{Ordering: o})
		if err != nil {
			t.Fatal(err)
		}
		// A chain has no fill in a good order: nnz(L) = 2n − 1.
		if o != Natural && sym.NNZ() != 2*n-1 {
			t.Errorf("%v: chain nnz(L) = %d, want %d", o, sym.NNZ(), 2*n-1)
		}
		f := sym.NewFactor()
		if err := f.Factorize(diag, o2); err != nil {
			t.Fatal(err)
		}
		x := make([]float64, n)
		for i := range x {
			x[i] = 1
		}
		f.Solve(x, x)
		for i := range x {
			want := float64(i+1) * float64(n-i) / 2
			if d := math.Abs(x[i] - want); d > 1e-9*want {
				t.Fatalf("%v: x[%d] = %.12g, want %.12g (rel diff %.3g > 1e-9)", o, i, x[i], want, d/want)
			}
		}
	}
}

// The two methods factor the same matrix: on every test pattern and
// ordering, the simplicial factor's solution agrees with the supernodal
// one to rounding (both are checked against gonum's dense Cholesky in
// TestAgainstDenseCholesky), and Analyze picks the simplicial method for
// a pipe network's pattern and the supernodal one for a fine grid.
func TestMethodsAgree(t *testing.T) {
	for _, p := range testPatterns() {
		for _, o := range allOrderings {
			var xs [2][]float64
			for i, m := range []method{methodSupernodal, methodSimplicial} {
				sym, err := Analyze(p.n, p.rows, p.cols, Options{Ordering: o, method: m})
				if err != nil {
					t.Fatal(err)
				}
				if (sym.simp != nil) != (m == methodSimplicial) {
					t.Fatalf("%s/%v: method %d not taken", p.name, o, m)
				}
				f := sym.NewFactor()
				d, off := values(p, 7)
				if err := f.Factorize(d, off); err != nil {
					t.Fatal(err)
				}
				b := make([]float64, p.n)
				for j := range b {
					b[j] = float64(j%7) - 3
				}
				xs[i] = make([]float64, p.n)
				f.Solve(xs[i], b)
			}
			diff := make([]float64, p.n)
			for j := range diff {
				diff[j] = xs[0][j] - xs[1][j]
			}
			if n := norm(xs[0]); n > 0 && norm(diff)/n > 1e-12 {
				t.Errorf("%s/%v: methods differ by %.3g relative", p.name, o, norm(diff)/n)
			}
		}
	}
	net := networkPattern(60, 0.75, 1)
	if sym, _ := Analyze(net.n, net.rows, net.cols, Options{}); sym.simp == nil {
		t.Errorf("pipe-network pattern (%.0f multiply-adds per column): supernodal chosen", sym.flopsPerCol)
	}
	g := gridPattern(100, 100)
	if sym, _ := Analyze(g.n, g.rows, g.cols, Options{}); sym.simp != nil {
		t.Errorf("100×100 grid (%.0f multiply-adds per column): simplicial chosen", sym.flopsPerCol)
	}
}
