package sparse

import (
	"errors"
	"fmt"
	"runtime"
	"slices"
)

// Ordering selects the fill-reducing ordering computed by Analyze.
type Ordering int

const (
	// MinimumDegree is an approximate minimum degree ordering on the quotient
	// graph (Amestoy, Davis & Duff 1996). It is the zero value and the default
	// because it gave the least fill on every grid-like test graph (see the
	// package manual for the figures).
	MinimumDegree Ordering = iota
	// ReverseCuthillMcKee is the reverse Cuthill-McKee profile ordering with
	// pseudo-peripheral starting nodes (George & Liu 1981, ch. 4). It is
	// mostly useful for comparison: its fill grows like n^1.5 on 2D graphs.
	ReverseCuthillMcKee
	// Natural keeps the given order (before the elimination-tree postorder,
	// which never changes fill).
	Natural
)

// String returns the name of the ordering.
func (o Ordering) String() string {
	switch o {
	case MinimumDegree:
		return "minimum degree"
	case ReverseCuthillMcKee:
		return "reverse Cuthill-McKee"
	case Natural:
		return "natural"
	}
	return fmt.Sprintf("Ordering(%d)", int(o))
}

// Options are the settings of Analyze. The zero value selects the defaults.
type Options struct {
	// Ordering is the fill-reducing ordering; zero means MinimumDegree.
	Ordering Ordering
	// Workers is the number of goroutines Factorize may use: 0 or 1 for
	// one (the default), 2 to run the two independent parts of large
	// factorisations (about 10⁷ flops and more, see the package manual) at
	// the same time when GOMAXPROCS is at least 2. The results do not
	// depend on it. With 2, the Go runtime may now and then allocate a
	// goroutine descriptor when Factorize starts its helper.
	Workers int

	// forceSplit makes Analyze split even small patterns (tests only).
	forceSplit bool
	// method forces the supernodal or the simplicial method (tests and
	// benchmarks only; zero: chosen from the pattern).
	method method
}

// ErrShape reports slices of the wrong length or out-of-range indices given to
// Analyze or Factorize; the returned error wraps it with the place.
var ErrShape = errors.New("sparse: bad shape")

// NotPositiveDefiniteError is returned by Factorize when a pivot of the
// Cholesky factorisation is not positive (or is NaN): the matrix is not
// positive definite, or is so badly conditioned that rounding made it look
// so. Row is the original (unpermuted) row index whose pivot failed, so a
// caller can name the junction; Pivot is the value of the failed pivot (the
// diagonal of the Schur complement at that step).
type NotPositiveDefiniteError struct {
	Row   int
	Pivot float64
}

// Error names the row and the pivot.
func (e *NotPositiveDefiniteError) Error() string {
	return fmt.Sprintf("sparse: matrix not positive definite: pivot %g at row %d", e.Pivot, e.Row)
}

// Symbolic is the result of Analyze: the fill-reducing ordering, the
// elimination tree and the supernodal structure of the Cholesky factor L of
// one sparsity pattern. It is immutable after Analyze and safe to share
// between goroutines; each goroutine needs its own Factor (NewFactor).
type Symbolic struct {
	n     int
	nIn   int   // number of input off-diagonal entries
	perm  []int // perm[k] = original index of the k-th pivot
	iperm []int // iperm[perm[k]] = k
	nnzL  int   // exact nonzeros of L, diagonal included
	// parent is the elimination tree in permuted labels (-1 at roots).
	parent []int

	// Supernodes: columns superStart[s] .. superStart[s+1]-1 (permuted labels).
	superStart []int
	colSuper   []int // column -> supernode
	// Row structure of supernode s: rowIdx[rowPtr[s]:rowPtr[s+1]], ascending;
	// the first entries are the supernode's own columns.
	rowPtr []int
	rowIdx []int
	// Numeric values of supernode s: a dense column-major r×k block with
	// leading dimension r at values[valPtr[s]:valPtr[s+1]].
	valPtr  []int
	maxRows int
	// plan[w] lists the supernode ranges [a, b) of the subtrees factored by
	// goroutine w; top lists the supernodes above them, factored after.
	plan      [2][][2]int
	top       []int
	workers   int
	maxUpdate int // largest dense update block, (r-k)² over supernodes

	// Assembly of supernode s: for q in asmPtr[s]..asmPtr[s+1]-1, input
	// entry asmSrc[q] adds to position asmDst[q] of the block. The diagonal
	// of column c is diag[perm[c]].
	asmPtr []int
	asmSrc []int
	asmDst []int

	// simp, when set, is the structure of the simplicial method, which
	// Factorize and Solve then use instead of the supernodes.
	simp *simplicial
	// flopsPerCol is the factorisation's multiply-adds per column.
	flopsPerCol float64
}

// N returns the order of the matrix.
func (s *Symbolic) N() int { return s.n }

// NNZ returns the number of nonzeros of the Cholesky factor L, diagonal
// included, counted from the column counts (structural nonzeros, without the
// explicit zeros that supernode amalgamation stores).
func (s *Symbolic) NNZ() int { return s.nnzL }

// StoredNNZ returns the number of values a Factor stores for L, including
// the explicit zeros of relaxed supernodes and the unused upper triangles of
// the dense diagonal blocks.
func (s *Symbolic) StoredNNZ() int { return s.valPtr[len(s.valPtr)-1] }

// Supernodes returns the number of supernodes of L.
func (s *Symbolic) Supernodes() int { return len(s.superStart) - 1 }

// Perm returns a copy of the ordering: Perm()[k] is the original index of the
// row and column eliminated k-th, so L Lᵀ = P A Pᵀ with (P A Pᵀ)[k][l] =
// A[perm[k]][perm[l]]. It includes the elimination-tree postorder.
func (s *Symbolic) Perm() []int { return slices.Clone(s.perm) }

// Analyze computes a fill-reducing ordering and the symbolic factorisation of
// the n×n symmetric matrix whose off-diagonal nonzeros are the entries
// (rows[k], cols[k]), k = 0..len(rows)-1, i != j, either triangle; repeated
// pairs are allowed (their values are summed at Factorize). Diagonal entries
// are always present.
//
// The steps: the adjacency graph (duplicates merged); the ordering chosen by
// opts; the elimination tree (Liu 1990) and its postorder; column counts;
// fundamental supernodes relaxed by amalgamation; the row structure of each
// supernode; and the position in L of every input entry, so that Factorize is
// a scatter and a numeric sweep. Bad input returns an error wrapping
// ErrShape that names the entry.
func Analyze(n int, rows, cols []int, opts Options) (*Symbolic, error) {
	if n < 0 {
		return nil, fmt.Errorf("sparse: analyze: order n = %d is negative: %w", n, ErrShape)
	}
	if len(rows) != len(cols) {
		return nil, fmt.Errorf("sparse: analyze: %d row indices but %d column indices: %w", len(rows), len(cols), ErrShape)
	}
	for k := range rows {
		i, j := rows[k], cols[k]
		if i < 0 || i >= n || j < 0 || j >= n {
			return nil, fmt.Errorf("sparse: analyze: entry %d (%d,%d) outside the %d×%d matrix: %w", k, i, j, n, n, ErrShape)
		}
		if i == j {
			return nil, fmt.Errorf("sparse: analyze: entry %d (%d,%d) is on the diagonal; pass diagonal values to Factorize: %w", k, i, j, ErrShape)
		}
	}
	var order []int
	ptr, adj := buildAdjacency(n, rows, cols)
	switch opts.Ordering {
	case MinimumDegree:
		order = amdOrder(n, ptr, adj)
	case ReverseCuthillMcKee:
		order = rcmOrder(n, ptr, adj)
	case Natural:
		order = make([]int, n)
		for i := range order {
			order[i] = i
		}
	default:
		return nil, fmt.Errorf("sparse: analyze: unknown ordering %d", int(opts.Ordering))
	}
	if opts.Workers < 0 || opts.Workers > 2 {
		return nil, fmt.Errorf("sparse: analyze: %d workers, want 0, 1 or 2", opts.Workers)
	}
	s := analyzeOrdered(n, rows, cols, ptr, adj, order, opts.method)
	s.makePlan(opts.Workers, opts.forceSplit)
	return s, nil
}

// NewFactor returns a numeric workspace for this pattern: the values of L and
// the scratch arrays of Factorize and Solve, all allocated here once. A
// Factor is reusable for any number of Factorize calls with new values.
func (s *Symbolic) NewFactor() *Factor {
	ns := len(s.superStart) - 1
	nv := s.valPtr[ns]
	if s.simp != nil {
		nv = s.nnzL
	}
	f := &Factor{
		sym:    s,
		values: make([]float64, nv),
		link:   make([]int, ns),
		next:   make([]int, ns),
		x:      make([]float64, s.n),
	}
	parts := 1
	if len(s.plan[1]) > 0 {
		parts = 2
	}
	for w := 0; w < parts; w++ {
		f.ws[w] = workspace{
			relpos: make([]int, s.n),
			head:   make([]int, ns),
			tmp:    make([]float64, s.maxUpdate),
		}
	}
	if parts == 1 {
		// The second workspace only needs its (empty) waiting lists.
		f.ws[1].head = make([]int, ns)
	}
	f.workers = s.workers
	if p := runtime.GOMAXPROCS(0); f.workers > p {
		f.workers = p
	}
	f.runSecond = func() {
		defer f.wg.Done()
		f.runPart(1, f.diag, f.off)
	}
	return f
}
