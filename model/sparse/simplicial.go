package sparse

import (
	"math"
	"slices"
)

// Method is how Factorize computes L.
type method uint8

const (
	methodAuto       method = iota // chosen by Analyze from the pattern
	methodSupernodal               // supernodal, dense blocks
	methodSimplicial               // column by column, one entry at a time
)

// simplicialMaxFlopsPerColumn is the work of the factorisation, in
// multiply-adds per column of the matrix, up to which Analyze chooses
// the simplicial method: for patterns as sparse as a pipe network's,
// whose supernodes are a few columns wide, the dense kernels have too
// little to work on to repay the bookkeeping of the blocks. Chosen by
// measurement (BenchmarkFactorizeSolve and the hydraulic solver's
// benchmarks on generated towns), not from a source.
const simplicialMaxFlopsPerColumn = 250

// simplicial is the structure of L for the up-looking (row by row)
// Cholesky factorisation (Davis 2006, "Direct Methods for Sparse Linear
// Systems", SIAM, §4.2, §4.1 for the row structure): row k of L is
// computed from row k of A by a sparse triangular solve with the rows
// above it, whose nonzero pattern is the set of columns on the tree
// paths from the nonzeros of A's row k up to k (Liu 1990, §5). L is
// stored by columns, each column's diagonal first and its other rows
// ascending.
//
// Indices are int32 (so the method is only chosen below 2³¹ stored
// entries, simplicialFits): the structure is then half the memory to
// stream through at every factorisation.
type simplicial struct {
	colPtr []int32 // column j of L at colPtr[j] .. colPtr[j+1]-1; the diagonal first
	rowIdx []int32 // row of each stored entry
	// Row k of L below the diagonal: rowPtr[k] .. rowPtr[k+1]-1 of row,
	// ascending by column.
	rowPtr []int32
	row    []rowEntry
	// Row k of the permuted A below the diagonal: input entries
	// aEnt[aPtr[k]:aPtr[k+1]] at columns aCol.
	aPtr, aCol, aEnt []int32
}

// rowEntry is L(k, col) of a row k, stored at values[pos].
type rowEntry struct{ col, pos int32 }

// flopsPerColumn returns the multiply-adds of a Cholesky factorisation
// with the given column counts (Σ (count−1)², the updates of each
// column's entries), divided by the number of columns.
func flopsPerColumn(counts []int) float64 {
	if len(counts) == 0 {
		return 0
	}
	f := 0.0
	for _, c := range counts {
		f += float64(c-1) * float64(c-1)
	}
	return f / float64(len(counts))
}

// newSimplicial builds the row and column structure of L for the
// permuted pattern (pptr, padj) with elimination tree parent and the
// input entries (rows, cols) under iperm.
func newSimplicial(n int, pptr, padj, parent []int, rows, cols, iperm []int, counts []int) *simplicial {
	s := &simplicial{colPtr: make([]int32, n+1)}
	for j := 0; j < n; j++ {
		s.colPtr[j+1] = s.colPtr[j] + int32(counts[j])
	}
	nnz := s.colPtr[n]
	s.rowIdx = make([]int32, nnz)
	next := make([]int32, n) // next free position of each column
	for j := 0; j < n; j++ {
		s.rowIdx[s.colPtr[j]] = int32(j)
		next[j] = s.colPtr[j] + 1
	}
	s.rowPtr = make([]int32, n+1)
	s.row = make([]rowEntry, 0, int(nnz)-n)
	mark := make([]int, n)
	for i := range mark {
		mark[i] = -1
	}
	var pat []int
	for k := 0; k < n; k++ {
		pat = pat[:0]
		mark[k] = k
		for _, i := range padj[pptr[k]:pptr[k+1]] {
			for x := i; x < k && mark[x] != k; x = parent[x] {
				mark[x] = k
				pat = append(pat, x)
			}
		}
		slices.Sort(pat)
		for _, j := range pat {
			p := next[j]
			next[j]++
			s.rowIdx[p] = int32(k)
			s.row = append(s.row, rowEntry{col: int32(j), pos: p})
		}
		s.rowPtr[k+1] = int32(len(s.row))
	}
	// A's entries by permuted row, the larger index of each pair.
	s.aPtr = make([]int32, n+1)
	for e := range rows {
		a, b := iperm[rows[e]], iperm[cols[e]]
		s.aPtr[max(a, b)+1]++
	}
	for k := 0; k < n; k++ {
		s.aPtr[k+1] += s.aPtr[k]
	}
	s.aCol = make([]int32, len(rows))
	s.aEnt = make([]int32, len(rows))
	fill := slices.Clone(s.aPtr[:n])
	for e := range rows {
		a, b := iperm[rows[e]], iperm[cols[e]]
		k := max(a, b)
		s.aCol[fill[k]] = int32(min(a, b))
		s.aEnt[fill[k]] = int32(e)
		fill[k]++
	}
	return s
}

// simplicialFits reports whether a factor of nnzL entries and an input
// of nIn entries can be indexed by the simplicial structure's int32s.
func simplicialFits(nnzL, nIn int) bool { return nnzL < 1<<31-1 && nIn < 1<<31-1 }

// factorSimplicial computes L row by row into f.values (laid out as
// s.simp) and returns the permuted column of the first failed pivot, or
// -1, with the pivot in f.ws[0].pivot. x is zero on entry and on return.
func (f *Factor) factorSimplicial(diag, offdiag []float64) int {
	for k := 0; k < f.sym.n; k++ {
		if !f.simplicialRow(k, diag, offdiag) {
			return k
		}
	}
	return -1
}

// simplicialRow computes row k of L (permuted labels) from row k of the
// matrix and the rows of L above it, and reports whether its pivot was
// positive (if not, the pivot is in f.ws[0].pivot). f.x is zero on entry
// and on return.
func (f *Factor) simplicialRow(k int, diag, offdiag []float64) bool {
	s := f.sym
	sp := s.simp
	L, x := f.values, f.x
	colPtr, rowIdx := sp.colPtr, sp.rowIdx
	x[k] = diag[s.perm[k]]
	for q := sp.aPtr[k]; q < sp.aPtr[k+1]; q++ {
		x[sp.aCol[q]] += offdiag[sp.aEnt[q]]
	}
	d := x[k]
	x[k] = 0
	row := sp.row[sp.rowPtr[k]:sp.rowPtr[k+1]]
	for _, e := range row {
		// L(k, j) = (x_j − Σ_{i<j} L(k,i) L(j,i)) / L(j,j); the sum was
		// subtracted from x_j as the earlier columns were done.
		j := e.col
		c0 := colPtr[j]
		lkj := x[j] / L[c0]
		x[j] = 0
		// Column j's entries in rows between j and k update those rows
		// of row k.
		rows := rowIdx[c0+1 : e.pos]
		vals := L[c0+1 : e.pos]
		vals = vals[:len(rows)]
		for i, r := range rows {
			x[r] -= vals[i] * lkj
		}
		d -= lkj * lkj
		L[e.pos] = lkj
	}
	if !(d > 0) || math.IsInf(d, 1) {
		f.ws[0].pivot = d
		return false
	}
	L[colPtr[k]] = math.Sqrt(d)
	return true
}

// solveSimplicial solves L Lᵀ x = x in place (permuted order).
func (f *Factor) solveSimplicial(x []float64) {
	sp := f.sym.simp
	L := f.values
	n := f.sym.n
	for j := 0; j < n; j++ {
		c0, c1 := sp.colPtr[j], sp.colPtr[j+1]
		xj := x[j] / L[c0]
		x[j] = xj
		rows := sp.rowIdx[c0+1 : c1]
		vals := L[c0+1 : c1]
		vals = vals[:len(rows)]
		for i, r := range rows {
			x[r] -= vals[i] * xj
		}
	}
	for j := n - 1; j >= 0; j-- {
		c0, c1 := sp.colPtr[j], sp.colPtr[j+1]
		sum := x[j]
		rows := sp.rowIdx[c0+1 : c1]
		vals := L[c0+1 : c1]
		vals = vals[:len(rows)]
		for i, r := range rows {
			sum -= vals[i] * x[r]
		}
		x[j] = sum / L[c0]
	}
}
