package score

import (
	"container/heap"
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
	dist := p.from(ea)
	var d float64
	if eb.link < 0 {
		d = dist[eb.node]
	} else {
		l := &p.net.Links[eb.link]
		d = math.Min(dist[l.From], dist[l.To]) + linkLength(l)/2
	}
	if math.IsInf(d, 1) {
		return 0, false
	}
	return d, true
}

// from returns the distance of every node from element e (Dijkstra 1959,
// with a binary heap; +Inf for unreachable nodes).
func (p *Paths) from(e element) []float64 {
	dist := make([]float64, len(p.net.Nodes))
	for i := range dist {
		dist[i] = math.Inf(1)
	}
	q := &queue{}
	push := func(n int, d float64) {
		if d < dist[n] {
			dist[n] = d
			heap.Push(q, item{n, d})
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
	for q.Len() > 0 {
		it := heap.Pop(q).(item)
		if it.d > dist[it.n] {
			continue // a stale entry
		}
		for _, a := range p.adj[it.n] {
			push(a.to, it.d+a.w)
		}
	}
	return dist
}

// item is a node and its tentative distance in the queue.
type item struct {
	n int
	d float64
}

// queue is a min-heap of items by distance.
type queue []item

func (q queue) Len() int           { return len(q) }
func (q queue) Less(i, j int) bool { return q[i].d < q[j].d }
func (q queue) Swap(i, j int)      { q[i], q[j] = q[j], q[i] }
func (q *queue) Push(x any)        { *q = append(*q, x.(item)) }
func (q *queue) Pop() any {
	old := *q
	it := old[len(old)-1]
	*q = old[:len(old)-1]
	return it
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
