package hydraulic

import (
	"math"
	"testing"

	"plumbline/model/network"
)

// checkLoops verifies Kirchhoff's loop rule on every independent loop:
// a spanning tree of the network graph (with all fixed-head nodes tied to
// a virtual ground at their heads) leaves one fundamental loop per
// non-tree link; round each loop the sum of the links' own head losses
// (evaluated from the reported flows by the link laws, not from the
// heads) must vanish, and every path between two sources must lose their
// head difference.
func checkLoops(t *testing.T, s *Solver, sol *Solution, tol float64) {
	t.Helper()
	net := s.net
	nn := len(net.Nodes)
	// head loss of each link from its law at the reported flow
	loss := make([]float64, len(net.Links))
	for k := range net.Links {
		if sol.State[k] != Open {
			loss[k] = math.NaN()
			continue
		}
		h, _, _ := s.lawOpen(k, sol.Flow[k], sol)
		loss[k] = h
	}
	// BFS tree from a virtual root joined to every fixed-head node; the
	// potential of each node along the tree is root head minus losses.
	pot := make([]float64, nn)
	done := make([]bool, nn)
	var q []int
	root := func(i int) {
		if !done[i] {
			pot[i] = sol.Head[i]
			done[i] = true
			q = append(q, i)
		}
	}
	for i := range net.Nodes {
		if net.Nodes[i].IsFixedHead() {
			root(i)
		}
	}
	// The node an active pressure valve holds has a set head: a root too
	// (the loop through the valve closes on its setting).
	for k, l := range net.Links {
		if sol.State[k] == Active && l.Kind == network.Valve {
			switch l.Valve {
			case network.PressureReducing:
				root(l.To)
				near(t, "pressure held by "+l.ID, sol.Pressure[l.To], sol.setting[k], 1e-6)
			case network.PressureSustaining:
				root(l.From)
				near(t, "pressure held by "+l.ID, sol.Pressure[l.From], sol.setting[k], 1e-6)
			}
		}
	}
	adj := make([][]int, nn)
	for k, l := range net.Links {
		if math.IsNaN(loss[k]) {
			continue
		}
		adj[l.From] = append(adj[l.From], k)
		adj[l.To] = append(adj[l.To], k)
	}
	tree := make([]bool, len(net.Links))
	for h := 0; h < len(q); h++ {
		n := q[h]
		for _, k := range adj[n] {
			l := net.Links[k]
			o, d := l.To, -loss[k]
			if o == n {
				o, d = l.From, loss[k]
			}
			if !done[o] {
				done[o] = true
				tree[k] = true
				pot[o] = pot[n] + d
				q = append(q, o)
			}
		}
	}
	loops := 0
	for k, l := range net.Links {
		if tree[k] || math.IsNaN(loss[k]) {
			continue
		}
		if !done[l.From] || !done[l.To] {
			t.Errorf("link %s: not reached from any source by open links", l.ID)
			continue
		}
		// fundamental loop of chord k: potential drop along the tree
		// between its ends must equal its own loss
		loops++
		if r := pot[l.From] - pot[l.To] - loss[k]; math.Abs(r) > tol {
			t.Errorf("loop closed by link %s: head loss sum %.3g m > %g", l.ID, r, tol)
		}
	}
	if loops == 0 {
		t.Errorf("no independent loop checked")
	}
}
