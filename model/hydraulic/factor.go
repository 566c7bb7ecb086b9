package hydraulic

import (
	"errors"
	"fmt"

	"plumbline/model/sparse"
)

// factorizer is the numeric half of a symmetric positive definite solver
// whose pattern was fixed beforehand: Factorize takes the diagonal and the
// value of each off-diagonal entry of the pattern, Solve solves with the
// last factor.
type factorizer interface {
	Factorize(diag, off []float64) error
	Solve(dst, b []float64)
}

// pivotError reports a non-positive pivot at matrix row row.
type pivotError struct {
	row   int
	pivot float64
}

// Error names the matrix row.
func (e *pivotError) Error() string {
	return fmt.Sprintf("matrix not positive definite at row %d (pivot %g)", e.row, e.pivot)
}

// sparseFactor adapts model/sparse to the factorizer interface.
type sparseFactor struct{ f *sparse.Factor }

func (s sparseFactor) Factorize(diag, off []float64) error {
	err := s.f.Factorize(diag, off)
	if err == nil {
		return nil
	}
	var npd *sparse.NotPositiveDefiniteError
	if errors.As(err, &npd) {
		return &pivotError{row: npd.Row, pivot: npd.Pivot}
	}
	return err
}

func (s sparseFactor) Solve(dst, b []float64) { s.f.Solve(dst, b) }

// newFactorizer analyses the pattern once: a minimum-degree ordering and
// symbolic factorisation by model/sparse (or gonum's dense Cholesky when
// dense is set, for tests).
func newFactorizer(n int, rows, cols []int, dense bool) (factorizer, error) {
	if dense {
		return newDenseFactor(n, rows, cols), nil
	}
	sym, err := sparse.Analyze(n, rows, cols, sparse.Options{})
	if err != nil {
		return nil, err
	}
	return sparseFactor{sym.NewFactor()}, nil
}
