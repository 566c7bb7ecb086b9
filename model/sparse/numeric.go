package sparse

import (
	"fmt"
	"math"
	"sync"
)

// Factor holds the numeric Cholesky factor L of one Symbolic pattern and
// the scratch space of Factorize and Solve. All memory is allocated by
// Symbolic.NewFactor; Factorize and Solve allocate nothing. A Factor is not
// safe for concurrent use; several Factors of one Symbolic are.
type Factor struct {
	sym    *Symbolic
	values []float64
	link   []int // per supernode: next in the waiting list it is in
	next   []int // per supernode: next row (local index) not yet used
	ws     [2]workspace
	x      []float64 // permuted right-hand side / solution
	ok     bool      // the last Factorize succeeded
	// touched marks the rows (permuted) Refactorize recomputes; false
	// between calls. Allocated by the first Refactorize.
	touched []bool

	// Goroutines to use: Options.Workers, at most GOMAXPROCS.
	workers int
	// runSecond factors part 1 of the plan; built once in NewFactor so that
	// starting it allocates nothing. wg joins it before Factorize returns.
	runSecond func()
	wg        sync.WaitGroup
	diag, off []float64 // the values of the call under way (for runSecond)
}

// workspace is the scratch space of one goroutine of Factorize.
type workspace struct {
	relpos []int     // global row -> local row of the current supernode
	head   []int     // per supernode: first descendant waiting to update it
	tmp    []float64 // dense update block
	fail   int       // first column (permuted) whose pivot failed, or -1
	pivot  float64   // its pivot
}

// Symbolic returns the pattern this Factor belongs to.
func (f *Factor) Symbolic() *Symbolic { return f.sym }

// Factorize computes L Lᵀ = P A Pᵀ numerically with diag[i] = A[i][i] and
// offdiag[k] = value of input entry k. No allocation after the first call.
// A non-positive pivot returns *NotPositiveDefiniteError{Row: original row index}.
//
// The algorithm is the left-looking supernodal Cholesky factorisation (Ng &
// Peyton 1993, "Block sparse Cholesky algorithms on advanced uniprocessor
// computers", SIAM J. Sci. Comput. 14(5):1034-1056; George & Liu 1981,
// §5.5): supernodes are processed in order; each first receives the updates
// of the descendant supernodes whose structure reaches it (found through
// linked lists advanced one target at a time), then its dense diagonal block
// is factored and the block below it solved. Operations run in a fixed
// order, so equal input gives bit-identical output.
//
// When the Symbolic's plan splits the elimination tree into two independent
// parts, the parts are factored one after the other or, with Options.Workers
// = 2, by two goroutines (the second started and joined inside this call),
// and the supernodes above them afterwards. The order of operations depends on the plan only, not on the
// number of goroutines, so results are bit-identical either way.
func (f *Factor) Factorize(diag, offdiag []float64) error {
	s := f.sym
	f.ok = false
	if len(diag) != s.n {
		return fmt.Errorf("sparse: factorize: %d diagonal values for order %d: %w", len(diag), s.n, ErrShape)
	}
	if len(offdiag) != s.nIn {
		return fmt.Errorf("sparse: factorize: %d off-diagonal values for %d pattern entries: %w", len(offdiag), s.nIn, ErrShape)
	}
	if s.simp != nil {
		if c := f.factorSimplicial(diag, offdiag); c >= 0 {
			return &NotPositiveDefiniteError{Row: s.perm[c], Pivot: f.ws[0].pivot}
		}
		f.ok = true
		return nil
	}
	for w := range f.ws {
		ws := &f.ws[w]
		for k := range ws.head {
			ws.head[k] = -1
		}
		ws.fail = -1
	}
	if f.workers > 1 && len(s.plan[1]) > 0 {
		f.diag, f.off = diag, offdiag
		f.wg.Add(1)
		go f.runSecond()
		f.runPart(0, diag, offdiag)
		f.wg.Wait()
		f.diag, f.off = nil, nil
	} else {
		f.runPart(0, diag, offdiag)
		f.runPart(1, diag, offdiag)
	}
	// The first failed pivot in elimination order, as a sequential sweep
	// would find it: a pivot depends on its own subtree only.
	fail, pivot := f.ws[0].fail, f.ws[0].pivot
	if c := f.ws[1].fail; c >= 0 && (fail < 0 || c < fail) {
		fail, pivot = c, f.ws[1].pivot
	}
	if fail < 0 {
		ws := &f.ws[0]
		for _, J := range s.top {
			if c := f.supernode(ws, J, diag, offdiag, f.ws[1].head[J]); c >= 0 {
				fail, pivot = c, ws.pivot
				break
			}
		}
	}
	if fail >= 0 {
		return &NotPositiveDefiniteError{Row: s.perm[fail], Pivot: pivot}
	}
	f.ok = true
	return nil
}

// runPart factors the subtrees of part w of the plan with workspace w,
// stopping at the first failed pivot (recorded in the workspace).
func (f *Factor) runPart(w int, diag, offdiag []float64) {
	ws := &f.ws[w]
	for _, rg := range f.sym.plan[w] {
		for J := rg[0]; J < rg[1]; J++ {
			if c := f.supernode(ws, J, diag, offdiag, -1); c >= 0 {
				ws.fail = c
				return
			}
		}
	}
}

// supernode assembles, updates and factors supernode J with workspace ws:
// the descendants waiting in ws.head[J] (and in the list starting at
// other, from the other workspace, for supernodes above the split) update
// it, then its panel is factored and J is linked to the next supernode its
// structure reaches. It returns the failed column (permuted) or -1.
func (f *Factor) supernode(ws *workspace, J int, diag, offdiag []float64, other int) int {
	s := f.sym
	vals, link, next, relpos, head := f.values, f.link, f.next, ws.relpos, ws.head
	f0, l0 := s.superStart[J], s.superStart[J+1]
	rows := s.rowIdx[s.rowPtr[J]:s.rowPtr[J+1]]
	r := len(rows)
	LJ := vals[s.valPtr[J]:s.valPtr[J+1]]
	// Assemble A's entries of J's columns into the cleared block.
	clear(LJ)
	for t := 0; t < l0-f0; t++ {
		LJ[t*r+t] = diag[s.perm[f0+t]]
	}
	src, dst := s.asmSrc[s.asmPtr[J]:s.asmPtr[J+1]], s.asmDst[s.asmPtr[J]:s.asmPtr[J+1]]
	dst = dst[:len(src)]
	for q, e := range src {
		LJ[dst[q]] += offdiag[e]
	}
	for idx, row := range rows {
		relpos[row] = idx
	}
	for pass, K := 0, head[J]; pass < 2; pass, K = pass+1, other {
		for K != -1 {
			nextK := link[K]
			rowsK := s.rowIdx[s.rowPtr[K]:s.rowPtr[K+1]]
			rK := len(rowsK)
			kK := s.superStart[K+1] - s.superStart[K]
			LK := vals[s.valPtr[K]:s.valPtr[K+1]]
			p := next[K]
			q := p
			for q < rK && rowsK[q] < l0 {
				q++
			}
			f.update(ws, LJ, r, f0, LK, rK, kK, rowsK, p, q)
			next[K] = q
			if q < rK {
				T := s.colSuper[rowsK[q]]
				link[K] = head[T]
				head[T] = K
			}
			K = nextK
		}
	}
	k := l0 - f0
	if c := factorPanel(LJ, r, k); c >= 0 {
		ws.pivot = LJ[c*r+c]
		return f0 + c
	}
	if r > k {
		next[J] = k
		T := s.colSuper[rows[k]]
		link[J] = head[T]
		head[T] = J
	}
	return -1
}

// update subtracts from supernode J (values LJ, r rows, first column f0) the
// contribution of descendant K (values LK, rK rows, kK columns) through its
// rows p..q-1, which lie in J's columns: for each such row c and every row i
// >= c of K, L_J(i, c) -= Σ_t L_K(i,t) L_K(c,t). The product goes to a dense
// scratch block by gemmNT, four target columns at a time from their
// diagonal down, and is then scattered through the relative row positions.
func (f *Factor) update(ws *workspace, LJ []float64, r, f0 int, LK []float64, rK, kK int, rowsK []int, p, q int) {
	relpos := ws.relpos
	m := rK - p
	nq := q - p
	W := ws.tmp[:m*nq]
	clear(W)
	A := LK[p:]
	for j0 := 0; j0 < nq; j0 += 4 {
		nb := min(4, nq-j0)
		gemmNT(m-j0, nb, kK, A[j0:], rK, A[j0:], rK, W[j0*m+j0:], m)
	}
	for c := 0; c < nq; c++ {
		lc := rowsK[p+c] - f0
		col := LJ[lc*r : (lc+1)*r]
		w := W[c*m+c : (c+1)*m]
		rws := rowsK[p+c : rK]
		rws = rws[:len(w)]
		if rws[len(rws)-1]-rws[0] == len(rws)-1 {
			// Consecutive rows land in consecutive places.
			dst := col[relpos[rws[0]]:]
			dst = dst[:len(w)]
			for i, v := range w {
				dst[i] += v
			}
			continue
		}
		for i, v := range w {
			col[relpos[rws[i]]] += v
		}
	}
}

// panelBlock is the column block width of the panel factorisation.
const panelBlock = 16

// factorPanel factors the dense r×k column-major panel L (leading dimension
// r) in place: Cholesky of the k×k diagonal block and the triangular solve of
// the block below it. Blocks of panelBlock columns are factored column by
// column, then the columns right of the block are updated by gemmNT
// (right-looking blocked Cholesky, Golub & Van Loan 2013, §4.2.8). It
// returns the local column of a failed pivot, or -1. The strict upper
// triangle of the diagonal block is scratch.
func factorPanel(L []float64, r, k int) int {
	for t0 := 0; t0 < k; t0 += panelBlock {
		t1 := min(t0+panelBlock, k)
		for t := t0; t < t1; t++ {
			// Left-looking inside the block: column t receives the
			// block columns t0..t-1, then is scaled by its pivot.
			gemmNT(r-t, 1, t-t0, L[t0*r+t:], r, L[t0*r+t:], r, L[t*r+t:], r)
			ct := L[t*r : (t+1)*r]
			d := ct[t]
			if !(d > 0) || math.IsInf(d, 1) {
				return t
			}
			d = math.Sqrt(d)
			ct[t] = d
			inv := 1 / d
			below := ct[t+1:]
			for i := range below {
				below[i] *= inv
			}
		}
		for j0 := t1; j0 < k; j0 += 4 {
			nb := min(4, k-j0)
			gemmNT(r-j0, nb, t1-t0, L[t0*r+j0:], r, L[t0*r+j0:], r, L[j0*r+j0:], r)
		}
	}
	return -1
}

// Solve solves A x = b into dst (dst may alias b). Requires a successful
// Factorize; it panics if there was none or if the lengths are not N, as
// these are programming errors, not bad data.
func (f *Factor) Solve(dst, b []float64) {
	s := f.sym
	if !f.ok {
		panic("sparse: Solve without a successful Factorize")
	}
	if len(dst) != s.n || len(b) != s.n {
		panic(fmt.Sprintf("sparse: Solve: lengths %d and %d for order %d", len(dst), len(b), s.n))
	}
	x := f.x
	for k, o := range s.perm {
		x[k] = b[o]
	}
	if s.simp != nil {
		f.solveSimplicial(x)
		for k, o := range s.perm {
			dst[o] = x[k]
		}
		return
	}
	ns := len(s.superStart) - 1
	vals := f.values
	// Forward substitution L y = P b.
	for J := 0; J < ns; J++ {
		f0, l0 := s.superStart[J], s.superStart[J+1]
		k := l0 - f0
		rows := s.rowIdx[s.rowPtr[J]:s.rowPtr[J+1]]
		r := len(rows)
		LJ := vals[s.valPtr[J]:s.valPtr[J+1]]
		for t := 0; t < k; t++ {
			ct := LJ[t*r : (t+1)*r]
			xt := x[f0+t] / ct[t]
			x[f0+t] = xt
			for i := t + 1; i < k; i++ {
				x[f0+i] -= ct[i] * xt
			}
			ext := ct[k:]
			er := rows[k:]
			er = er[:len(ext)]
			for i, v := range ext {
				x[er[i]] -= v * xt
			}
		}
	}
	// Back substitution Lᵀ z = y.
	for J := ns - 1; J >= 0; J-- {
		f0, l0 := s.superStart[J], s.superStart[J+1]
		k := l0 - f0
		rows := s.rowIdx[s.rowPtr[J]:s.rowPtr[J+1]]
		r := len(rows)
		LJ := vals[s.valPtr[J]:s.valPtr[J+1]]
		for t := k - 1; t >= 0; t-- {
			ct := LJ[t*r : (t+1)*r]
			sum := x[f0+t]
			for i := t + 1; i < k; i++ {
				sum -= ct[i] * x[f0+i]
			}
			ext := ct[k:]
			er := rows[k:]
			er = er[:len(ext)]
			for i, v := range ext {
				sum -= v * x[er[i]]
			}
			x[f0+t] = sum / ct[t]
		}
	}
	for k, o := range s.perm {
		dst[o] = x[k]
	}
}
