package hydraulic

import "gonum.org/v1/gonum/mat"

// denseFactor is a dense Cholesky (gonum mat) behind the factorizer
// interface, for small networks and as an independent check of the sparse
// path in tests.
type denseFactor struct {
	n          int
	rows, cols []int
	a          *mat.SymDense
	chol       mat.Cholesky
	bv, xv     *mat.VecDense
}

func newDenseFactor(n int, rows, cols []int) *denseFactor {
	return &denseFactor{
		n: n, rows: rows, cols: cols,
		a:  mat.NewSymDense(max(n, 1), nil),
		bv: mat.NewVecDense(max(n, 1), nil),
		xv: mat.NewVecDense(max(n, 1), nil),
	}
}

func (d *denseFactor) Factorize(diag, off []float64) error {
	for i := 0; i < d.n; i++ {
		for j := i; j < d.n; j++ {
			d.a.SetSym(i, j, 0)
		}
		d.a.SetSym(i, i, diag[i])
	}
	for k, v := range off {
		i, j := d.rows[k], d.cols[k]
		d.a.SetSym(i, j, d.a.At(i, j)+v)
	}
	if !d.chol.Factorize(d.a) {
		// Locate the first failing pivot for the message.
		for i := 0; i < d.n; i++ {
			if diag[i] <= 0 {
				return &pivotError{row: i, pivot: diag[i]}
			}
		}
		return &pivotError{row: -1}
	}
	return nil
}

func (d *denseFactor) Solve(dst, b []float64) {
	for i := 0; i < d.n; i++ {
		d.bv.SetVec(i, b[i])
	}
	if err := d.chol.SolveVecTo(d.xv, d.bv); err != nil {
		for i := range dst[:d.n] {
			dst[i] = 0
		}
		return
	}
	for i := 0; i < d.n; i++ {
		dst[i] = d.xv.AtVec(i)
	}
}
