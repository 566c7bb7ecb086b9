package sparse

import (
	"cmp"
	"slices"
)

// planMinWork is the estimated work (multiply-adds) below which Analyze
// does not split the factorisation into two parts: starting and joining a
// goroutine costs microseconds, a split tree costs some locality;
// planMinGain is the least estimated speed-up worth a split. Values of
// common practice chosen by measurement, not from a source.
const (
	planMinWork = 1e7
	planMinGain = 1.25
)

// makePlan splits the supernodal elimination tree into two sets of
// disjoint subtrees of about equal work and the supernodes above them
// (subtree-to-processor mapping, Geist & Ng 1989, "Task scheduling for
// parallel sparse Cholesky factorization", Int. J. Parallel Programming
// 18(4):291-314): the largest subtree is split at its root until a greedy
// two-way assignment of the subtrees is balanced within 5 %. Subtrees of
// different parts share no supernode and update none of each other's, so
// the two parts can be factored at the same time. With force (tests) any
// pattern of two or more supernodes is split. The plan depends on the
// pattern only, so results do not depend on how many goroutines run it.
func (s *Symbolic) makePlan(workers int, force bool) {
	ns := len(s.superStart) - 1
	s.plan = [2][][2]int{{{0, ns}}, nil}
	s.top = nil
	s.workers = max(workers, 1)
	if ns < 2 {
		return
	}
	sparent := make([]int, ns)
	work := make([]float64, ns) // subtree work
	first := make([]int, ns)    // first supernode of the subtree
	total := 0.0
	for k := 0; k < ns; k++ {
		f, l := s.superStart[k], s.superStart[k+1]
		r := float64(s.rowPtr[k+1] - s.rowPtr[k])
		for t := 0; t < l-f; t++ {
			work[k] += (r - float64(t)) * (r - float64(t))
		}
		total += work[k]
		first[k] = k
		sparent[k] = -1
		if p := s.parent[l-1]; p != -1 {
			sparent[k] = s.colSuper[p]
		}
	}
	if total < planMinWork && !force {
		return
	}
	own := make([]float64, ns)
	copy(own, work)
	chead := make([]int, ns)
	cnext := make([]int, ns)
	for k := range chead {
		chead[k] = -1
	}
	for k := 0; k < ns; k++ {
		if p := sparent[k]; p != -1 {
			work[p] += work[k]
			first[p] = min(first[p], first[k])
		}
	}
	for k := ns - 1; k >= 0; k-- {
		if p := sparent[k]; p != -1 {
			cnext[k] = chead[p]
			chead[p] = k
		}
	}
	var cand, top []int
	for k := 0; k < ns; k++ {
		if sparent[k] == -1 {
			cand = append(cand, k)
		}
	}
	topWork := 0.0
	var bins [2][]int
	for iter := 0; iter < 1000; iter++ {
		slices.SortFunc(cand, func(a, b int) int {
			if c := cmp.Compare(work[b], work[a]); c != 0 {
				return c
			}
			return cmp.Compare(a, b)
		})
		bins = [2][]int{}
		load := [2]float64{}
		for _, c := range cand {
			w := 0
			if load[1] < load[0] {
				w = 1
			}
			bins[w] = append(bins[w], c)
			load[w] += work[c]
		}
		if sum := load[0] + load[1]; sum > 0 && max(load[0], load[1])-min(load[0], load[1]) <= 0.05*sum {
			break
		}
		c := cand[0]
		if chead[c] == -1 || topWork+own[c] > 0.5*total {
			break
		}
		cand = cand[1:]
		top = append(top, c)
		topWork += own[c]
		for ch := chead[c]; ch != -1; ch = cnext[ch] {
			cand = append(cand, ch)
		}
	}
	load := [2]float64{}
	for w := range bins {
		for _, c := range bins[w] {
			load[w] += work[c]
		}
	}
	// Keep the split only if it promises a real gain.
	if len(bins[1]) == 0 || (!force && total/(topWork+max(load[0], load[1])) < planMinGain) {
		return
	}
	for w := range bins {
		var rg [][2]int
		for _, c := range bins[w] {
			rg = append(rg, [2]int{first[c], c + 1})
		}
		slices.SortFunc(rg, func(a, b [2]int) int { return cmp.Compare(a[0], b[0]) })
		s.plan[w] = rg
	}
	slices.Sort(top)
	s.top = top
}
