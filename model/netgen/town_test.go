package netgen

import (
	"math"
	"reflect"
	"strings"
	"testing"

	"plumbline/model/network"
)

// haversine is the great-circle distance in m on a sphere of the IUGG
// mean Earth radius R1 = 6371008.8 m (Moritz 2000, "Geodetic Reference
// System 1980", J. Geodesy 74:128-133), by the haversine formula
// (Sinnott 1984, Sky and Telescope 68(2):159). Written here on purpose,
// independent of the package and of model/network.
func haversine(a, b network.Point) float64 {
	const r = 6371008.8
	rad := math.Pi / 180
	dphi := (b.Lat - a.Lat) * rad
	dlam := (b.Lon - a.Lon) * rad
	h := math.Pow(math.Sin(dphi/2), 2) + math.Cos(a.Lat*rad)*math.Cos(b.Lat*rad)*math.Pow(math.Sin(dlam/2), 2)
	return 2 * r * math.Asin(math.Sqrt(h))
}

func mustTown(t testing.TB, o Options) *network.Network {
	t.Helper()
	net, err := Town(o)
	if err != nil {
		t.Fatalf("Town(%+v): %v", o, err)
	}
	return net
}

func countKind(net *network.Network, k network.NodeKind) int {
	c := 0
	for i := range net.Nodes {
		if net.Nodes[i].Kind == k {
			c++
		}
	}
	return c
}

// reachable returns, per node, whether it is reached from a fixed-head
// node over open links (breadth-first search, written independently of
// the generator's own tree).
func reachable(net *network.Network) []bool {
	adj := make([][]int, len(net.Nodes))
	for _, l := range net.Links {
		if l.Status == network.Closed {
			continue
		}
		adj[l.From] = append(adj[l.From], l.To)
		adj[l.To] = append(adj[l.To], l.From)
	}
	seen := make([]bool, len(net.Nodes))
	var queue []int
	for i := range net.Nodes {
		if net.Nodes[i].IsFixedHead() {
			seen[i] = true
			queue = append(queue, i)
		}
	}
	for len(queue) > 0 {
		u := queue[0]
		queue = queue[1:]
		for _, v := range adj[u] {
			if !seen[v] {
				seen[v] = true
				queue = append(queue, v)
			}
		}
	}
	return seen
}

func TestTownDeterministic(t *testing.T) {
	o := Options{Junctions: 1500, Seed: 7, Zones: 3, Tank: true}
	a, b := mustTown(t, o), mustTown(t, o)
	if !reflect.DeepEqual(a, b) {
		t.Fatalf("same Options gave different networks")
	}
	o.Seed = 8
	c := mustTown(t, o)
	same := 0
	for i := range a.Nodes {
		if a.Nodes[i].Coord == c.Nodes[i].Coord {
			same++
		}
	}
	if same > len(a.Nodes)/100 {
		t.Errorf("seeds 7 and 8: %d of %d node positions equal, want different towns", same, len(a.Nodes))
	}
}

func TestTownJunctionCount(t *testing.T) {
	for _, n := range []int{MinJunctions, 20, 57, 400, 1000, 4999, 5000, 20000} {
		net := mustTown(t, Options{Junctions: n, Seed: uint64(n)})
		got := countKind(net, network.Junction)
		if math.Abs(float64(got-n)) > 0.05*float64(n) {
			t.Errorf("Junctions %d: got %d junctions, want within 5%%", n, got)
		}
		if countKind(net, network.Reservoir) < 1 {
			t.Errorf("Junctions %d: no reservoir", n)
		}
	}
}

func TestTownConnected(t *testing.T) {
	for _, o := range []Options{
		{Junctions: 20, Seed: 1},
		{Junctions: 333, Seed: 2, Zones: 2},
		{Junctions: 5000, Seed: 3, Zones: 3, Tank: true},
		{Junctions: 12345, Seed: 4, Zones: 5},
	} {
		net := mustTown(t, o)
		seen := reachable(net)
		bad := 0
		for i := range net.Nodes {
			if !seen[i] {
				if bad < 5 {
					t.Errorf("Junctions %d seed %d: node %s not connected to a source", o.Junctions, o.Seed, net.Nodes[i].ID)
				}
				bad++
			}
		}
		if bad > 0 {
			t.Errorf("Junctions %d seed %d: %d nodes not connected", o.Junctions, o.Seed, bad)
		}
	}
}

// TestTownConnectedManySizes sweeps small sizes, where partial last rows
// and blocks without interior nodes are most varied.
func TestTownConnectedManySizes(t *testing.T) {
	for n := MinJunctions; n <= 400; n += 7 {
		for seed := uint64(1); seed <= 2; seed++ {
			net := mustTown(t, Options{Junctions: n, Seed: seed, Tank: seed == 2})
			if got := countKind(net, network.Junction); got != n {
				t.Errorf("Junctions %d seed %d: %d junctions", n, seed, got)
			}
			seen := reachable(net)
			for i := range net.Nodes {
				if !seen[i] {
					t.Errorf("Junctions %d seed %d: node %s not connected to a source", n, seed, net.Nodes[i].ID)
				}
			}
			// model/network's own checks: no errors, no warnings.
			for _, p := range network.Validate(net) {
				t.Errorf("Junctions %d seed %d: validation: %v", n, seed, p)
			}
		}
	}
}

func TestTownPipes(t *testing.T) {
	net := mustTown(t, Options{Junctions: 5000, Seed: 11, Zones: 3})
	for _, p := range network.Validate(net) {
		t.Errorf("validation: %v", p)
	}
	isStd := map[float64]bool{}
	for _, d := range standardDiameters {
		isStd[d] = true
	}
	var inRange, n int
	var srcD, allD float64
	var srcN int
	for _, l := range net.Links {
		if l.Kind != network.Pipe {
			continue
		}
		n++
		allD += l.Diameter
		if l.Diameter < 100 || l.Diameter > 600 || !isStd[l.Diameter] {
			t.Errorf("pipe %s: diameter %g mm, want a standard size within 100-600 mm", l.ID, l.Diameter)
		}
		// Haversine length of the geometry against the stored length:
		// the projection must be metric on the sphere.
		h := haversine(l.Geometry[0], l.Geometry[len(l.Geometry)-1])
		if d := math.Abs(h - l.Length); d > 1e-3*l.Length+0.01 {
			t.Errorf("pipe %s: haversine %.3f m, stored %.3f m, differ by %.3f m (tolerance 0.1%% + 1 cm)", l.ID, h, l.Length, d)
		}
		if net.Nodes[l.From].IsFixedHead() || net.Nodes[l.To].IsFixedHead() {
			srcD += l.Diameter
			srcN++
			continue
		}
		if l.Length >= 40 && l.Length <= 150 {
			inRange++
		}
		if l.Roughness < 80 || l.Roughness > 140 {
			t.Errorf("pipe %s: Hazen-Williams C %g, want 80-140", l.ID, l.Roughness)
		}
	}
	if inRange != n-srcN {
		t.Errorf("%d of %d lattice pipes have length within 40-150 m, want all", inRange, n-srcN)
	}
	// Larger near the sources: source pipes well above the mean size.
	if srcN == 0 || srcD/float64(srcN) < 1.5*allD/float64(n) {
		t.Errorf("mean diameter of source pipes %.0f mm, of all pipes %.0f mm: want source pipes at least 1.5 × larger", srcD/float64(max(1, srcN)), allD/float64(n))
	}
	// The street share: most pipes small, some large.
	var small, large int
	for _, l := range net.Links {
		switch {
		case l.Kind != network.Pipe:
		case l.Diameter <= 150:
			small++
		case l.Diameter >= 300:
			large++
		}
	}
	// Looped mains with branched streets: a share of dead ends, and
	// independent loops (links − nodes + 1 for a connected network,
	// Euler's formula for graphs).
	deg := make([]int, len(net.Nodes))
	for _, l := range net.Links {
		deg[l.From]++
		deg[l.To]++
	}
	dead := 0
	for i := range net.Nodes {
		if net.Nodes[i].Kind == network.Junction && deg[i] == 1 {
			dead++
		}
	}
	loops := len(net.Links) - len(net.Nodes) + 1
	t.Logf("5000 junctions: %d dead ends, %d independent loops", dead, loops)
	if dead < 5000/20 || dead > 5000*3/10 {
		t.Errorf("%d dead-end junctions of 5000, want 5-30%%", dead)
	}
	if loops < 5000/20 {
		t.Errorf("%d independent loops, want at least one per 20 junctions", loops)
	}
	if small < n/2 || large == 0 {
		t.Errorf("pipes ≤150 mm: %d, ≥300 mm: %d of %d; want streets the majority and some trunk mains", small, large, n)
	}
}

// TestTownOrigins places towns at other latitudes, both hemispheres, and
// checks positions stay valid WGS84 and lengths metric.
func TestTownOrigins(t *testing.T) {
	for _, o := range []network.Point{{Lon: 10, Lat: 62}, {Lon: -70.5, Lat: -45}, {Lon: 179.5, Lat: 0.5}} {
		net := mustTown(t, Options{Junctions: 2000, Seed: 2, Origin: o})
		for i := range net.Nodes {
			c := net.Nodes[i].Coord
			if c.Lon < -180 || c.Lon > 180 || c.Lat < -90 || c.Lat > 90 {
				t.Fatalf("origin %v: node %s at %v, not a WGS84 position", o, net.Nodes[i].ID, c)
			}
		}
		for _, l := range net.Links {
			if l.Kind != network.Pipe {
				continue
			}
			h := haversine(l.Geometry[0], l.Geometry[1])
			if d := math.Abs(h - l.Length); d > 1e-3*l.Length+0.01 {
				t.Errorf("origin %v: pipe %s haversine %.3f m, stored %.3f m (tolerance 0.1%% + 1 cm)", o, l.ID, h, l.Length)
			}
		}
	}
}

func TestTownMaterials(t *testing.T) {
	net := mustTown(t, Options{Junctions: 8000, Seed: 5})
	// Year ranges by material (the brief's succession, common practice).
	ranges := map[string][2]int{CastIron: {1930, 1969}, DuctileIron: {1970, 1999}, PVC: {1980, 1999}, PE: {2000, 2020}}
	sumC := map[string]float64{}
	cnt := map[string]int{}
	for _, l := range net.Links {
		if l.Kind != network.Pipe {
			continue
		}
		r, ok := ranges[l.Material]
		if !ok {
			t.Fatalf("pipe %s: material %q unknown", l.ID, l.Material)
		}
		if l.Installed < r[0] || l.Installed > r[1] {
			t.Errorf("pipe %s: %s installed %d, want %d-%d", l.ID, l.Material, l.Installed, r[0], r[1])
		}
		if !strings.HasPrefix(l.Group, l.Material+"-") {
			t.Errorf("pipe %s: group %q does not name material %s", l.ID, l.Group, l.Material)
		}
		sumC[l.Material] += l.Roughness
		cnt[l.Material]++
	}
	for m := range ranges {
		if cnt[m] == 0 {
			t.Errorf("no %s pipes in an 8000-junction town", m)
		}
	}
	// Old unlined cast iron is rougher than plastics (C tables, e.g.
	// Walski 1984; common practice).
	ci, pvc := sumC[CastIron]/float64(cnt[CastIron]), sumC[PVC]/float64(cnt[PVC])
	if ci > 100 || pvc < 130 {
		t.Errorf("mean C cast iron %.1f (want ≤100), PVC %.1f (want ≥130)", ci, pvc)
	}
}

func TestTownTerrainAndDemand(t *testing.T) {
	net := mustTown(t, Options{Junctions: 3000, Seed: 9, Zones: 4, Tank: true})
	head := math.Inf(-1)
	for i := range net.Nodes {
		if nd := &net.Nodes[i]; nd.IsFixedHead() {
			head = max(head, nd.FixedHead())
		}
	}
	for i := range net.Nodes {
		nd := &net.Nodes[i]
		if nd.Kind != network.Junction {
			continue
		}
		if nd.Elevation < 10 || nd.Elevation > 80 {
			t.Errorf("%s: elevation %.2f m, want 10-80 m", nd.ID, nd.Elevation)
		}
		if p := head - nd.Elevation; p < 20 || p > 80 {
			t.Errorf("%s: static pressure %.1f m, want 20-80 m", nd.ID, p)
		}
		if nd.Demand < 0.01 || nd.Demand > 0.5 {
			t.Errorf("%s: base demand %g L/s, want 0.01-0.5", nd.ID, nd.Demand)
		}
		if _, ok := net.Patterns[nd.Pattern]; !ok {
			t.Errorf("%s: pattern %q not in the network's patterns", nd.ID, nd.Pattern)
		}
	}
	// Smooth terrain: neighbours along a pipe differ by little (a 45 m
	// span over kilometres cannot rise more than a few m in 150 m).
	for _, l := range net.Links {
		a, b := &net.Nodes[l.From], &net.Nodes[l.To]
		if a.Kind == network.Junction && b.Kind == network.Junction {
			if d := math.Abs(a.Elevation - b.Elevation); d > 0.06*l.Length {
				t.Errorf("pipe %s: elevation step %.2f m over %.0f m, want a smooth terrain (≤6%%)", l.ID, d, l.Length)
			}
		}
	}
	zones := net.Zones()
	if len(zones) != 4 {
		t.Errorf("zones %v, want 4", zones)
	}
	per := map[string]int{}
	for i := range net.Nodes {
		per[net.Nodes[i].Zone]++
	}
	for _, z := range zones {
		if per[z] < 3000/4/4 {
			t.Errorf("zone %s has %d nodes, want a fair share of 3000 over 4 zones", z, per[z])
		}
	}
	if countKind(net, network.Tank) != 1 {
		t.Errorf("Tank option: %d tanks, want 1", countKind(net, network.Tank))
	}
}

// TestTownManyZones asks for the most zones allowed and checks each is
// present (a zone with no junction would be a silent loss).
func TestTownManyZones(t *testing.T) {
	for _, c := range []struct{ n, k int }{{20, 5}, {100, 25}, {1000, 250}, {5000, 12}} {
		net := mustTown(t, Options{Junctions: c.n, Seed: 5, Zones: c.k})
		if got := len(net.Zones()); got != c.k {
			t.Errorf("Junctions %d Zones %d: %d zones present", c.n, c.k, got)
		}
	}
}

func TestTownDarcy(t *testing.T) {
	net := mustTown(t, Options{Junctions: 500, Seed: 3, Headloss: network.DarcyWeisbach})
	if net.Headloss != network.DarcyWeisbach {
		t.Fatalf("Headloss %v, want darcy-weisbach", net.Headloss)
	}
	for _, l := range net.Links {
		// Absolute roughness of water mains lies between smooth plastic
		// (about 0.0015 mm) and old tuberculated cast iron (a few mm)
		// (Moody 1944; Colebrook & White 1937; common practice).
		if l.Kind == network.Pipe && (l.Roughness < 0.001 || l.Roughness > 5) {
			t.Errorf("pipe %s (%s, %d): roughness %g mm, want 0.001-5 mm", l.ID, l.Material, l.Installed, l.Roughness)
		}
	}
}

func TestTownBadOptions(t *testing.T) {
	for _, c := range []struct {
		o    Options
		want string
	}{
		{Options{}, "Junctions"},
		{Options{Junctions: 3}, "Junctions"},
		{Options{Junctions: 100, Zones: -1}, "Zones"},
		{Options{Junctions: 100, Zones: 26}, "Zones"},
		{Options{Junctions: 100, Sources: -2}, "Sources"},
		{Options{Junctions: 100, Sources: 500}, "Sources"},
		{Options{Junctions: 100, Headloss: 9}, "Headloss"},
		{Options{Junctions: 100, Origin: network.Point{Lon: 10, Lat: 89}}, "Origin"},
		{Options{Junctions: 100000, Origin: network.Point{Lon: 179.9, Lat: 10}}, "Origin"},
	} {
		_, err := Town(c.o)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("Town(%+v): error %v, want one naming %s", c.o, err, c.want)
		}
	}
}

func TestPatterns(t *testing.T) {
	p := Patterns()
	for _, name := range []string{Residential, Commercial} {
		v := p[name]
		if len(v) != 24 {
			t.Fatalf("%s: %d multipliers, want 24 hourly", name, len(v))
		}
		var s float64
		for _, x := range v {
			s += x
		}
		if math.Abs(s/24-1) > 1e-12 {
			t.Errorf("%s: mean %.15f, want 1 (base demand is the daily mean)", name, s/24)
		}
	}
	r := p[Residential]
	night := math.Min(math.Min(r[2], r[3]), r[4])
	// Residential night minimum of 0.3-0.4 × mean and two daily peaks
	// (common practice for metered residential areas, from memory).
	if night < 0.3 || night > 0.4 {
		t.Errorf("residential night minimum %.3f, want 0.3-0.4", night)
	}
	morning := math.Max(math.Max(r[6], r[7]), r[8])
	evening := math.Max(math.Max(r[18], r[19]), r[20])
	if morning < 1.4 || evening < 1.3 || r[13] > morning || r[13] > evening {
		t.Errorf("residential peaks morning %.2f evening %.2f midday %.2f: want two peaks above 1.3", morning, evening, r[13])
	}
	if h := PeakHour(); h < 6 || h > 9 {
		t.Errorf("PeakHour %d, want the morning peak", h)
	}
}

func BenchmarkTown(b *testing.B) {
	for _, n := range []struct {
		name string
		n    int
	}{{"1k", 1000}, {"10k", 10000}, {"100k", 100000}} {
		b.Run(n.name, func(b *testing.B) {
			for b.Loop() {
				if _, err := Town(Options{Junctions: n.n, Seed: 1, Zones: 4}); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
