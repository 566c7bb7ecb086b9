package netgen

import (
	"math"
	"math/rand/v2"
	"strconv"

	"plumbline/model/network"
)

// linkClass is a pipe's place in the hierarchy; it fixes the diameter
// range the sizing may choose from.
type linkClass uint8

const (
	classStreet linkClass = iota // branched street pipes
	classMain                    // distribution mains of the looped grid
	classTrunk                   // trunk mains of the looped grid
	classSource                  // connections from reservoirs and tanks
	classValve                   // control valves, sized like mains
	classFixed                   // pumps and rising mains, sized by the caller
)

// classRange is the diameter range (mm) of each class.
var classRange = [...][2]float64{
	classStreet: {100, 150},
	classMain:   {150, 400},
	classTrunk:  {250, 600},
	classSource: {300, 600},
	classValve:  {100, 400},
}

// treeWeight scales a link's length in the shortest-path tree used for
// sizing, so that the tree runs along trunks first, as water does.
var treeWeight = [...]float64{
	classStreet: 2.5,
	classMain:   1,
	classTrunk:  0.5,
	classSource: 0.3,
	classValve:  1,
	classFixed:  1,
}

// builder accumulates nodes and links in local metres and WGS84 at once.
type builder struct {
	rng   *rand.Rand
	proj  projection
	nodes []network.Node
	xy    []vec
	links []network.Link
	class []linkClass
	// skip marks links the sizing tree must not cross (pumps, closed links).
	skip []bool
	// geom is the backing store of all two-point link geometries.
	geom     []network.Point
	nextPipe int
	groups   map[groupKey]string
}

func newBuilder(seed uint64, origin network.Point, nodeCap, linkCap int) *builder {
	return &builder{
		rng:      rand.New(rand.NewPCG(seed, 0x706c756d626c696e)), // "plumblin"
		proj:     newProjection(origin),
		nodes:    make([]network.Node, 0, nodeCap),
		xy:       make([]vec, 0, nodeCap),
		links:    make([]network.Link, 0, linkCap),
		class:    make([]linkClass, 0, linkCap),
		skip:     make([]bool, 0, linkCap),
		geom:     make([]network.Point, 0, 2*linkCap),
		nextPipe: 1,
		groups:   map[groupKey]string{},
	}
}

// addNode appends a node at local position p and returns its index.
func (b *builder) addNode(n network.Node, p vec) int {
	n.Coord = b.proj.point(p)
	n.HasCoord = true
	b.nodes = append(b.nodes, n)
	b.xy = append(b.xy, p)
	return len(b.nodes) - 1
}

// addLink appends a straight link from node i to node j; a pipe's Length
// is the length of its geometry on the sphere, to 1 cm.
func (b *builder) addLink(l network.Link, i, j int, c linkClass) int {
	l.From, l.To = i, j
	a, z := b.nodes[i].Coord, b.nodes[j].Coord
	b.geom = append(b.geom, a, z)
	k := len(b.geom)
	l.Geometry = b.geom[k-2 : k : k]
	if l.Kind == network.Pipe {
		l.Length = roundTo(sphereLength(a, z), 0.01)
	}
	b.links = append(b.links, l)
	b.class = append(b.class, c)
	b.skip = append(b.skip, l.Kind == network.Pump || l.Status == network.Closed)
	return len(b.links) - 1
}

// addPipe appends a pipe "P-<n>" of the given class.
func (b *builder) addPipe(i, j int, c linkClass) int {
	id := "P-" + strconv.Itoa(b.nextPipe)
	b.nextPipe++
	return b.addLink(network.Link{ID: id, Kind: network.Pipe}, i, j, c)
}

// gridSpec describes one district laid on a jittered lattice.
type gridSpec struct {
	junctions  int
	origin     vec     // lower-left corner, local metres
	aspect     float64 // columns per row
	spacing    float64 // lattice spacing, m
	mainEvery  int     // a main every mainEvery rows and columns
	trunkEvery int     // every trunkEvery-th main line is a trunk
	firstID    int     // number of the first junction id
	zone       string
	elevation  func(vec) float64
}

// grid is the lattice of one district: node index per (row, column), -1
// where the partial last row has no node.
type grid struct {
	rows, cols, lastLen int
	node                []int32
	mainRow, mainCol    []bool
	trunkRow, trunkCol  []bool
}

func (g *grid) at(i, j int) int {
	if i < 0 || j < 0 || i >= g.rows || j >= g.cols {
		return -1
	}
	return int(g.node[i*g.cols+j])
}

func (g *grid) isIntersection(i, j int) bool { return g.mainRow[i] && g.mainCol[j] }

// addGrid lays out a district of exactly spec.junctions junctions and its
// mains and streets, and returns its lattice. Rows run west-east, row 0 at
// the south.
func (b *builder) addGrid(s gridSpec) *grid {
	n := s.junctions
	cols := max(2, int(math.Ceil(math.Sqrt(float64(n)*s.aspect))))
	rows := (n + cols - 1) / cols
	if rows < 2 {
		rows = 2
		cols = (n + 1) / 2
	}
	g := &grid{rows: rows, cols: cols, lastLen: n - (rows-1)*cols}
	g.node = make([]int32, rows*cols)
	g.mainRow, g.trunkRow = lines(rows, s.mainEvery, s.trunkEvery)
	g.mainCol, g.trunkCol = lines(cols, s.mainEvery, s.trunkEvery)

	h := s.spacing
	id := s.firstID
	for i := range rows {
		for j := range cols {
			if i == rows-1 && j >= g.lastLen {
				g.node[i*cols+j] = -1
				continue
			}
			// Mains run straight; streets wander a little.
			var jx, jy float64
			switch {
			case g.mainRow[i] && g.mainCol[j]:
				jx, jy = 0.08, 0.08
			case g.mainRow[i]:
				jx, jy = 0.25, 0.06
			case g.mainCol[j]:
				jx, jy = 0.06, 0.25
			default:
				jx, jy = 0.2, 0.2
			}
			p := vec{
				s.origin.x + h*(float64(j)+jx*(2*b.rng.Float64()-1)),
				s.origin.y + h*(float64(i)+jy*(2*b.rng.Float64()-1)),
			}
			k := b.addNode(network.Node{
				ID:        "J-" + strconv.Itoa(id),
				Kind:      network.Junction,
				Elevation: roundTo(s.elevation(p), 0.01),
				Zone:      s.zone,
			}, p)
			id++
			g.node[i*cols+j] = int32(k)
		}
	}

	// Mains along main rows and columns.
	for i := range rows {
		if !g.mainRow[i] {
			continue
		}
		c := classMain
		if g.trunkRow[i] {
			c = classTrunk
		}
		for j := 0; j+1 < cols; j++ {
			if a, z := g.at(i, j), g.at(i, j+1); a >= 0 && z >= 0 {
				b.addPipe(a, z, c)
			}
		}
	}
	for j := range cols {
		if !g.mainCol[j] {
			continue
		}
		c := classMain
		if g.trunkCol[j] {
			c = classTrunk
		}
		for i := 0; i+1 < rows; i++ {
			if a, z := g.at(i, j), g.at(i+1, j); a >= 0 && z >= 0 {
				b.addPipe(a, z, c)
			}
		}
	}

	// Streets: in each block between mains, chains hang off the mains
	// on two opposite sides; each chain is broken once at a random place
	// (two dead ends) unless it runs through (a small loop).
	rowMains := indices(g.mainRow)
	colMains := indices(g.mainCol)
	for bi := 0; bi+1 < len(rowMains); bi++ {
		r0, r1 := rowMains[bi], rowMains[bi+1]
		for bj := 0; bj+1 < len(colMains); bj++ {
			c0, c1 := colMains[bj], colMains[bj+1]
			b.addStreets(g, r0, r1, c0, c1)
		}
	}
	return g
}

// lines marks the main lines among n lattice lines (every `every`-th and
// the last) and the trunks among them (every trunkEvery-th main line,
// starting with the first).
func lines(n, every, trunkEvery int) (main, trunk []bool) {
	main = make([]bool, n)
	trunk = make([]bool, n)
	m := 0
	for i := range n {
		if i%every == 0 || i == n-1 {
			main[i] = true
			if trunkEvery > 0 && m%trunkEvery == 0 {
				trunk[i] = true
			}
			m++
		}
	}
	return main, trunk
}

func indices(flags []bool) []int {
	var out []int
	for i, f := range flags {
		if f {
			out = append(out, i)
		}
	}
	return out
}

// probThrough is the chance that a street chain runs through from main
// to main instead of ending blind; probCross the chance of a cross street
// between neighbouring chains (both common-sense choices for a mix of
// loops and dead ends).
const (
	probThrough = 0.3
	probCross   = 0.06
)

// addStreets lays the street pipes of the block bounded by main rows r0,
// r1 and main columns c0, c1.
func (b *builder) addStreets(g *grid, r0, r1, c0, c1 int) {
	vertical := b.rng.IntN(2) == 0
	if r1-r0 < 2 && c1-c0 >= 2 {
		vertical = true // only one orientation has interior nodes to join
	}
	if c1-c0 < 2 && r1-r0 >= 2 {
		vertical = false
	}
	// chain returns the lattice position of step p along chain q.
	var nChains, nSteps int
	var pos func(q, p int) (int, int)
	if vertical {
		nChains, nSteps = c1-c0-1, r1-r0
		pos = func(q, p int) (int, int) { return r0 + p, c0 + 1 + q }
	} else {
		nChains, nSteps = r1-r0-1, c1-c0
		pos = func(q, p int) (int, int) { return r0 + 1 + q, c0 + p }
	}
	for q := range nChains {
		brk := b.rng.IntN(nSteps) // link brk..brk+1 is left out
		through := b.rng.Float64() < probThrough
		if ie, je := pos(q, nSteps); g.at(ie, je) < 0 {
			through = true // no main at the far end: hang all from the near one
		}
		for p := range nSteps {
			if p == brk && !through {
				continue
			}
			i0, j0 := pos(q, p)
			i1, j1 := pos(q, p+1)
			a, z := g.at(i0, j0), g.at(i1, j1)
			if a >= 0 && z >= 0 {
				b.addPipe(a, z, classStreet)
			}
		}
		if q+1 < nChains {
			for p := 1; p < nSteps; p++ {
				if b.rng.Float64() < probCross {
					i0, j0 := pos(q, p)
					i1, j1 := pos(q+1, p)
					a, z := g.at(i0, j0), g.at(i1, j1)
					if a >= 0 && z >= 0 {
						b.addPipe(a, z, classStreet)
					}
				}
			}
		}
	}
}

// intersections returns the node indices where mains cross.
func (g *grid) intersections() []int {
	var out []int
	for i := range g.rows {
		if !g.mainRow[i] {
			continue
		}
		for j := range g.cols {
			if g.mainCol[j] {
				if k := g.at(i, j); k >= 0 {
					out = append(out, k)
				}
			}
		}
	}
	return out
}

// assignDemands gives every junction in nodes[from:to] a residential base
// demand, lognormal with median 0.06 L/s clamped to 0.01-0.5 L/s (a
// junction standing for some 10-40 homes at about 150-250 L per person
// per day; common practice), and the commercial pattern to a share of
// junctions near the centre.
func (b *builder) assignDemands(from, to int, centre vec, radius float64) {
	for k := from; k < to; k++ {
		n := &b.nodes[k]
		if n.Kind != network.Junction {
			continue
		}
		q := math.Exp(math.Log(0.06) + 0.75*b.rng.NormFloat64())
		n.Demand = min(0.5, max(0.01, roundTo(q, 0.001)))
		n.Pattern = Residential
		r := b.xy[k].dist(centre) / radius
		if (r < 0.2 && b.rng.Float64() < 0.5) || b.rng.Float64() < 0.04 {
			n.Pattern = Commercial
		}
	}
}

// assignYears gives every pipe without a year an installation year that
// rises from the centre (1930s) to the edge (2010s), with noise, clamped
// to 1930-2020.
func (b *builder) assignYears(centre vec, radius float64) {
	for k := range b.links {
		l := &b.links[k]
		if l.Kind != network.Pipe || l.Installed != 0 {
			continue
		}
		r := mid(b.xy[l.From], b.xy[l.To]).dist(centre) / radius
		y := 1935 + 80*min(1, r) + 12*b.rng.NormFloat64()
		l.Installed = int(min(2020, max(1930, math.Round(y))))
	}
}

// kCentres returns k well-spread centres of the points: farthest-point
// seeding from the point nearest the mean, then a few Lloyd (k-means)
// iterations. Deterministic; needs len(pts) >= 1.
func kCentres(pts []vec, k int) []vec {
	var mean vec
	for _, p := range pts {
		mean = mean.add(p)
	}
	mean = mean.scale(1 / float64(len(pts)))
	first := 0
	for i, p := range pts {
		if p.dist2(mean) < pts[first].dist2(mean) {
			first = i
		}
	}
	centres := []vec{pts[first]}
	d := make([]float64, len(pts))
	for i, p := range pts {
		d[i] = p.dist2(pts[first])
	}
	for len(centres) < k {
		far := 0
		for i := range d {
			if d[i] > d[far] {
				far = i
			}
		}
		c := pts[far]
		centres = append(centres, c)
		for i, p := range pts {
			d[i] = min(d[i], p.dist2(c))
		}
	}
	sum := make([]vec, k)
	cnt := make([]int, k)
	for range 8 {
		clear(sum)
		clear(cnt)
		for _, p := range pts {
			c := nearest(centres, p)
			sum[c] = sum[c].add(p)
			cnt[c]++
		}
		for c := range centres {
			if cnt[c] > 0 {
				centres[c] = sum[c].scale(1 / float64(cnt[c]))
			}
		}
	}
	return centres
}

func nearest(centres []vec, p vec) int {
	best, bd := 0, math.Inf(1)
	for c, q := range centres {
		if d := p.dist2(q); d < bd {
			best, bd = c, d
		}
	}
	return best
}
