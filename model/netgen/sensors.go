package netgen

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"plumbline/model/network"
	"plumbline/model/telemetry"
	"plumbline/model/units"
)

// Boundary lists the open links that cross one zone's boundary, as link
// indices into Network.Links.
type Boundary struct {
	// Inlets carry water into the zone: the link's To end is a junction
	// of the zone and its From end is not (a reservoir or tank, or a
	// junction of another zone or of none).
	Inlets []int
	// Outlets carry water out: From in the zone, To not.
	Outlets []int
}

// ZoneBoundaries returns the boundary of every zone named by a junction.
// A link's From→To direction is taken as its direction of flow, which
// holds for the demo town's inlet mains, valves and rising main; closed
// links are left out, since a shut boundary valve passes no water.
func ZoneBoundaries(net *network.Network) map[string]Boundary {
	out := map[string]Boundary{}
	in := func(i int, z string) bool {
		nd := &net.Nodes[i]
		return nd.Kind == network.Junction && nd.Zone == z
	}
	for _, z := range net.Zones() {
		var b Boundary
		for k := range net.Links {
			l := &net.Links[k]
			if l.Status == network.Closed {
				continue
			}
			switch f, t := in(l.From, z), in(l.To, z); {
			case t && !f:
				b.Inlets = append(b.Inlets, k)
			case f && !t:
				b.Outlets = append(b.Outlets, k)
			}
		}
		out[z] = b
	}
	return out
}

// Instrument accuracies (one standard deviation) of common practice:
// pressure loggers ±0.02 bar, station pressure transmitters ±0.01 bar,
// electromagnetic flow meters about 0.5 % of reading (1 % allowed here for
// an installed meter), tank level transducers ±1 cm (from memory of
// typical data sheets; no single source).
const (
	loggerAccuracyBar  = 0.02
	stationAccuracyBar = 0.01
	flowAccuracyShare  = 0.01
	levelAccuracyM     = 0.01
	// pressureMaxM bounds plausible pressure readings (m): 10 bar.
	pressureMaxM = 100
)

// DemoSensors returns the instruments of the demo town (or of any
// network with zones, tanks and pumps laid out like it), in a stable
// order:
//
//   - per zone, a flow meter on each inlet link, "F-in-<zone>" (m3/h);
//   - per zone, 6-10 pressure loggers "P-<zone>-01" ... (bar), the first
//     at the critical point (highest ground), the second at the far end
//     (greatest pipe distance from the inlet), the rest by farthest-point
//     sampling on pipe and straight-line distance;
//   - per tank "T-x", its level "L-x" (m);
//   - per pump "PS-x", its flow "F-pump-x" (L/s) and its discharge
//     pressure "P-pump-x" (bar) at its To node.
//
// Topics are "quillmere/<zone>/<sensor id>". Flow meter accuracies are 1 %
// of the mean flow the meter sees at base demand.
func DemoSensors(net *network.Network) []telemetry.Sensor {
	bar, _ := units.Lookup(telemetry.Pressure, "bar")
	m3h, _ := units.Lookup(telemetry.Flow, "m3/h")
	topic := func(zone, id string) string { return DemoTopicRoot + "/" + zone + "/" + id }
	var out []telemetry.Sensor
	bounds := ZoneBoundaries(net)
	for _, z := range net.Zones() {
		for i, k := range bounds[z].Inlets {
			id := "F-in-" + z
			if i > 0 {
				id = fmt.Sprintf("F-in-%s-%d", z, i+1)
			}
			mean := downstreamDemand(net, k)
			out = append(out, telemetry.Sensor{
				ID: id, Quantity: telemetry.Flow, At: net.Links[k].ID, Topic: topic(z, id),
				Unit: m3h.Symbol, Accuracy: sig2(flowAccuracyShare * m3h.FromCanonical(mean)),
				Zone: z, Min: -flowMargin(mean), Max: math.Ceil(4 * mean),
			})
		}
		for i, n := range loggerSites(net, z, bounds[z]) {
			id := fmt.Sprintf("P-%s-%02d", z, i+1)
			out = append(out, telemetry.Sensor{
				ID: id, Quantity: telemetry.Pressure, At: net.Nodes[n].ID, Topic: topic(z, id),
				Unit: bar.Symbol, Accuracy: loggerAccuracyBar, Zone: z, Min: 0, Max: pressureMaxM,
			})
		}
	}
	for i := range net.Nodes {
		nd := &net.Nodes[i]
		if nd.Kind != network.Tank {
			continue
		}
		id := "L-" + strings.TrimPrefix(nd.ID, "T-")
		s := telemetry.Sensor{ID: id, Quantity: telemetry.Level, At: nd.ID, Topic: topic(nd.Zone, id),
			Unit: "m", Accuracy: levelAccuracyM, Zone: nd.Zone}
		if !math.IsInf(nd.MaxLevel, 0) && nd.MaxLevel > 0 {
			s.Max = nd.MaxLevel
		}
		out = append(out, s)
	}
	for k := range net.Links {
		l := &net.Links[k]
		if l.Kind != network.Pump {
			continue
		}
		name := strings.TrimPrefix(l.ID, "PS-")
		zone := net.Nodes[l.From].Zone
		mean := downstreamDemand(net, k)
		fid, pid := "F-pump-"+name, "P-pump-"+name
		out = append(out,
			telemetry.Sensor{ID: fid, Quantity: telemetry.Flow, At: l.ID, Topic: topic(zone, fid),
				Unit: "L/s", Accuracy: sig2(flowAccuracyShare * mean), Zone: zone, Min: -flowMargin(mean), Max: math.Ceil(4 * mean)},
			telemetry.Sensor{ID: pid, Quantity: telemetry.Pressure, At: net.Nodes[l.To].ID, Topic: topic(zone, pid),
				Unit: bar.Symbol, Accuracy: stationAccuracyBar, Zone: zone, Min: 0, Max: pressureMaxM},
		)
	}
	return out
}

// sig2 rounds a positive accuracy to two significant figures, at least
// 0.001.
// flowMargin is how far below zero a flow reading may fall and still be
// plausible (L/s): a stopped pump's meter reads its noise around zero, so
// a bound at 0 would reject half of its readings. Five times the meter's
// accuracy, our choice.
func flowMargin(mean float64) float64 {
	return math.Ceil(5*flowAccuracyShare*mean*100) / 100
}

func sig2(v float64) float64 {
	if v <= 0.001 {
		return 0.001
	}
	r, _ := strconv.ParseFloat(strconv.FormatFloat(v, 'g', 2, 64), 64)
	return r
}

// downstreamDemand returns the base demand (L/s) of every junction that
// water passing link k can reach: a search from the link's To end over
// open links, never back over k and never into a reservoir. Over a day a
// meter sees this on average (a tank only buffers it).
func downstreamDemand(net *network.Network, k int) float64 {
	adj := make([][]int, len(net.Nodes))
	for j := range net.Links {
		l := &net.Links[j]
		if j == k || l.Status == network.Closed {
			continue
		}
		adj[l.From] = append(adj[l.From], j)
		adj[l.To] = append(adj[l.To], j)
	}
	seen := make([]bool, len(net.Nodes))
	start := net.Links[k].To
	seen[start] = true
	queue := []int{start}
	var sum float64
	for len(queue) > 0 {
		u := queue[0]
		queue = queue[1:]
		nd := &net.Nodes[u]
		if nd.Kind == network.Reservoir {
			continue
		}
		sum += nd.Demand
		for _, j := range adj[u] {
			l := &net.Links[j]
			v := l.From
			if v == u {
				v = l.To
			}
			if !seen[v] {
				seen[v] = true
				queue = append(queue, v)
			}
		}
	}
	return sum
}

// loggerSites picks the pressure logger junctions of zone z: the
// critical point (highest ground), the far end (greatest pipe distance
// from the first inlet), then farthest-point sampling within the zone
// on the geometric mean of pipe and straight-line distance, 6 + n/50 sites for n candidate junctions, at most 10
// (and at most n). Junctions at pumps and valves are left to station
// instruments.
func loggerSites(net *network.Network, z string, b Boundary) []int {
	cand := make([]bool, len(net.Nodes))
	var cands []int
	for i := range net.Nodes {
		if nd := &net.Nodes[i]; nd.Kind == network.Junction && nd.Zone == z {
			cand[i] = true
		}
	}
	adj := make([][]int, len(net.Nodes))
	for k := range net.Links {
		l := &net.Links[k]
		if l.Kind != network.Pipe {
			cand[l.From], cand[l.To] = false, false
		}
		inZone := func(i int) bool { return net.Nodes[i].Kind == network.Junction && net.Nodes[i].Zone == z }
		if l.Kind == network.Pipe && l.Status == network.Open && inZone(l.From) && inZone(l.To) {
			adj[l.From] = append(adj[l.From], k)
			adj[l.To] = append(adj[l.To], k)
		}
	}
	for i, c := range cand {
		if c {
			cands = append(cands, i)
		}
	}
	if len(cands) == 0 {
		return nil
	}
	want := min(10, 6+len(cands)/50, len(cands))

	// Spread is measured as the geometric mean of pipe distance and
	// straight-line distance: pipe distance alone would put two loggers
	// at the blind ends of neighbouring streets, a few metres apart on
	// the map but far apart along the pipes.
	dist := func(from int) []float64 {
		d := pipeDistances(net, adj, from)
		for i := range d {
			if !math.IsInf(d[i], 0) {
				d[i] = math.Sqrt(d[i] * sphereLength(net.Nodes[from].Coord, net.Nodes[i].Coord))
			}
		}
		return d
	}
	crit := cands[0]
	for _, i := range cands {
		if net.Nodes[i].Elevation > net.Nodes[crit].Elevation {
			crit = i
		}
	}
	sites := []int{crit}
	minD := dist(crit)
	if len(b.Inlets) > 0 && len(sites) < want {
		// The far end: greatest pipe distance from the inlet.
		d := pipeDistances(net, adj, net.Links[b.Inlets[0]].To)
		farEnd := -1
		for _, i := range cands {
			if !math.IsInf(d[i], 0) && i != crit && (farEnd < 0 || d[i] > d[farEnd]) {
				farEnd = i
			}
		}
		if farEnd >= 0 {
			sites = append(sites, farEnd)
			for i, v := range dist(farEnd) {
				minD[i] = min(minD[i], v)
			}
		}
	}
	for len(sites) < want {
		next := -1
		for _, i := range cands {
			if minD[i] > 0 && (next < 0 || minD[i] > minD[next]) {
				next = i
			}
		}
		if next < 0 {
			break
		}
		sites = append(sites, next)
		for i, v := range dist(next) {
			minD[i] = min(minD[i], v)
		}
	}
	return sites
}

// pipeDistances returns the shortest pipe distance (m) from node `from`
// to every node over the adjacency (Dijkstra); +Inf where unreached.
func pipeDistances(net *network.Network, adj [][]int, from int) []float64 {
	d := make([]float64, len(net.Nodes))
	for i := range d {
		d[i] = math.Inf(1)
	}
	d[from] = 0
	h := heap{}
	h.push(0, int32(from))
	for h.len() > 0 {
		du, u := h.pop()
		if du > d[u] {
			continue
		}
		for _, k := range adj[u] {
			l := &net.Links[k]
			v := l.From
			if v == int(u) {
				v = l.To
			}
			if nd := du + l.Length; nd < d[v] {
				d[v] = nd
				h.push(nd, int32(v))
			}
		}
	}
	return d
}

// ZoneMeters says which flow sensors balance one zone: the zone's
// consumption is the sum of its inlet flows less the sum of its outlet
// flows (each sensor positive in its link's From→To direction, which is
// into the zone for inlets and out of it for outlets).
type ZoneMeters struct {
	Zone    string
	Inlets  []string // sensor ids
	Outlets []string // sensor ids
	// NightUseLps is the zone's legitimate night consumption: its base
	// demand times each junction's smallest pattern multiplier (L/s).
	NightUseLps float64
}

// DemoZones returns the flow sensors that balance each zone, in zone
// order, for the sensors of DemoSensors (or any list with flow sensors on
// the boundary links). A boundary link without a sensor of its own is
// matched to a sensor on a link in series with it (through junctions of
// no demand joining exactly two open links), as a rising main is metered
// at its pumping station. A boundary link no sensor measures is left
// out; compare len(Inlets) with ZoneBoundaries to detect that.
func DemoZones(net *network.Network, sensors []telemetry.Sensor) []ZoneMeters {
	onLink := map[string]string{}
	for _, s := range sensors {
		if s.Quantity == telemetry.Flow {
			if _, dup := onLink[s.At]; !dup {
				onLink[s.At] = s.ID
			}
		}
	}
	open := make([][]int, len(net.Nodes))
	for k := range net.Links {
		if l := &net.Links[k]; l.Status != network.Closed {
			open[l.From] = append(open[l.From], k)
			open[l.To] = append(open[l.To], k)
		}
	}
	// meter finds the sensor of link k or of a link in series with it.
	meter := func(k int) (string, bool) {
		seen := map[int]bool{}
		queue := []int{k}
		for len(queue) > 0 {
			j := queue[0]
			queue = queue[1:]
			if seen[j] {
				continue
			}
			seen[j] = true
			if id, ok := onLink[net.Links[j].ID]; ok {
				return id, true
			}
			for _, end := range []int{net.Links[j].From, net.Links[j].To} {
				nd := &net.Nodes[end]
				if nd.Kind == network.Junction && nd.Demand == 0 && len(open[end]) == 2 {
					for _, o := range open[end] {
						queue = append(queue, o)
					}
				}
			}
		}
		return "", false
	}
	bounds := ZoneBoundaries(net)
	var out []ZoneMeters
	for _, z := range net.Zones() {
		zm := ZoneMeters{Zone: z}
		for _, k := range bounds[z].Inlets {
			if id, ok := meter(k); ok {
				zm.Inlets = append(zm.Inlets, id)
			}
		}
		for _, k := range bounds[z].Outlets {
			if id, ok := meter(k); ok {
				zm.Outlets = append(zm.Outlets, id)
			}
		}
		for i := range net.Nodes {
			nd := &net.Nodes[i]
			if nd.Kind != network.Junction || nd.Zone != z || nd.Demand == 0 {
				continue
			}
			m := 1.0
			if p := net.Patterns[nd.Pattern]; len(p) > 0 {
				m = p[0]
				for _, v := range p {
					m = min(m, v)
				}
			}
			zm.NightUseLps += nd.Demand * m
		}
		zm.NightUseLps = math.Round(zm.NightUseLps*100) / 100
		out = append(out, zm)
	}
	return out
}
