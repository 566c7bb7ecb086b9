package sparse

import "math"

// Node states in the quotient graph of the minimum degree ordering.
const (
	stVar      int8 = iota // principal variable, not yet eliminated
	stElem                 // element: an eliminated pivot whose clique is alive
	stDeadElem             // element absorbed into a newer element
	stGone                 // variable merged into a supervariable, mass-eliminated, or postponed (dense)
)

// amdOrder returns an approximate minimum degree ordering of the graph
// (ptr, adj): order[k] is the node eliminated k-th.
//
// The method is the approximate minimum degree algorithm of Amestoy, Davis &
// Duff (1996, SIAM J. Matrix Anal. Appl. 17(4):886-905), written from the
// paper's description:
//   - The elimination is simulated on the quotient graph (George & Liu 1981,
//     ch. 5; George & Liu 1989 SIAM Review 31:1-19): each eliminated pivot p
//     becomes an element whose list Lp holds the variables of its clique, so
//     storage never exceeds that of the original graph.
//   - Elements adjacent to the pivot are absorbed into the new element;
//     elements whose variables all lie in Lp are absorbed too (aggressive
//     absorption).
//   - The external degree of each variable of Lp is bounded from above by
//     d_i = min(n-k, d_i(old) + |Lp\i|, |A_i\i| + |Lp\i| + Σ_e |Le\Lp|),
//     where |Le\Lp| for all elements e touching Lp is found in one sweep.
//   - Variables of Lp with no neighbour outside Lp are eliminated with p (mass
//     elimination); variables with identical adjacency (found by hashing
//     their lists) are merged into supervariables and carry a weight.
//   - Nodes of very high degree (more than 10√n, at least 16) are ordered last,
//     as the paper advises for dense rows.
//
// Ties are broken by the most recently inserted variable of least degree
// (LIFO degree lists), so the result is deterministic.
func amdOrder(n int, ptr, adj []int) []int {
	order := make([]int, 0, n)
	if n == 0 {
		return order
	}
	denseLimit := int(10 * math.Sqrt(float64(n)))
	if denseLimit < 16 {
		denseLimit = 16
	}
	status := make([]int8, n)
	nActive := 0
	for i := 0; i < n; i++ {
		if ptr[i+1]-ptr[i] > denseLimit {
			status[i] = stGone
		} else {
			nActive++
		}
	}
	nnz := ptr[n]
	iwlen := nnz + nnz/2 + 2*n + 16
	iw := make([]int, iwlen)
	var spare []int

	pe := make([]int, n)     // start of the node's list in iw
	ln := make([]int, n)     // length of the list
	elen := make([]int, n)   // variables: number of elements at the front of the list
	nv := make([]int, n)     // weight of a principal supervariable / element
	degree := make([]int, n) // variables: approximate external degree; elements: |Le| weighted
	w := make([]int, n)      // elements: wflg + |Le \ Lp| during one step
	inLp := make([]int, n)   // step stamp: member of the current Lp
	mark := make([]int, n)   // stamp for list comparison
	memNext := make([]int, n)
	memTail := make([]int, n)
	head := make([]int, n+1) // degree lists
	next := make([]int, n)
	prev := make([]int, n)
	hashHead := make([]int, n)
	hashNext := make([]int, n)
	hashOf := make([]int, n)
	for i := range head {
		head[i] = -1
	}
	for i := 0; i < n; i++ {
		hashHead[i] = -1
		memNext[i] = -1
		memTail[i] = i
	}
	insert := func(i, d int) {
		next[i] = head[d]
		prev[i] = -1
		if head[d] != -1 {
			prev[head[d]] = i
		}
		head[d] = i
	}
	remove := func(i int) {
		if prev[i] != -1 {
			next[prev[i]] = next[i]
		} else {
			head[degree[i]] = next[i]
		}
		if next[i] != -1 {
			prev[next[i]] = prev[i]
		}
	}
	emit := func(i int) {
		for x := i; x != -1; x = memNext[x] {
			order = append(order, x)
		}
	}

	pfree := 0
	for i := 0; i < n; i++ {
		if status[i] != stVar {
			continue
		}
		pe[i] = pfree
		for _, j := range adj[ptr[i]:ptr[i+1]] {
			if status[j] == stVar {
				iw[pfree] = j
				pfree++
			}
		}
		ln[i] = pfree - pe[i]
		nv[i] = 1
		degree[i] = ln[i]
		insert(i, degree[i])
	}

	compact := func(need int) {
		if spare == nil {
			spare = make([]int, len(iw))
		}
		q := 0
		for x := 0; x < n; x++ {
			if status[x] == stVar || status[x] == stElem {
				copy(spare[q:], iw[pe[x]:pe[x]+ln[x]])
				pe[x] = q
				q += ln[x]
			}
		}
		iw, spare = spare, iw
		pfree = q
		if pfree+need > len(iw) {
			// Cannot happen (the quotient graph never outgrows the graph),
			// but growing is cheap insurance.
			grown := make([]int, 2*(pfree+need))
			copy(grown, iw[:pfree])
			iw = grown
			spare = make([]int, len(grown))
		}
	}

	nel := 0
	mindeg := 0
	wflg := 1
	stamp := 0
	mstamp := 0
	for nel < nActive {
		// 1. The pivot: a variable of least approximate degree.
		for head[mindeg] == -1 {
			mindeg++
		}
		p := head[mindeg]
		remove(p)
		nvp := nv[p]
		nel += nvp
		emit(p)

		// 2. The new element Lp = (A_p ∪ ⋃_{e∈E_p} L_e) \ p, at the end of iw.
		if pfree+(nActive-nel) > len(iw) {
			compact(nActive - nel)
		}
		stamp++
		pme1 := pfree
		degme := 0
		pp, elenp, lnp := pe[p], elen[p], ln[p]
		addVar := func(i int) {
			if status[i] == stVar && inLp[i] != stamp && i != p {
				inLp[i] = stamp
				degme += nv[i]
				iw[pfree] = i
				pfree++
				remove(i)
			}
		}
		for kk := 0; kk < lnp; kk++ {
			e := iw[pp+kk]
			if kk < elenp {
				if status[e] != stElem {
					continue
				}
				for _, i := range iw[pe[e] : pe[e]+ln[e]] {
					addVar(i)
				}
				status[e] = stDeadElem // absorbed into p
			} else {
				addVar(e)
			}
		}
		status[p] = stElem
		pe[p] = pme1
		ln[p] = pfree - pme1
		elen[p] = 0

		// 3. |Le \ Lp| for every element e touching Lp, kept as w[e]-wflg.
		for _, i := range iw[pme1:pfree] {
			nvi := nv[i]
			for _, e := range iw[pe[i] : pe[i]+elen[i]] {
				if status[e] != stElem {
					continue
				}
				if w[e] >= wflg {
					w[e] -= nvi
				} else {
					w[e] = degree[e] + wflg - nvi
				}
			}
		}

		// 4. Degree update, list pruning, mass elimination and hashing.
		for _, i := range iw[pme1:pfree] {
			start, elenI, lnI := pe[i], elen[i], ln[i]
			dst := start
			deg := 0
			hash := 0
			for _, e := range iw[start : start+elenI] {
				if status[e] != stElem {
					continue
				}
				dext := w[e] - wflg
				if dext > 0 {
					deg += dext
					iw[dst] = e
					dst++
					hash += e
				} else {
					status[e] = stDeadElem // aggressive absorption: Le ⊆ Lp
				}
			}
			newElen := dst - start + 1
			firstVar := dst
			for kk := start + elenI; kk < start+lnI; kk++ {
				j := iw[kk]
				if status[j] != stVar || inLp[j] == stamp {
					continue
				}
				deg += nv[j]
				iw[dst] = j
				dst++
				hash += j
			}
			// Put p at the end of the element part; at least one entry
			// (an absorbed element, or p as a variable) was dropped, so
			// there is room.
			if dst > firstVar {
				iw[dst] = iw[firstVar]
			}
			iw[firstVar] = p
			dst++
			ln[i] = dst - start
			elen[i] = newElen
			if deg == 0 {
				// Mass elimination: i is adjacent to nothing outside Lp.
				status[i] = stGone
				degme -= nv[i]
				nvp += nv[i]
				nel += nv[i]
				emit(i)
				continue
			}
			if deg < degree[i] {
				degree[i] = deg
			}
			h := hash % n
			hashOf[i] = h
			hashNext[i] = hashHead[h]
			hashHead[h] = i
		}

		// 5. Supervariables: variables of Lp with identical lists merge.
		for _, i := range iw[pme1:pfree] {
			if status[i] != stVar {
				continue
			}
			h := hashOf[i]
			if hashHead[h] == -1 {
				continue
			}
			for a := hashHead[h]; a != -1; a = hashNext[a] {
				if status[a] != stVar {
					continue
				}
				mstamp++
				la := iw[pe[a] : pe[a]+ln[a]]
				for _, x := range la {
					mark[x] = mstamp
				}
				for b := hashNext[a]; b != -1; b = hashNext[b] {
					if status[b] != stVar || ln[b] != ln[a] || elen[b] != elen[a] {
						continue
					}
					same := true
					for _, x := range iw[pe[b] : pe[b]+ln[b]] {
						if mark[x] != mstamp {
							same = false
							break
						}
					}
					if !same {
						continue
					}
					nv[a] += nv[b]
					nv[b] = 0
					status[b] = stGone
					if degree[b] < degree[a] {
						degree[a] = degree[b]
					}
					memNext[memTail[a]] = b
					memTail[a] = memTail[b]
				}
			}
			hashHead[h] = -1
		}

		// 6. Final degrees; Lp keeps only its principal variables.
		dst := pme1
		remaining := nActive - nel
		for kk := pme1; kk < pfree; kk++ {
			i := iw[kk]
			if status[i] != stVar {
				continue
			}
			iw[dst] = i
			dst++
			d := degree[i] + degme - nv[i]
			if lim := remaining - nv[i]; d > lim {
				d = lim
			}
			if d < 0 {
				d = 0
			}
			degree[i] = d
			insert(i, d)
			if d < mindeg {
				mindeg = d
			}
		}
		ln[p] = dst - pme1
		pfree = dst
		nv[p] = nvp
		degree[p] = degme
		wflg += n + 1
	}
	for i := 0; i < n; i++ {
		if ptr[i+1]-ptr[i] > denseLimit {
			order = append(order, i)
		}
	}
	return order
}
