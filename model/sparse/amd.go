package sparse

import (
	"cmp"
	"math"
	"slices"
)

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
	if n >= math.MaxInt32/4 || ptr[n] >= math.MaxInt32/4 {
		// 32-bit indices below; a network this large is out of scope.
		return rcmOrder(n, ptr, adj)
	}
	denseLimit := int(10 * math.Sqrt(float64(n)))
	if denseLimit < 16 {
		denseLimit = 16
	}
	// Per-node data in one record, so that visiting a node touches one or
	// two cache lines instead of one per array.
	type node struct {
		pe, ln int32 // the node's list in iw
		elen   int32 // variables: number of elements at the front of the list
		nv     int32 // weight of a principal supervariable / element
		degree int32 // variables: approximate external degree; elements: |Le| weighted
		w      int32 // elements: wflg + |Le \ Lp| during one step
		next   int32 // degree list
		prev   int32
		inLp   int32 // step stamp: member of the current Lp
		status int8
	}
	nd := make([]node, n)
	nActive := 0
	for i := 0; i < n; i++ {
		if ptr[i+1]-ptr[i] > denseLimit {
			nd[i].status = stGone
		} else {
			nActive++
		}
	}
	nnz := ptr[n]
	iw := make([]int32, nnz+nnz/2+2*n+16)
	var spare []int32

	mark := make([]int32, n) // stamp for list comparison
	memNext := make([]int32, n)
	memTail := make([]int32, n)
	head := make([]int32, n+1) // degree lists
	type candidate struct {
		hash uint32
		pos  int32
		i    int32
	}
	cand := make([]candidate, 0, 64)
	for i := range head {
		head[i] = -1
	}
	for i := 0; i < n; i++ {
		memNext[i] = -1
		memTail[i] = int32(i)
	}
	insert := func(i int32, d int32) {
		x := &nd[i]
		x.next = head[d]
		x.prev = -1
		if head[d] != -1 {
			nd[head[d]].prev = i
		}
		head[d] = i
	}
	remove := func(i int32) {
		x := &nd[i]
		if x.prev != -1 {
			nd[x.prev].next = x.next
		} else {
			head[x.degree] = x.next
		}
		if x.next != -1 {
			nd[x.next].prev = x.prev
		}
	}
	emit := func(i int32) {
		for x := i; x != -1; x = memNext[x] {
			order = append(order, int(x))
		}
	}

	pfree := int32(0)
	for i := 0; i < n; i++ {
		x := &nd[i]
		if x.status != stVar {
			continue
		}
		x.pe = pfree
		for _, j := range adj[ptr[i]:ptr[i+1]] {
			if nd[j].status == stVar {
				iw[pfree] = int32(j)
				pfree++
			}
		}
		x.ln = pfree - x.pe
		x.nv = 1
		x.degree = x.ln
		insert(int32(i), x.degree)
	}

	compact := func(need int32) {
		if spare == nil {
			spare = make([]int32, len(iw))
		}
		q := int32(0)
		for i := range nd {
			x := &nd[i]
			if x.status == stVar || x.status == stElem {
				copy(spare[q:], iw[x.pe:x.pe+x.ln])
				x.pe = q
				q += x.ln
			}
		}
		iw, spare = spare, iw
		pfree = q
		if int(pfree+need) > len(iw) {
			// Cannot happen (the quotient graph never outgrows the graph),
			// but growing is cheap insurance.
			grown := make([]int32, 2*(pfree+need))
			copy(grown, iw[:pfree])
			iw = grown
			spare = make([]int32, len(grown))
		}
	}

	nel := int32(0)
	nAct := int32(nActive)
	mindeg := int32(0)
	wflg := int32(1)
	stamp := int32(0)
	mstamp := int32(0)
	for nel < nAct {
		// 1. The pivot: a variable of least approximate degree.
		for head[mindeg] == -1 {
			mindeg++
		}
		p := head[mindeg]
		remove(p)
		np := &nd[p]
		nvp := np.nv
		nel += nvp
		emit(p)

		// 2. The new element Lp = (A_p ∪ ⋃_{e∈E_p} L_e) \ p, at the end of iw.
		if int(pfree+(nAct-nel)) > len(iw) {
			compact(nAct - nel)
		}
		stamp++
		pme1 := pfree
		degme := int32(0)
		pp, elenp, lnp := np.pe, np.elen, np.ln
		for kk := int32(0); kk < lnp; kk++ {
			e := iw[pp+kk]
			if kk < elenp {
				ne := &nd[e]
				if ne.status != stElem {
					continue
				}
				for _, i := range iw[ne.pe : ne.pe+ne.ln] {
					x := &nd[i]
					if x.status == stVar && x.inLp != stamp && i != p {
						x.inLp = stamp
						degme += x.nv
						iw[pfree] = i
						pfree++
						remove(i)
					}
				}
				ne.status = stDeadElem // absorbed into p
			} else {
				x := &nd[e]
				if x.status == stVar && x.inLp != stamp && e != p {
					x.inLp = stamp
					degme += x.nv
					iw[pfree] = e
					pfree++
					remove(e)
				}
			}
		}
		np.status = stElem
		np.pe = pme1
		np.ln = pfree - pme1
		np.elen = 0

		// 3. |Le \ Lp| for every element e touching Lp, kept as w-wflg.
		maxLe := int32(0)
		for _, i := range iw[pme1:pfree] {
			x := &nd[i]
			nvi := x.nv
			for _, e := range iw[x.pe : x.pe+x.elen] {
				ne := &nd[e]
				if ne.status != stElem {
					continue
				}
				if ne.w >= wflg {
					ne.w -= nvi
				} else {
					ne.w = ne.degree + wflg - nvi
					if ne.degree > maxLe {
						maxLe = ne.degree
					}
				}
			}
		}

		// 4. Degree update, list pruning, mass elimination and hashing.
		for _, i := range iw[pme1:pfree] {
			x := &nd[i]
			start, elenI, lnI := x.pe, x.elen, x.ln
			dst := start
			deg := int32(0)
			hash := uint32(0)
			for _, e := range iw[start : start+elenI] {
				ne := &nd[e]
				if ne.status != stElem {
					continue
				}
				dext := ne.w - wflg
				if dext > 0 {
					deg += dext
					iw[dst] = e
					dst++
					hash += uint32(e)
				} else {
					ne.status = stDeadElem // aggressive absorption: Le ⊆ Lp
				}
			}
			newElen := dst - start + 1
			firstVar := dst
			for kk := start + elenI; kk < start+lnI; kk++ {
				j := iw[kk]
				nj := &nd[j]
				if nj.status != stVar || nj.inLp == stamp {
					continue
				}
				deg += nj.nv
				iw[dst] = j
				dst++
				hash += uint32(j)
			}
			// Put p at the end of the element part; at least one entry
			// (an absorbed element, or p as a variable) was dropped, so
			// there is room.
			if dst > firstVar {
				iw[dst] = iw[firstVar]
			}
			iw[firstVar] = p
			dst++
			x.ln = dst - start
			x.elen = newElen
			if deg == 0 {
				// Mass elimination: i is adjacent to nothing outside Lp.
				x.status = stGone
				degme -= x.nv
				nvp += x.nv
				nel += x.nv
				emit(i)
				continue
			}
			if deg < x.degree {
				x.degree = deg
			}
			cand = append(cand, candidate{hash: hash, pos: int32(len(cand)), i: i})
		}

		// 5. Supervariables: variables of Lp with identical lists merge.
		// Candidates are sorted by the hash of their lists (ties in Lp
		// order) and compared within runs of equal hash.
		if len(cand) > 1 {
			slices.SortFunc(cand, func(a, b candidate) int {
				if a.hash != b.hash {
					return cmp.Compare(a.hash, b.hash)
				}
				return cmp.Compare(a.pos, b.pos)
			})
		}
		for r0 := 0; r0 < len(cand); {
			r1 := r0 + 1
			for r1 < len(cand) && cand[r1].hash == cand[r0].hash {
				r1++
			}
			for ai := r0; ai < r1-1; ai++ {
				a := cand[ai].i
				na := &nd[a]
				if na.status != stVar {
					continue
				}
				mstamp++
				for _, v := range iw[na.pe : na.pe+na.ln] {
					mark[v] = mstamp
				}
				for bi := ai + 1; bi < r1; bi++ {
					b := cand[bi].i
					nb := &nd[b]
					if nb.status != stVar || nb.ln != na.ln || nb.elen != na.elen {
						continue
					}
					same := true
					for _, v := range iw[nb.pe : nb.pe+nb.ln] {
						if mark[v] != mstamp {
							same = false
							break
						}
					}
					if !same {
						continue
					}
					na.nv += nb.nv
					nb.nv = 0
					nb.status = stGone
					if nb.degree < na.degree {
						na.degree = nb.degree
					}
					memNext[memTail[a]] = b
					memTail[a] = memTail[b]
				}
			}
			r0 = r1
		}
		cand = cand[:0]

		// 6. Final degrees; Lp keeps only its principal variables.
		dst := pme1
		remaining := nAct - nel
		for kk := pme1; kk < pfree; kk++ {
			i := iw[kk]
			x := &nd[i]
			if x.status != stVar {
				continue
			}
			iw[dst] = i
			dst++
			d := x.degree + degme - x.nv
			if lim := remaining - x.nv; d > lim {
				d = lim
			}
			if d < 0 {
				d = 0
			}
			x.degree = d
			insert(i, d)
			if d < mindeg {
				mindeg = d
			}
		}
		np.ln = dst - pme1
		pfree = dst
		np.nv = nvp
		np.degree = degme
		// Every w set in this step is below wflg+maxLe+1; restart the
		// stamps before they could overflow.
		if wflg > math.MaxInt32-2*int32(n)-2 {
			for i := range nd {
				nd[i].w = 0
			}
			wflg = 1
		} else {
			wflg += maxLe + 1
		}
	}
	for i := 0; i < n; i++ {
		if ptr[i+1]-ptr[i] > denseLimit {
			order = append(order, i)
		}
	}
	return order
}
