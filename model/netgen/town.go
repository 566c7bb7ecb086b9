package netgen

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strconv"

	"plumbline/model/network"
)

// Options says what town to generate. The zero value is not valid:
// Junctions must be set.
type Options struct {
	// Junctions is the number of junctions, at least MinJunctions and at
	// most MaxJunctions. The generated network has exactly this many.
	Junctions int
	// Seed selects the town; the same Options give an identical network.
	Seed uint64
	// Zones is the number of zones, compact regions named "zone-1" ...;
	// 0 means 1. At most Junctions/4.
	Zones int
	// Sources is the number of reservoirs; 0 chooses one per 2,000
	// junctions (rounded up), enough that no trunk main must carry much
	// more than about 300 L/s at peak.
	Sources int
	// Tank adds a tank "T-1" floating on the system at its highest
	// main crossing.
	Tank bool
	// Headloss selects the friction law: Hazen-Williams (roughness C, the
	// default) or Darcy-Weisbach (absolute roughness, mm).
	Headloss network.HeadlossFormula
	// Origin is the WGS84 position of the town's south-west corner; the
	// zero value means an arbitrary point in open country (24.9312° S,
	// 126.1837° E), standing for no real place.
	Origin network.Point
}

// Limits of Options.Junctions.
const (
	MinJunctions = 8
	MaxJunctions = 5_000_000
)

// Town lattice geometry (common practice for a suburban street grid):
// junctions about 90 m apart, a main every 6 lattice lines (about
// 540 m), every third main line a trunk.
const (
	townSpacing        = 90.0
	townMainEvery      = 6
	townTrunkEvery     = 3
	junctionsPerSource = 2000
)

// Terrain and heads of a generated town: ground between 15 and 60 m, and
// source heads 25 m above the highest ground, so static pressure stays
// between 25 and about 70 m (common practice: 20-70 m service range).
const (
	terrainBase  = 15.0
	terrainSpan  = 45.0
	staticMargin = 25.0
	maxStatic    = 80.0
)

// Town generates a town-like network as described in the package doc.
func Town(opts Options) (*network.Network, error) {
	if opts.Junctions < MinJunctions || opts.Junctions > MaxJunctions {
		return nil, fmt.Errorf("netgen: Options.Junctions %d outside %d..%d", opts.Junctions, MinJunctions, MaxJunctions)
	}
	zones := opts.Zones
	if zones == 0 {
		zones = 1
	}
	if zones < 0 || zones > opts.Junctions/4 {
		return nil, fmt.Errorf("netgen: Options.Zones %d outside 1..%d (a quarter of the junctions)", opts.Zones, opts.Junctions/4)
	}
	sources := opts.Sources
	if sources == 0 {
		sources = (opts.Junctions + junctionsPerSource - 1) / junctionsPerSource
	}
	if sources < 0 {
		return nil, fmt.Errorf("netgen: Options.Sources %d is negative", opts.Sources)
	}
	if opts.Headloss != network.HazenWilliams && opts.Headloss != network.DarcyWeisbach {
		return nil, fmt.Errorf("netgen: Options.Headloss %d unknown", opts.Headloss)
	}
	origin := opts.Origin
	if origin == (network.Point{}) {
		origin = defaultOrigin
	}
	if math.Abs(origin.Lat) > 80 || math.Abs(origin.Lon) > 180 {
		return nil, fmt.Errorf("netgen: Options.Origin %v outside latitude ±80°, longitude ±180°", origin)
	}

	n := opts.Junctions
	side := townSpacing * math.Sqrt(float64(n))
	// The town spans side m (plus a source pipe) east and north of the
	// origin; it must not cross the antimeridian or the 85° parallel.
	span := (side + 1000) / network.EarthRadius / degree
	if origin.Lon+span/math.Cos((math.Abs(origin.Lat)+span)*degree) > 180 || origin.Lat+span > 85 {
		return nil, fmt.Errorf("netgen: Options.Origin %v: a %d-junction town (%.0f km across) would cross longitude 180° or latitude 85°", origin, n, side/1000)
	}
	b := newBuilder(opts.Seed, origin, n+sources+1, n*13/10+sources+2)
	ter := newTerrain(b.rng, vec{side, side}, terrainBase, terrainSpan)
	g := b.addGrid(gridSpec{
		junctions:  n,
		aspect:     1,
		spacing:    townSpacing,
		mainEvery:  townMainEvery,
		trunkEvery: townTrunkEvery,
		firstID:    1,
		elevation:  ter.at,
	})
	centre := vec{side / 2, side / 2}
	radius := side / math.Sqrt2
	b.assignDemands(0, n, centre, radius)

	cross := g.intersections()
	if sources > len(cross) {
		return nil, fmt.Errorf("netgen: Options.Sources %d more than the %d main crossings of a %d-junction town", sources, len(cross), n)
	}
	crossXY := make([]vec, len(cross))
	for i, k := range cross {
		crossXY[i] = b.xy[k]
	}

	// Reservoirs: one per well-spread centre, joined to the nearest free
	// main crossing by a trunk pipe.
	used := map[int]bool{}
	var roots, rootAt []int
	for s, c := range kCentres(crossXY, sources) {
		at := nearestFree(b.xy, cross, c, used)
		used[at] = true
		p := b.xy[at].add(polar(220+80*b.rng.Float64(), 2*math.Pi*b.rng.Float64()))
		r := b.addNode(network.Node{ID: "R-" + strconv.Itoa(s+1), Kind: network.Reservoir}, p)
		b.addPipe(r, at, classSource)
		roots = append(roots, r)
		rootAt = append(rootAt, at)
	}
	tank := -1
	if opts.Tank {
		at := -1
		for _, k := range cross {
			if !used[k] && (at < 0 || b.nodes[k].Elevation > b.nodes[at].Elevation) {
				at = k
			}
		}
		if at < 0 {
			return nil, fmt.Errorf("netgen: Options.Tank: no free main crossing in a %d-junction town", n)
		}
		p := b.xy[at].add(polar(150, 2*math.Pi*b.rng.Float64()))
		tank = b.addNode(network.Node{ID: "T-1", Kind: network.Tank}, p)
		b.addPipe(tank, at, classSource)
		roots = append(roots, tank)
		rootAt = append(rootAt, at)
	}

	// Zones: compact regions around well-spread centres (of the main
	// crossings, or of all junctions when there are too few crossings).
	pts := crossXY
	if len(pts) < 4*zones {
		pts = b.xy[:n]
	}
	zc := kCentres(pts, zones)
	for k := range b.nodes {
		b.nodes[k].Zone = "zone-" + strconv.Itoa(nearest(zc, b.xy[k])+1)
	}
	for i, r := range roots {
		b.nodes[r].Zone = b.nodes[rootAt[i]].Zone
	}

	b.assignYears(centre, radius)
	cNoise := make([]float64, len(b.links))
	for k := range cNoise {
		cNoise[k] = 6 * (b.rng.Float64() - 0.5)
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for k := range n {
		lo = min(lo, b.nodes[k].Elevation)
		hi = max(hi, b.nodes[k].Elevation)
	}
	head := hi + staticMargin
	heads := make([]float64, len(roots))
	for i := range heads {
		heads[i] = head
	}
	if tank >= 0 {
		heads[len(heads)-1] = head - 1
	}
	res := b.design(roots, heads, maxMultiplier()*1.1, cNoise)
	// Where the pipes could not be made large enough, raise the heads,
	// within the static limit.
	if res.minPressure < designMinPressure {
		raise := min(designMinPressure-res.minPressure, lo+maxStatic-head)
		if raise > 0 {
			for i := range heads {
				heads[i] += raise
			}
		}
	}
	for i, r := range roots {
		nd := &b.nodes[r]
		if nd.Kind == network.Tank {
			nd.Level = 4
			nd.MinLevel = 0.5
			nd.MaxLevel = 7
			nd.TankDiameter = 25
			nd.Elevation = roundTo(heads[i]-nd.Level, 0.01)
		} else {
			nd.Head = roundTo(heads[i], 0.01)
			nd.Elevation = nd.Head
		}
	}
	if opts.Headloss == network.DarcyWeisbach {
		b.useDarcy()
	}
	net := network.New(b.nodes, b.links)
	net.Headloss = opts.Headloss
	net.Patterns = Patterns()
	return net, nil
}

// nearestFree returns the node of cands nearest p that is not used.
func nearestFree(xy []vec, cands []int, p vec, used map[int]bool) int {
	best, bd := -1, math.Inf(1)
	for _, k := range cands {
		if used[k] {
			continue
		}
		if d := xy[k].dist2(p); d < bd {
			best, bd = k, d
		}
	}
	return best
}

// terrain is a smooth ground surface: a sum of long-wavelength sinusoids
// and one gentle hill, scaled into [base, base+span].
type terrain struct {
	waves      [4]wave
	hill       vec
	hillSigma  float64
	hillAmp    float64
	lo, hi     float64
	base, span float64
}

type wave struct {
	amp, kx, ky, phase float64
}

func newTerrain(rng *rand.Rand, extent vec, base, span float64) *terrain {
	t := &terrain{base: base, span: span}
	amps := [4]float64{1, 0.6, 0.4, 0.25}
	for i := range t.waves {
		lambda := 1500 + 4500*rng.Float64() // m
		dir := 2 * math.Pi * rng.Float64()
		k := 2 * math.Pi / lambda
		t.waves[i] = wave{amp: amps[i], kx: k * math.Cos(dir), ky: k * math.Sin(dir), phase: 2 * math.Pi * rng.Float64()}
		t.hi += amps[i]
	}
	t.lo = -t.hi
	t.hill = vec{extent.x * (0.2 + 0.6*rng.Float64()), extent.y * (0.2 + 0.6*rng.Float64())}
	t.hillSigma = max(800, 0.25*extent.norm())
	t.hillAmp = 1.2
	t.hi += t.hillAmp
	return t
}

func (t *terrain) at(p vec) float64 {
	var f float64
	for _, w := range t.waves {
		f += w.amp * math.Sin(w.kx*p.x+w.ky*p.y+w.phase)
	}
	f += t.hillAmp * math.Exp(-p.dist2(t.hill)/(2*t.hillSigma*t.hillSigma))
	return t.base + t.span*(f-t.lo)/(t.hi-t.lo)
}
