package sparse

import "fmt"

// Refactorize computes the factor of a matrix that differs from the one
// of the last successful Factorize or Refactorize of f only in the rows
// (and, by symmetry, columns) listed in rows, original labels: every entry
// whose value changed, diagonal or off-diagonal, must have its row or its
// column listed (an off-diagonal entry (i, j) that changed: i or j; a
// changed diagonal: i). Listing a row that did not change costs time,
// never correctness. diag and offdiag are the whole new matrix, as
// Factorize takes them.
//
// Row k of L depends only on row k of the matrix and on the rows of L
// below it in the elimination tree (its pattern lies in its subtree;
// Liu 1990, §3), so the rows to recompute are the listed rows and their
// ancestors; the others keep their values. Each recomputed row is computed
// by the operations Factorize uses, in the same order, so the factor is
// bit for bit the one Factorize would compute from scratch. It returns the
// number of rows recomputed.
//
// After a failed Factorize or Refactorize, with the supernodal method (too
// dense a pattern for the simplicial one) or when more than half the rows
// would be recomputed, it factorises from scratch and returns N. A
// non-positive pivot returns *NotPositiveDefiniteError as Factorize does,
// and leaves f without a factor.
func (f *Factor) Refactorize(diag, offdiag []float64, rows []int) (int, error) {
	s := f.sym
	if !f.ok || s.simp == nil {
		return s.n, f.Factorize(diag, offdiag)
	}
	if len(diag) != s.n {
		return 0, fmt.Errorf("sparse: refactorize: %d diagonal values for order %d: %w", len(diag), s.n, ErrShape)
	}
	if len(offdiag) != s.nIn {
		return 0, fmt.Errorf("sparse: refactorize: %d off-diagonal values for %d pattern entries: %w", len(offdiag), s.nIn, ErrShape)
	}
	if len(f.touched) != s.n {
		f.touched = make([]bool, s.n)
	}
	t := f.touched
	lo := s.n
	for _, r := range rows {
		if r < 0 || r >= s.n {
			return 0, fmt.Errorf("sparse: refactorize: row %d outside the order %d: %w", r, s.n, ErrShape)
		}
		k := s.iperm[r]
		t[k] = true
		lo = min(lo, k)
	}
	// Close the set under "parent of": in the postordered tree a parent
	// comes after its children, so one sweep upwards does it.
	count := 0
	for k := lo; k < s.n; k++ {
		if !t[k] {
			continue
		}
		count++
		if p := s.parent[k]; p >= 0 {
			t[p] = true
		}
	}
	if 2*count > s.n {
		clear(t[lo:])
		return s.n, f.Factorize(diag, offdiag)
	}
	f.ok = false
	// Solve leaves its vector in x; a row's computation needs zeros in
	// the columns it reads (a full sweep zeroes each as it passes).
	clear(f.x)
	for k := lo; k < s.n; k++ {
		if !t[k] {
			continue
		}
		t[k] = false
		if !f.simplicialRow(k, diag, offdiag) {
			clear(t[k:])
			return count, &NotPositiveDefiniteError{Row: s.perm[k], Pivot: f.ws[0].pivot}
		}
	}
	f.ok = true
	return count, nil
}
