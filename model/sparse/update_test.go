package sparse

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// changeSome changes the values of a few random pattern entries and
// diagonals, keeping strict diagonal dominance (an off-diagonal value is
// only shrunk, a diagonal only grown), and returns the rows to list: an
// off-diagonal entry's by one of its two ends at random (either suffices),
// a diagonal's by its own row.
func changeSome(rng *rand.Rand, p pattern, diag, off []float64, count int) []int {
	var rows []int
	for c := 0; c < count; c++ {
		e := rng.IntN(len(off))
		off[e] *= 0.2 + 0.8*rng.Float64()
		if rng.IntN(2) == 0 {
			rows = append(rows, p.rows[e])
		} else {
			rows = append(rows, p.cols[e])
		}
		if rng.IntN(3) == 0 {
			i := rng.IntN(p.n)
			diag[i] *= 1 + rng.Float64()
			rows = append(rows, i)
		}
	}
	return rows
}

// TestRefactorizeRows changes a few entries at a time and checks the
// refactored factor against a factorisation from scratch of the same
// values, bit for bit (Refactorize promises the same operations), with a
// Solve in between (which leaves its vector in the workspace), and its
// solution against gonum's dense Cholesky (an independent
// implementation of the same factorisation; Golub & Van Loan 2013,
// Alg. 4.2.2).
func TestRefactorizeRows(t *testing.T) {
	checked := 0
	for _, p := range testPatterns() {
		sym, err := Analyze(p.n, p.rows, p.cols, Options{})
		if err != nil {
			t.Fatal(err)
		}
		if sym.simp == nil || len(p.rows) == 0 {
			continue
		}
		diag, off := values(p, 1)
		f, g := sym.NewFactor(), sym.NewFactor()
		if err := f.Factorize(diag, off); err != nil {
			t.Fatal(err)
		}
		rng := rand.New(rand.NewPCG(3, uint64(p.n)))
		x := make([]float64, p.n)
		b := make([]float64, p.n)
		partial := false
		for round := 0; round < 30; round++ {
			for i := range b {
				b[i] = rng.Float64() - 0.5
			}
			f.Solve(x, b)
			rows := changeSome(rng, p, diag, off, 1+round%3)
			got, err := f.Refactorize(diag, off, rows)
			if err != nil {
				t.Fatal(err)
			}
			if got < p.n {
				partial = true
			}
			if err := g.Factorize(diag, off); err != nil {
				t.Fatal(err)
			}
			for i := range f.values {
				if f.values[i] != g.values[i] {
					t.Fatalf("%s round %d: value %d of L is %v refactored, %v factored afresh", p.name, round, i, f.values[i], g.values[i])
				}
			}
			f.Solve(x, b)
			var ch mat.Cholesky
			if !ch.Factorize(mat.NewSymDense(p.n, dense(p, diag, off))) {
				t.Fatalf("%s: gonum says not positive definite", p.name)
			}
			want := mat.NewVecDense(p.n, nil)
			if err := ch.SolveVecTo(want, mat.NewVecDense(p.n, b)); err != nil {
				t.Fatal(err)
			}
			for i := range x {
				if d := math.Abs(x[i] - want.AtVec(i)); d > 1e-9*(1+math.Abs(want.AtVec(i))) {
					t.Fatalf("%s round %d: x[%d] = %v, gonum %v", p.name, round, i, x[i], want.AtVec(i))
				}
			}
		}
		if partial {
			checked++
		}
	}
	if checked < 3 {
		t.Fatalf("only %d patterns were refactored in part", checked)
	}
}

// TestRefactorizeCounts checks which rows are recomputed on a path (a
// tridiagonal matrix in natural order, whose elimination tree is the
// path itself: every row is the parent of the one before), by hand: a
// change in row r recomputes rows r … n−1.
func TestRefactorizeCounts(t *testing.T) {
	n := 10
	p := pattern{name: "path", n: n}
	for i := 1; i < n; i++ {
		p.add(i, i-1)
	}
	sym, err := Analyze(n, p.rows, p.cols, Options{Ordering: Natural, method: methodSimplicial})
	if err != nil {
		t.Fatal(err)
	}
	diag, off := values(p, 2)
	f := sym.NewFactor()
	if got, err := f.Refactorize(diag, off, nil); err != nil || got != n {
		t.Fatalf("before any factor: %d rows, %v; want %d (a full factorisation)", got, err, n)
	}
	for _, c := range []struct{ rows []int }{{[]int{7}}, {[]int{9}}, {[]int{8, 6}}, {nil}} {
		want := 0
		if len(c.rows) > 0 {
			lo := n
			for _, r := range c.rows {
				lo = min(lo, r)
			}
			want = n - lo
		}
		got, err := f.Refactorize(diag, off, c.rows)
		if err != nil || got != want {
			t.Errorf("rows %v: %d recomputed (%v), want %d", c.rows, got, err, want)
		}
	}
	// More than half: from scratch.
	if got, _ := f.Refactorize(diag, off, []int{2}); got != n {
		t.Errorf("row 2: %d, want a full factorisation (%d)", got, n)
	}
}

// TestRefactorizeErrors: a pivot that fails in the refactored rows is
// reported as Factorize reports it, and leaves no factor (the next call
// factors afresh); bad rows are shape errors.
func TestRefactorizeErrors(t *testing.T) {
	p := treePlusPattern(80, 30, 1)
	sym, err := Analyze(p.n, p.rows, p.cols, Options{method: methodSimplicial})
	if err != nil {
		t.Fatal(err)
	}
	diag, off := values(p, 1)
	f := sym.NewFactor()
	if err := f.Factorize(diag, off); err != nil {
		t.Fatal(err)
	}
	if _, err := f.Refactorize(diag, off, []int{p.n}); !errors.Is(err, ErrShape) {
		t.Errorf("row out of range: %v, want ErrShape", err)
	}
	if _, err := f.Refactorize(diag[:3], off, nil); !errors.Is(err, ErrShape) {
		t.Errorf("short diagonal: %v, want ErrShape", err)
	}
	bad := append([]float64(nil), diag...)
	bad[5] = -1
	_, err = f.Refactorize(bad, off, []int{5})
	var npd *NotPositiveDefiniteError
	if !errors.As(err, &npd) || npd.Row != 5 {
		t.Fatalf("negative diagonal: %v, want not positive definite at row 5", err)
	}
	if got, err := f.Refactorize(diag, off, []int{5}); err != nil || got != p.n {
		t.Errorf("after a failure: %d rows (%v), want a full factorisation", got, err)
	}
}
