package detect

import (
	"plumbline/model/hydraulic"
	"plumbline/model/network"
)

// A blockage on a pipe that is the only way into a part of the network
// with no reservoir or tank of its own (a branch main and everything
// beyond it) moves no water: the demands beyond it fix its flow and every
// flow beyond it (continuity), and the flows on the other side do not
// change either. All it does is lower every head beyond it by the extra
// head loss, (φ−1)·h(Q) for a resistance factor φ, where h(Q) is the
// part of its head loss that the factor scales. That is exactly linear in
// φ, so the change at a logger is (φ−1) times its signature d head / d ln φ
// at φ = 1 (hydraulic.Sensitivity.Resistance), with no solve. It holds
// while nothing beyond the pipe responds to heads alone: no leak (its
// outflow follows the pressure) and no pressure-reducing or -sustaining
// valve (it holds a head, not a head difference). Where it holds, the
// open-fraction fit of such a candidate (fitOpenFraction) takes its
// samples and its check from the signature instead of six full solves,
// which agree with it to the solver's tolerance (TestBridgeResponse).

// linkGraph is the network's node-link incidence, made once per
// Detector, with the scratch of a breadth-first search over it.
type linkGraph struct {
	ptr, link []int   // links at node i: link[ptr[i]:ptr[i+1]]
	mark      []int32 // search number that last reached each node
	search    int32
	queue     []int
}

func (d *Detector) linkGraph() *linkGraph {
	g := &d.graph
	if g.ptr != nil {
		return g
	}
	nn := len(d.net.Nodes)
	g.ptr = make([]int, nn+1)
	for _, lk := range d.net.Links {
		g.ptr[lk.From+1]++
		g.ptr[lk.To+1]++
	}
	for i := 0; i < nn; i++ {
		g.ptr[i+1] += g.ptr[i]
	}
	g.link = make([]int, g.ptr[nn])
	fill := append([]int(nil), g.ptr[:nn]...)
	for k, lk := range d.net.Links {
		g.link[fill[lk.From]] = k
		fill[lk.From]++
		g.link[fill[lk.To]] = k
		fill[lk.To]++
	}
	g.mark = make([]int32, nn)
	return g
}

// passiveBridge reports whether link l of the solution ref is such a pipe
// (see above): open, the only link not closed between a part without a
// fixed-head node and the rest, and that part without leaks and pressure
// valves. Links shut by the solver (check valves, pumps against their
// head) count as connections, since a change of heads may open them.
func (d *Detector) passiveBridge(l int, ref *hydraulic.Solution) bool {
	lk := &d.net.Links[l]
	if lk.Kind != network.Pipe || ref.State[l] != hydraulic.Open || lk.From == lk.To {
		return false
	}
	g := d.linkGraph()
	for _, ends := range [2][2]int{{lk.To, lk.From}, {lk.From, lk.To}} {
		loop, fixed, passive := g.side(d, ref, l, ends[0], ends[1])
		if loop {
			return false
		}
		if !fixed {
			return passive
		}
	}
	return false
}

// side searches from node start over links not closed in ref, without
// crossing link l, and reports whether it reached node other (l is then
// in a loop), whether it met a fixed-head node (it then stops), and
// whether the part it searched is free of leaks and pressure valves.
func (g *linkGraph) side(d *Detector, ref *hydraulic.Solution, l, start, other int) (loop, fixed, passive bool) {
	g.search++
	if g.search == 0 { // wrapped: forget all marks
		clear(g.mark)
		g.search = 1
	}
	g.mark[start] = g.search
	q := append(g.queue[:0], start)
	passive = true
	for h := 0; h < len(q); h++ {
		i := q[h]
		n := &d.net.Nodes[i]
		if n.IsFixedHead() {
			g.queue = q
			return false, true, passive
		}
		if n.LeakCoeff != 0 {
			passive = false
		}
		for _, k := range g.link[g.ptr[i]:g.ptr[i+1]] {
			if k == l || ref.State[k] == hydraulic.Closed {
				continue
			}
			lk := &d.net.Links[k]
			if lk.Kind == network.Valve && (lk.Valve == network.PressureReducing || lk.Valve == network.PressureSustaining) {
				passive = false
			}
			o := lk.To
			if o == i {
				o = lk.From
			}
			if o == other {
				g.queue = q
				return true, false, false
			}
			if g.mark[o] != g.search {
				g.mark[o] = g.search
				q = append(q, o)
			}
		}
	}
	g.queue = q
	return false, false, passive
}

// bridgeResponse is the head change at each evidence logger of sg when
// the resistance of the passive bridge l is multiplied by factor.
func bridgeResponse(sg *signatures, l int, factor float64) []float64 {
	out := make([]float64, len(sg.sens.Resistance))
	for k, row := range sg.sens.Resistance {
		out[k] = (factor - 1) * row[l]
	}
	return out
}
