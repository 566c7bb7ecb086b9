package netgen

import (
	"math"

	"plumbline/model/network"
)

// The demo town: names and places, all invented.
const (
	// DemoTownName is the demo town's name, and DemoTopicRoot the first
	// level of its MQTT topics.
	DemoTownName  = "Quillmere"
	DemoTopicRoot = "quillmere"
	// Zone ids of the demo town.
	ZoneCentral = "central"
	ZoneHigh    = "high"
	ZoneLow     = "low"
)

// Ids of the demo town's named features.
const (
	DemoReservoir = "R-works"    // treatment works clear-water reservoir
	DemoTank      = "T-hill"     // hill tank feeding the high zone
	DemoPump      = "PS-hill"    // pumping station lifting from central to the tank
	DemoPumpOut   = "J-pump-out" // pump discharge node
	DemoPRV       = "V-low"      // pressure-reducing valve into the low zone
	DemoWorksMain = "P-works"    // central zone inlet main
	DemoTankMain  = "P-hill-out" // tank outlet main, high zone inlet
	DemoRising    = "P-rising"   // rising main from the pumping station to the tank
)

// demoOrigin is the south-west corner of the demo town: open country,
// standing for no real place.
var demoOrigin = network.Point{Lon: 126.3128, Lat: -24.8645}

// demoSeed fixes the demo town's random stream.
const demoSeed = 0x5175696c6c6d6572 // "Quillmer"

// demoTerrain is the demo town's ground: a valley floor in the south
// (low zone, about 10-20 m), a terrace in the middle (central, about
// 25-45 m) and a hill in the north (high zone and tank, about 50-75 m),
// joined by smooth logistic slopes with gentle ripples.
func demoTerrain(p vec) float64 {
	sig := func(x float64) float64 { return 1 / (1 + math.Exp(-x)) }
	return 9 + 0.004*p.y +
		20*sig((p.y-880)/60) +
		24*sig((p.y-2065)/60) +
		1.2*math.Sin(2*math.Pi*p.x/700+0.4) +
		1.0*math.Sin(2*math.Pi*(p.x+p.y)/1100+1.3)
}

// DemoTown returns the demo town Quillmere (see the package doc): about
// 400 junctions in the zones "central", "high" and "low"; a treatment
// works reservoir feeding central by gravity through one main; a
// pumping station lifting from central to a hill tank that feeds high
// through one main; a pressure-reducing valve feeding low. Other
// crossings between zones are closed boundary pipes. The result is the
// same on every call.
func DemoTown() (*network.Network, error) {
	b := newBuilder(demoSeed, demoOrigin, 420, 560)
	const h = 85.0
	central := b.addGrid(gridSpec{junctions: 200, origin: vec{0, 1000}, aspect: 1.4, spacing: h,
		mainEvery: 4, trunkEvery: 3, firstID: 1001, zone: ZoneCentral, elevation: demoTerrain})
	nc := len(b.nodes)
	high := b.addGrid(gridSpec{junctions: 100, origin: vec{300, 2200}, aspect: 1, spacing: h,
		mainEvery: 3, trunkEvery: 0, firstID: 2001, zone: ZoneHigh, elevation: demoTerrain})
	nh := len(b.nodes)
	low := b.addGrid(gridSpec{junctions: 100, origin: vec{350, 0}, aspect: 1, spacing: h,
		mainEvery: 3, trunkEvery: 0, firstID: 3001, zone: ZoneLow, elevation: demoTerrain})
	nl := len(b.nodes)

	cc := vec{8 * h, 1000 + 5.5*h}
	b.assignDemands(0, nc, cc, 600)
	far := vec{-1e6, -1e6}
	b.assignDemands(nc, nh, far, 1)
	b.assignDemands(nh, nl, far, 1)

	// Treatment works west of central, by gravity into its south-west
	// trunk crossing.
	worksAt := nearestIn(b.xy, central.intersections(), vec{0, 1300})
	works := b.addNode(network.Node{ID: DemoReservoir, Kind: network.Reservoir, Zone: ZoneCentral}, vec{-650, 1350})
	wm := b.addLink(network.Link{ID: DemoWorksMain, Kind: network.Pipe}, works, worksAt, classTrunk)

	// Hill tank north of the high zone, fed by its own outlet main.
	tankXY := vec{300 + 4.5*h, 3120}
	tank := b.addNode(network.Node{ID: DemoTank, Kind: network.Tank, Zone: ZoneHigh}, tankXY)
	highAt := nearestIn(b.xy, high.intersections(), tankXY)
	tm := b.addLink(network.Link{ID: DemoTankMain, Kind: network.Pipe}, tank, highAt, classMain)

	// Pumping station at central's north-east, rising main to the tank.
	suction := nearestIn(b.xy, central.intersections(), vec{16 * h, 1000 + 12*h})
	out := b.addNode(network.Node{ID: DemoPumpOut, Kind: network.Junction, Zone: ZoneCentral},
		b.xy[suction].add(vec{25, 30}))
	b.nodes[out].Elevation = roundTo(demoTerrain(b.xy[out]), 0.01)
	pump := b.addLink(network.Link{ID: DemoPump, Kind: network.Pump, Speed: 1}, suction, out, classFixed)
	rising := b.addLink(network.Link{ID: DemoRising, Kind: network.Pipe}, out, tank, classFixed)

	// Pressure-reducing valve at the low zone's north edge, fed by a
	// main from central's south edge.
	lowAt := nearestIn(b.xy, rowOf(low, low.rows-1), vec{350 + 4.5*h, 0})
	feedAt := nearestIn(b.xy, rowOf(central, 0), b.xy[lowAt])
	prvIn := b.addNode(network.Node{ID: "J-prv-in", Kind: network.Junction, Zone: ZoneCentral},
		b.xy[lowAt].add(vec{0, 8}))
	b.nodes[prvIn].Elevation = roundTo(demoTerrain(b.xy[prvIn]), 0.01)
	b.addLink(network.Link{ID: "P-prv-feed", Kind: network.Pipe}, feedAt, prvIn, classMain)
	prv := b.addLink(network.Link{ID: DemoPRV, Kind: network.Valve, Valve: network.PressureReducing, HasSetting: true},
		prvIn, lowAt, classValve)

	// Boundary mains between zones, their valves shut (closed pipes).
	bound := func(id string, a, z int) {
		b.addLink(network.Link{ID: id, Kind: network.Pipe, Status: network.Closed}, a, z, classMain)
	}
	for i, x := range []float64{350 + 1*h, 350 + 8*h} {
		a := nearestIn(b.xy, rowOf(central, 0), vec{x, 1000})
		z := nearestIn(b.xy, rowOf(low, low.rows-1), vec{x, 1000})
		bound([]string{"P-bound-1", "P-bound-2"}[i], a, z)
	}
	bound("P-bound-3", nearestIn(b.xy, rowOf(central, central.rows-1), vec{500, 2200}),
		nearestIn(b.xy, rowOf(high, 0), vec{500, 2200}))

	// Heads: static pressure 28 m at the highest ground of central (by
	// the works) and of low (by the valve), 25 m at the highest ground
	// of high (by the tank); common practice for a 20 m minimum service
	// pressure with a margin for peak losses.
	maxElev := func(from, to int) float64 {
		m := math.Inf(-1)
		for k := from; k < to; k++ {
			m = max(m, b.nodes[k].Elevation)
		}
		return m
	}
	hr := roundTo(maxElev(0, nc)+28, 0.1)
	ht := roundTo(maxElev(nc, nh)+25, 0.1)
	lowHGL := maxElev(nh, nl) + 28
	b.links[prv].Setting = roundTo(lowHGL-b.nodes[lowAt].Elevation, 0.1)

	b.nodes[works].Head, b.nodes[works].Elevation = hr, hr
	tk := &b.nodes[tank]
	tk.Level, tk.MinLevel, tk.MaxLevel, tk.TankDiameter = 3.5, 0.5, 6, 22
	tk.Elevation = roundTo(ht-tk.Level, 0.01)

	b.assignYears(cc, 2200)
	b.links[wm].Installed = 1962
	b.links[tm].Installed = 1988
	b.links[rising].Installed = 1988
	cNoise := make([]float64, len(b.links))
	for k := range cNoise {
		cNoise[k] = 6 * (b.rng.Float64() - 0.5)
	}

	// Pump and rising main for 1.4 × the high zone's mean demand, so the
	// tank refills over a day (common practice).
	var highDemand float64
	for k := nc; k < nh; k++ {
		highDemand += b.nodes[k].Demand
	}
	qd := roundTo(1.4*highDemand, 0.1)
	rm := &b.links[rising]
	rm.Diameter = sizeUp(math.Sqrt(4*qd/1000/(math.Pi*designVelocity)) * 1000)
	rm.Diameter = max(rm.Diameter, 200)

	b.design([]int{works, tank}, []float64{hr, ht}, maxMultiplier()*1.1, cNoise)
	b.setMaterial(rising, cNoise)

	// Pump head: lift from about the works head (less a few m of loss)
	// to the tank, plus the rising main's loss, with 2 m to spare. The
	// three-point curve H = a - b·Q^c has shut-off head 1.3 × design
	// and 0.5 × design head at 1.7 × design flow (a typical
	// centrifugal shape; common practice).
	hd := ht - (hr - 3) + hazenLoss(rm.Length, qd, rm.Diameter, rm.Roughness) + 2
	hd = roundTo(hd, 0.1)
	b.links[pump].Curve = [][2]float64{{0, roundTo(1.3*hd, 0.1)}, {qd, hd}, {roundTo(1.7*qd, 0.1), roundTo(0.5*hd, 0.1)}}

	net := network.New(b.nodes, b.links)
	net.Patterns = Patterns()
	return net, nil
}

// nearestIn returns the node of cands nearest p (ties: the first).
func nearestIn(xy []vec, cands []int, p vec) int {
	best, bd := cands[0], math.Inf(1)
	for _, k := range cands {
		if d := xy[k].dist2(p); d < bd {
			best, bd = k, d
		}
	}
	return best
}

// rowOf returns the nodes of lattice row i.
func rowOf(g *grid, i int) []int {
	var out []int
	for j := range g.cols {
		if k := g.at(i, j); k >= 0 {
			out = append(out, k)
		}
	}
	return out
}
