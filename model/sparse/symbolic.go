package sparse

import (
	"slices"
	"sort"
)

// analyzeOrdered does the symbolic work of Analyze for a given fill-reducing
// order: postorder, column counts, supernodes, row structure and the map of
// the input entries into the storage of L.
func analyzeOrdered(n int, rows, cols []int, ptr, adj, order []int, m method) *Symbolic {
	// Postorder the elimination tree: same fill, contiguous subtrees.
	iperm := invert(order)
	pptr, padj := permutedAdjacency(n, ptr, adj, order, iperm)
	parent := etree(n, pptr, padj)
	post := postorder(parent)
	perm := make([]int, n)
	for k, v := range post {
		perm[k] = order[v]
	}
	parent = relabelTree(parent, post)
	iperm = invert(perm)
	pptr, padj = permutedAdjacency(n, ptr, adj, perm, iperm)
	counts := columnCounts(n, pptr, padj, parent)

	// Relaxed supernodes; their columns become contiguous in a new
	// topological order, which keeps the elimination tree and the counts.
	q, sizes := amalgamate(n, parent, counts)
	perm2 := make([]int, n)
	counts2 := make([]int, n)
	for k, v := range q {
		perm2[k] = perm[v]
		counts2[k] = counts[v]
	}
	perm, counts = perm2, counts2
	parent = relabelTree(parent, q)
	iperm = invert(perm)
	pptr, padj = permutedAdjacency(n, ptr, adj, perm, iperm)
	nnzL := 0
	for _, c := range counts {
		nnzL += c
	}

	s := &Symbolic{n: n, nIn: len(rows), perm: perm, iperm: iperm, nnzL: nnzL, parent: parent}
	ns := len(sizes)
	s.superStart = make([]int, ns+1)
	s.colSuper = make([]int, n)
	for k, sz := range sizes {
		s.superStart[k+1] = s.superStart[k] + sz
		for c := s.superStart[k]; c < s.superStart[k+1]; c++ {
			s.colSuper[c] = k
		}
	}
	s.superStructure(pptr, padj)

	// Entry map: every input entry goes to the lower triangle, into the
	// block of the supernode of its column; the entries are grouped by
	// supernode so that Factorize assembles each block just before use.
	ns = len(s.superStart) - 1
	s.asmPtr = make([]int, ns+1)
	sn := make([]int, len(rows))
	pos := make([]int, len(rows))
	for e := range rows {
		a, b := iperm[rows[e]], iperm[cols[e]]
		if a < b {
			a, b = b, a
		}
		sn[e] = s.colSuper[b]
		pos[e] = s.position(a, b) - s.valPtr[sn[e]]
		s.asmPtr[sn[e]+1]++
	}
	for k := 0; k < ns; k++ {
		s.asmPtr[k+1] += s.asmPtr[k]
	}
	s.asmSrc = make([]int, len(rows))
	s.asmDst = make([]int, len(rows))
	fill := slices.Clone(s.asmPtr[:ns])
	for e := range rows {
		q := fill[sn[e]]
		s.asmSrc[q] = e
		s.asmDst[q] = pos[e]
		fill[sn[e]]++
	}
	s.flopsPerCol = flopsPerColumn(counts)
	if simplicialFits(nnzL, len(rows)) && (m == methodSimplicial || m == methodAuto && s.flopsPerCol <= simplicialMaxFlopsPerColumn) {
		s.simp = newSimplicial(n, pptr, padj, parent, rows, cols, iperm, counts)
	}
	return s
}

// position returns the index in the values of L of entry (row, col),
// row >= col, permuted labels; the entry must be in the structure.
func (s *Symbolic) position(row, col int) int {
	sn := s.colSuper[col]
	f, l := s.superStart[sn], s.superStart[sn+1]
	rs := s.rowIdx[s.rowPtr[sn]:s.rowPtr[sn+1]]
	r := len(rs)
	var local int
	if row < l {
		local = row - f
	} else {
		ext := rs[l-f:]
		j := sort.SearchInts(ext, row)
		if j == len(ext) || ext[j] != row {
			panic("sparse: internal error: entry outside the symbolic structure")
		}
		local = l - f + j
	}
	return s.valPtr[sn] + (col-f)*r + local
}

// etree returns the elimination tree of the pattern (pptr, padj) in its own
// labels: parent[j] is the parent of column j, -1 at a root. The algorithm
// is Liu's, with path compression through an ancestor array (Liu 1990, "The
// role of elimination trees in sparse factorization", SIAM J. Matrix Anal.
// Appl. 11(1):134-172, §3).
func etree(n int, pptr, padj []int) []int {
	parent := make([]int, n)
	anc := make([]int, n)
	for k := 0; k < n; k++ {
		parent[k] = -1
		anc[k] = -1
		for _, i := range padj[pptr[k]:pptr[k+1]] {
			for i != -1 && i < k {
				nx := anc[i]
				anc[i] = k
				if nx == -1 {
					parent[i] = k
				}
				i = nx
			}
		}
	}
	return parent
}

// relabelTree returns the tree parent in new labels, where new node k is old
// node q[k].
func relabelTree(parent, q []int) []int {
	iq := invert(q)
	out := make([]int, len(parent))
	for k, v := range q {
		if p := parent[v]; p != -1 {
			out[k] = iq[p]
		} else {
			out[k] = -1
		}
	}
	return out
}

// postorder returns a postorder of the forest parent: post[k] is the node
// numbered k. Children are visited in increasing label order, so a tree that
// is already postordered maps to itself.
func postorder(parent []int) []int {
	n := len(parent)
	head := make([]int, n)
	next := make([]int, n)
	for i := range head {
		head[i] = -1
	}
	for j := n - 1; j >= 0; j-- {
		if p := parent[j]; p != -1 {
			next[j] = head[p]
			head[p] = j
		}
	}
	post := make([]int, 0, n)
	stack := make([]int, 0, 64)
	for r := 0; r < n; r++ {
		if parent[r] != -1 {
			continue
		}
		stack = append(stack, r)
		for len(stack) > 0 {
			top := stack[len(stack)-1]
			if c := head[top]; c != -1 {
				head[top] = next[c]
				stack = append(stack, c)
			} else {
				stack = stack[:len(stack)-1]
				post = append(post, top)
			}
		}
	}
	return post
}

// columnCounts returns the number of nonzeros in each column of L, diagonal
// included, by walking the row subtrees of the elimination tree: row i of L
// has a nonzero in column j exactly when j lies on a tree path from some k
// with a(i,k) != 0, k < i, up to i (Liu 1990, §5; the row-subtree
// characterisation also used by Gilbert, Ng & Peyton 1994, SIAM J. Matrix
// Anal. Appl. 15(4):1075-1091). The cost is O(nnz(L)).
func columnCounts(n int, pptr, padj, parent []int) []int {
	counts := make([]int, n)
	mark := make([]int, n)
	for i := 0; i < n; i++ {
		counts[i] = 1
		mark[i] = i
		for _, k := range padj[pptr[i]:pptr[i+1]] {
			for x := k; x < i && mark[x] != i; x = parent[x] {
				mark[x] = i
				counts[x]++
			}
		}
	}
	return counts
}

// relaxOK tells whether a merged supernode of k columns with z explicit
// zeros among its stored entries is acceptable: up to 4 columns with at
// most 80 % zeros, 16 with 30 %, 48 with 10 %, any size with 4 %. These are
// values of common practice chosen by measurement (see the benchmarks), not
// from a source.
func relaxOK(k, z, stored int) bool {
	frac := float64(z) / float64(stored)
	switch {
	case z == 0:
		return true
	case k <= 4:
		return frac <= 0.8
	case k <= 16:
		return frac <= 0.3
	case k <= 48:
		return frac <= 0.1
	}
	return frac <= 0.04
}

// amalgamate finds the fundamental supernodes of the postordered elimination
// tree (Liu, Ng & Peyton 1993, "On finding supernodes for sparse matrix
// computations", SIAM J. Matrix Anal. Appl. 14(1):242-252: column j+1 joins
// j's supernode when it is j's parent, its only child, and count(j) =
// count(j+1)+1) and merges children into parents when few zeros are added
// (relaxed supernodes, Ashcraft & Grimes 1989). It returns a new topological
// order q of the columns (q[k] = old label of new column k) in which every
// supernode is contiguous, and the sizes of the supernodes in that order.
func amalgamate(n int, parent, counts []int) (q []int, sizes []int) {
	if n == 0 {
		return nil, nil
	}
	nchild := make([]int, n)
	for _, p := range parent {
		if p != -1 {
			nchild[p]++
		}
	}
	snode := make([]int, n)
	var first []int
	for j := 0; j < n; j++ {
		if j > 0 && parent[j-1] == j && counts[j-1] == counts[j]+1 && nchild[j] == 1 {
			snode[j] = snode[j-1]
			continue
		}
		snode[j] = len(first)
		first = append(first, j)
	}
	ns := len(first)
	ncols := make([]int, ns)
	ext := make([]int, ns)
	trueNZ := make([]int, ns)
	sparent := make([]int, ns)
	for s := 0; s < ns; s++ {
		end := n
		if s+1 < ns {
			end = first[s+1]
		}
		ncols[s] = end - first[s]
		ext[s] = counts[first[s]] - ncols[s]
		for j := first[s]; j < end; j++ {
			trueNZ[s] += counts[j]
		}
		if p := parent[end-1]; p != -1 {
			sparent[s] = snode[p]
		} else {
			sparent[s] = -1
		}
	}
	// Children lists of the supernodal tree, ascending.
	chead := make([]int, ns)
	cnext := make([]int, ns)
	for s := range chead {
		chead[s] = -1
	}
	for s := ns - 1; s >= 0; s-- {
		if p := sparent[s]; p != -1 {
			cnext[s] = chead[p]
			chead[p] = s
		}
	}
	merged := make([]bool, ns)
	for s := 0; s < ns; s++ {
		for c := chead[s]; c != -1; c = cnext[c] {
			k := ncols[s] + ncols[c]
			r := k + ext[s]
			stored := k*r - k*(k-1)/2
			z := stored - trueNZ[s] - trueNZ[c]
			if relaxOK(k, z, stored) {
				merged[c] = true
				ncols[s] = k
				trueNZ[s] += trueNZ[c]
			}
		}
	}
	// Group of each supernode: the top supernode it was merged into.
	top := make([]int, ns)
	for s := ns - 1; s >= 0; s-- {
		if merged[s] {
			top[s] = top[sparent[s]]
		} else {
			top[s] = s
		}
	}
	// Columns of each group, ascending (counting sort by group).
	gptr := make([]int, ns+1)
	for j := 0; j < n; j++ {
		gptr[top[snode[j]]+1]++
	}
	for s := 0; s < ns; s++ {
		gptr[s+1] += gptr[s]
	}
	gcols := make([]int, n)
	fill := slices.Clone(gptr[:ns])
	for j := 0; j < n; j++ {
		g := top[snode[j]]
		gcols[fill[g]] = j
		fill[g]++
	}
	// Postorder of the group tree.
	gparent := make([]int, ns)
	for s := 0; s < ns; s++ {
		gparent[s] = -2 // not a group
		if top[s] == s {
			if p := sparent[s]; p != -1 {
				gparent[s] = top[p]
			} else {
				gparent[s] = -1
			}
		}
	}
	ghead := make([]int, ns)
	gnext := make([]int, ns)
	for s := range ghead {
		ghead[s] = -1
	}
	for s := ns - 1; s >= 0; s-- {
		if p := gparent[s]; p >= 0 {
			gnext[s] = ghead[p]
			ghead[p] = s
		}
	}
	q = make([]int, 0, n)
	stack := make([]int, 0, 64)
	for r := 0; r < ns; r++ {
		if gparent[r] != -1 {
			continue
		}
		stack = append(stack, r)
		for len(stack) > 0 {
			t := stack[len(stack)-1]
			if c := ghead[t]; c != -1 {
				ghead[t] = gnext[c]
				stack = append(stack, c)
			} else {
				stack = stack[:len(stack)-1]
				q = append(q, gcols[gptr[t]:gptr[t+1]]...)
				sizes = append(sizes, gptr[t+1]-gptr[t])
			}
		}
	}
	return q, sizes
}

// superStructure computes the row structure of every supernode: its own
// columns, then the union of the rows below it of its columns in A and of
// the structures of its child supernodes (George & Liu 1981, §5.4.3;
// Liu 1990, §5), and lays out the dense value blocks.
func (s *Symbolic) superStructure(pptr, padj []int) {
	ns := len(s.superStart) - 1
	n := s.n
	sparent := make([]int, ns)
	chead := make([]int, ns)
	cnext := make([]int, ns)
	for k := range chead {
		chead[k] = -1
	}
	for k := 0; k < ns; k++ {
		last := s.superStart[k+1] - 1
		if p := s.parent[last]; p != -1 {
			sparent[k] = s.colSuper[p]
		} else {
			sparent[k] = -1
		}
	}
	for k := ns - 1; k >= 0; k-- {
		if p := sparent[k]; p != -1 {
			cnext[k] = chead[p]
			chead[p] = k
		}
	}
	mark := make([]int, n)
	for i := range mark {
		mark[i] = -1
	}
	s.rowPtr = make([]int, ns+1)
	s.valPtr = make([]int, ns+1)
	rowIdx := make([]int, 0, s.nnzL/2+n)
	for k := 0; k < ns; k++ {
		f, l := s.superStart[k], s.superStart[k+1]
		for c := f; c < l; c++ {
			rowIdx = append(rowIdx, c)
			mark[c] = k
		}
		extStart := len(rowIdx)
		for c := f; c < l; c++ {
			for _, i := range padj[pptr[c]:pptr[c+1]] {
				if i >= l && mark[i] != k {
					mark[i] = k
					rowIdx = append(rowIdx, i)
				}
			}
		}
		for ch := chead[k]; ch != -1; ch = cnext[ch] {
			cf, cl := s.superStart[ch], s.superStart[ch+1]
			for _, i := range rowIdx[s.rowPtr[ch]+(cl-cf) : s.rowPtr[ch+1]] {
				if i >= l && mark[i] != k {
					mark[i] = k
					rowIdx = append(rowIdx, i)
				}
			}
		}
		slices.Sort(rowIdx[extStart:])
		s.rowPtr[k+1] = len(rowIdx)
		r := s.rowPtr[k+1] - s.rowPtr[k]
		if r > s.maxRows {
			s.maxRows = r
		}
		if e := (r - (l - f)) * (r - (l - f)); e > s.maxUpdate {
			s.maxUpdate = e
		}
		s.valPtr[k+1] = s.valPtr[k] + r*(l-f)
	}
	s.rowIdx = rowIdx
}
