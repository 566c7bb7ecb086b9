package netgen

import (
	"math"

	"plumbline/model/network"
)

// Design rules of the sizing (common practice for distribution design,
// from memory): mains sized for about 1 m/s at peak hour, and a minimum
// service pressure of 20 m at peak on the tree estimate.
const (
	designVelocity    = 1.0 // m/s at peak
	designMinPressure = 20  // m at peak, tree estimate
	designPasses      = 12
)

// csr is a compressed adjacency of the links the sizing tree may cross,
// with the far node and tree weight of each entry kept beside the link
// so that the search touches only these small arrays.
type csr struct {
	start []int32   // per node, into the entries
	link  []int32   // link index of each entry
	node  []int32   // far node of each entry
	w     []float64 // weighted length of each entry
}

func (b *builder) adjacency() csr {
	n := len(b.nodes)
	start := make([]int32, n+1)
	for k, l := range b.links {
		if b.skip[k] {
			continue
		}
		start[l.From+1]++
		start[l.To+1]++
	}
	for i := range n {
		start[i+1] += start[i]
	}
	m := start[n]
	g := csr{start: start, link: make([]int32, m), node: make([]int32, m), w: make([]float64, m)}
	fill := append([]int32(nil), start[:n]...)
	for k, l := range b.links {
		if b.skip[k] {
			continue
		}
		w := l.Length * treeWeight[b.class[k]]
		for _, e := range [2][2]int{{l.From, l.To}, {l.To, l.From}} {
			at := fill[e[0]]
			g.link[at], g.node[at], g.w[at] = int32(k), int32(e[1]), w
			fill[e[0]]++
		}
	}
	return g
}

// tree is a shortest-path forest from the fixed-head roots.
type tree struct {
	order      []int32 // nodes in the order they were settled
	parentLink []int32 // per node; -1 for roots and unreached nodes
	parent     []int32 // per node, the node upstream; -1 likewise
	flow       []float64
}

// shortestTree grows the forest by Dijkstra's algorithm over weighted
// lengths and accumulates the peak demand each tree link carries.
func (b *builder) shortestTree(g csr, roots []int, peak float64) tree {
	n := len(b.nodes)
	dist := make([]float64, n)
	for i := range dist {
		dist[i] = math.Inf(1)
	}
	t := tree{
		order:      make([]int32, 0, n),
		parentLink: make([]int32, n),
		parent:     make([]int32, n),
		flow:       make([]float64, len(b.links)),
	}
	for i := range t.parentLink {
		t.parentLink[i], t.parent[i] = -1, -1
	}
	h := heap{d: make([]float64, 0, n), v: make([]int32, 0, n)}
	for _, r := range roots {
		dist[r] = 0
		h.push(0, int32(r))
	}
	done := make([]bool, n)
	for h.len() > 0 {
		d, u := h.pop()
		if done[u] {
			continue
		}
		done[u] = true
		t.order = append(t.order, u)
		for e := g.start[u]; e < g.start[u+1]; e++ {
			v := g.node[e]
			if done[v] {
				continue
			}
			if nd := d + g.w[e]; nd < dist[v] {
				dist[v] = nd
				t.parentLink[v], t.parent[v] = g.link[e], u
				h.push(nd, v)
			}
		}
	}
	acc := make([]float64, n)
	for i := range b.nodes {
		if nd := &b.nodes[i]; nd.Kind == network.Junction {
			acc[i] = nd.Demand * peak
		}
	}
	for i := len(t.order) - 1; i >= 0; i-- {
		u := t.order[i]
		if k := t.parentLink[u]; k >= 0 {
			t.flow[k] = acc[u]
			acc[t.parent[u]] += acc[u]
		}
	}
	return t
}

// designResult reports how the sizing ended.
type designResult struct {
	minPressure float64 // lowest tree-estimated peak pressure, m
	passes      int
}

// design sizes every pipe and valve of a sizable class from its tree
// flow at peak, sets material and roughness from year and size, and then
// upsizes pipes on the paths to junctions whose tree-estimated peak
// pressure is below designMinPressure. heads[i] is the head of roots[i].
// cNoise holds a per-link offset of the C factor (deterministic noise).
func (b *builder) design(roots []int, heads []float64, peak float64, cNoise []float64) designResult {
	g := b.adjacency()
	t := b.shortestTree(g, roots, peak)
	for k := range b.links {
		c := b.class[k]
		if c == classFixed {
			continue
		}
		lo, hi := classRange[c][0], classRange[c][1]
		q := t.flow[k] / 1000 // m³/s
		d := math.Sqrt(4*q/(math.Pi*designVelocity)) * 1000
		b.links[k].Diameter = min(hi, max(lo, sizeUp(d)))
	}
	b.setMaterials(cNoise)

	n := len(b.nodes)
	head := make([]float64, n)
	elev := make([]float64, n)
	junction := make([]bool, n)
	for i := range b.nodes {
		elev[i] = b.nodes[i].Elevation
		junction[i] = b.nodes[i].Kind == network.Junction
	}
	// prvSetting[u] is the outlet setting of a pressure-reducing valve
	// whose outlet is tree node u, else NaN.
	prvSetting := make([]float64, n)
	for i := range prvSetting {
		prvSetting[i] = math.NaN()
	}
	for _, u := range t.order {
		if k := t.parentLink[u]; k >= 0 {
			l := &b.links[k]
			if l.Kind == network.Valve && l.Valve == network.PressureReducing && l.To == int(u) {
				prvSetting[u] = l.Setting
			}
		}
	}
	loss := make([]float64, len(b.links))
	lossOf := func(k int32) {
		if l := &b.links[k]; l.Kind == network.Pipe {
			loss[k] = hazenLoss(l.Length, t.flow[k], l.Diameter, l.Roughness)
		}
	}
	for _, u := range t.order {
		if k := t.parentLink[u]; k >= 0 {
			lossOf(k)
		}
	}
	low := make([]bool, n)
	seen := make([]bool, n)
	var path []int32
	var res designResult
	for pass := 0; ; pass++ {
		for i, r := range roots {
			head[r] = heads[i]
		}
		res = designResult{minPressure: math.Inf(1), passes: pass}
		anyLow := false
		for _, u := range t.order {
			low[u] = false
			k := t.parentLink[u]
			if k < 0 {
				continue
			}
			hu := head[t.parent[u]] - loss[k]
			if s := prvSetting[u]; s == s { // not NaN
				hu = min(hu, elev[u]+s)
			}
			head[u] = hu
			if junction[u] {
				pr := hu - elev[u]
				res.minPressure = min(res.minPressure, pr)
				if pr < designMinPressure {
					low[u] = true
					anyLow = true
				}
			}
		}
		if !anyLow || pass == designPasses {
			return res
		}
		// On each low path, upsize the pipes whose gradient is at least
		// half the steepest on the path.
		clear(seen)
		changed := false
		for _, u := range t.order {
			if !low[u] {
				continue
			}
			path = path[:0]
			steepest := 0.0
			for v := u; !seen[v]; v = t.parent[v] {
				seen[v] = true
				k := t.parentLink[v]
				if k < 0 {
					break
				}
				l := &b.links[k]
				if c := b.class[k]; l.Kind == network.Pipe && c != classFixed && l.Diameter < classRange[c][1] {
					path = append(path, k)
					steepest = max(steepest, loss[k]/l.Length)
				}
			}
			for _, k := range path {
				if g := loss[k] / b.links[k].Length; g >= 0.5*steepest && g > 0.5e-3 {
					b.links[k].Diameter = nextSize(b.links[k].Diameter)
					b.setMaterial(int(k), cNoise)
					lossOf(k)
					changed = true
				}
			}
		}
		if !changed {
			return res
		}
	}
}

// groupKey is a calibration group: material and decade.
type groupKey struct {
	material string
	decade   int
}

// setMaterials sets material, Hazen-Williams C and group of every pipe
// from its year and diameter.
func (b *builder) setMaterials(cNoise []float64) {
	for k := range b.links {
		b.setMaterial(k, cNoise)
	}
}

func (b *builder) setMaterial(k int, cNoise []float64) {
	l := &b.links[k]
	if l.Kind != network.Pipe {
		return
	}
	l.Material = materialFor(l.Installed, l.Diameter)
	age := float64(referenceYear - l.Installed)
	l.Roughness = min(140, max(80, math.Round(hazenC(l.Material, age)+cNoise[k])))
	// Groups repeat (a few materials by a few decades): share the strings.
	key := groupKey{l.Material, l.Installed / 10}
	g, ok := b.groups[key]
	if !ok {
		g = groupFor(l.Material, l.Installed)
		b.groups[key] = g
	}
	l.Group = g
}

// useDarcy replaces every pipe's C factor by its absolute roughness in
// mm, for a network with the Darcy-Weisbach head loss.
func (b *builder) useDarcy() {
	for k := range b.links {
		l := &b.links[k]
		if l.Kind != network.Pipe {
			continue
		}
		age := float64(referenceYear - l.Installed)
		l.Roughness = roundTo(absRoughness(l.Material, age), 0.0001)
	}
}

// heap is a binary min-heap of (distance, node) for Dijkstra.
type heap struct {
	d []float64
	v []int32
}

func (h *heap) len() int { return len(h.d) }

func (h *heap) push(d float64, v int32) {
	h.d = append(h.d, d)
	h.v = append(h.v, v)
	i := len(h.d) - 1
	for i > 0 {
		p := (i - 1) / 2
		if h.d[p] <= h.d[i] {
			break
		}
		h.d[p], h.d[i] = h.d[i], h.d[p]
		h.v[p], h.v[i] = h.v[i], h.v[p]
		i = p
	}
}

func (h *heap) pop() (float64, int32) {
	d, v := h.d[0], h.v[0]
	last := len(h.d) - 1
	h.d[0], h.v[0] = h.d[last], h.v[last]
	h.d, h.v = h.d[:last], h.v[:last]
	i := 0
	for {
		l, r := 2*i+1, 2*i+2
		m := i
		if l < last && h.d[l] < h.d[m] {
			m = l
		}
		if r < last && h.d[r] < h.d[m] {
			m = r
		}
		if m == i {
			break
		}
		h.d[m], h.d[i] = h.d[i], h.d[m]
		h.v[m], h.v[i] = h.v[i], h.v[m]
		i = m
	}
	return d, v
}
