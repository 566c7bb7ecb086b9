package score

import (
	"math"

	"plumbline/model/network"
)

// Paths measures distances along pipes in one network: the shortest path
// over the links, each weighted by its length (m), with the network taken
// as undirected (a crew walks a main either way) and every link counted
// whatever its status (a closed valve does not shorten the walk). Pumps
// and valves weigh their Length, normally 0. A negative or NaN length
// counts as 0.
//
// An element is a node or a link, named by id (node ids are looked up
// first). A node's position is the node; a link's position is its
// midpoint, reached through either end: from a node n to link l the
// distance is min(d(n, l.From), d(n, l.To)) + l.Length/2, and a link is at
// 0 m from itself.
//
// Paths is read-only after NewPaths and safe for concurrent use.
type Paths struct {
	net *network.Network
	adj [][]arc
}

// arc is one direction of a link in the adjacency list.
type arc struct {
	to int
	w  float64
}

// element is a node (link < 0) or a link of the network.
type element struct {
	node, link int
}

// NewPaths builds the adjacency of net (O(nodes + links)).
func NewPaths(net *network.Network) *Paths {
	p := &Paths{net: net, adj: make([][]arc, len(net.Nodes))}
	for i := range net.Links {
		l := &net.Links[i]
		if l.From < 0 || l.From >= len(net.Nodes) || l.To < 0 || l.To >= len(net.Nodes) {
			continue
		}
		w := linkLength(l)
		p.adj[l.From] = append(p.adj[l.From], arc{l.To, w})
		p.adj[l.To] = append(p.adj[l.To], arc{l.From, w})
	}
	return p
}

// linkLength returns the link's length, 0 when negative or NaN.
func linkLength(l *network.Link) float64 {
	if !(l.Length > 0) || math.IsInf(l.Length, 0) {
		return 0
	}
	return l.Length
}

// resolve finds the element named id.
func (p *Paths) resolve(id string) (element, bool) {
	if i, ok := p.net.NodeIndex(id); ok {
		return element{node: i, link: -1}, true
	}
	if i, ok := p.net.LinkIndex(id); ok {
		l := &p.net.Links[i]
		if l.From < 0 || l.From >= len(p.net.Nodes) || l.To < 0 || l.To >= len(p.net.Nodes) {
			return element{}, false
		}
		return element{node: -1, link: i}, true
	}
	return element{}, false
}

// Distance returns the distance along pipes between the elements a and b
// (m), and false when either id is not in the network or b cannot be
// reached from a.
func (p *Paths) Distance(a, b string) (float64, bool) {
	ea, ok := p.resolve(a)
	if !ok {
		return 0, false
	}
	eb, ok := p.resolve(b)
	if !ok {
		return 0, false
	}
	if ea == eb {
		return 0, true
	}
	var targets [2]int
	var half float64
	if eb.link < 0 {
		targets = [2]int{eb.node, eb.node}
	} else {
		l := &p.net.Links[eb.link]
		targets = [2]int{l.From, l.To}
		half = linkLength(l) / 2
	}
	d := p.search(ea, targets)
	if math.IsInf(d, 1) {
		return 0, false
	}
	return d + half, true
}

// search returns the distance from element e to the nearer of the two
// target nodes (Dijkstra 1959 with a binary heap, stopping at the first
// target settled: no node settled later can be nearer); +Inf when neither
// can be reached.
func (p *Paths) search(e element, targets [2]int) float64 {
	dist := make([]float64, len(p.net.Nodes))
	for i := range dist {
		dist[i] = math.Inf(1)
	}
	var q queue
	push := func(n int, d float64) {
		if d < dist[n] {
			dist[n] = d
			q.push(item{n, d})
		}
	}
	if e.link < 0 {
		push(e.node, 0)
	} else {
		l := &p.net.Links[e.link]
		half := linkLength(l) / 2
		push(l.From, half)
		push(l.To, half)
	}
	for len(q) > 0 {
		it := q.pop()
		if it.d > dist[it.n] {
			continue // a stale entry
		}
		if it.n == targets[0] || it.n == targets[1] {
			return it.d
		}
		for _, a := range p.adj[it.n] {
			push(a.to, it.d+a.w)
		}
	}
	return math.Inf(1)
}

// item is a node and its tentative distance in the queue.
type item struct {
	n int
	d float64
}

// queue is a binary min-heap of items by distance.
type queue []item

func (q *queue) push(it item) {
	h := append(*q, it)
	i := len(h) - 1
	for i > 0 {
		parent := (i - 1) / 2
		if h[parent].d <= h[i].d {
			break
		}
		h[parent], h[i] = h[i], h[parent]
		i = parent
	}
	*q = h
}

func (q *queue) pop() item {
	h := *q
	top := h[0]
	last := len(h) - 1
	h[0] = h[last]
	h = h[:last]
	i := 0
	for {
		l, r, m := 2*i+1, 2*i+2, i
		if l < len(h) && h[l].d < h[m].d {
			m = l
		}
		if r < len(h) && h[r].d < h[m].d {
			m = r
		}
		if m == i {
			break
		}
		h[i], h[m] = h[m], h[i]
		i = m
	}
	*q = h
	return top
}

// elementZone returns the zone of the node or link named id: a node's
// zone, or a link's To node's zone (the zone it feeds), else its From node's; "" when unknown
// or net is nil.
func elementZone(net *network.Network, id string) string {
	if net == nil {
		return ""
	}
	if i, ok := net.NodeIndex(id); ok {
		return net.Nodes[i].Zone
	}
	i, ok := net.LinkIndex(id)
	if !ok {
		return ""
	}
	l := &net.Links[i]
	for _, n := range []int{l.To, l.From} {
		if n >= 0 && n < len(net.Nodes) && net.Nodes[n].Zone != "" {
			return net.Nodes[n].Zone
		}
	}
	return ""
}
