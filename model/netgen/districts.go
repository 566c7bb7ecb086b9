package netgen

import (
	"errors"
	"fmt"
	"math"

	"plumbline/model/network"
	"plumbline/model/telemetry"
)

// CloseDistricts makes each zone of a generated town a district metered
// area: every pipe between two zones is shut, so a zone is fed through its
// own reservoir main only and its inlet meters balance it. Junctions that
// the shut pipes would cut off (pockets of one zone inside another) join
// the zone they are still piped to. It returns a clone; net is unchanged.
func CloseDistricts(net *network.Network) (*network.Network, error) {
	net = net.Clone()
	orig := make([]network.Status, len(net.Links))
	for k := range net.Links {
		orig[k] = net.Links[k].Status
	}
	junction := func(i int) bool { return net.Nodes[i].Kind == network.Junction }
	for round := 0; ; round++ {
		if round > 50 {
			return nil, errors.New("netgen: close districts: pockets of junctions never joined a fed zone")
		}
		for k := range net.Links {
			l := &net.Links[k]
			l.Status = orig[k]
			if junction(l.From) && junction(l.To) && net.Nodes[l.From].Zone != net.Nodes[l.To].Zone {
				l.Status = network.Closed
			}
		}
		comp := components(net)
		fed := map[int]bool{}
		for i := range net.Nodes {
			if net.Nodes[i].IsFixedHead() {
				fed[comp[i]] = true
			}
		}
		moved, cut := map[int]bool{}, false
		for k := range net.Links {
			l := &net.Links[k]
			if l.Status != network.Closed || orig[k] == network.Closed {
				continue
			}
			a, b := l.From, l.To
			if fed[comp[a]] {
				a, b = b, a
			}
			if fed[comp[a]] || !fed[comp[b]] {
				continue // both fed, or neither: another round
			}
			cut = true
			if moved[comp[a]] {
				continue
			}
			moved[comp[a]] = true
			for i := range net.Nodes {
				if comp[i] == comp[a] {
					net.Nodes[i].Zone = net.Nodes[b].Zone
				}
			}
		}
		for i := range net.Nodes {
			if !fed[comp[i]] {
				cut = true
			}
		}
		if !cut {
			return net, nil
		}
	}
}

// components labels the nodes of net by connected component over open
// links (union-find with path halving).
func components(net *network.Network) []int {
	parent := make([]int, len(net.Nodes))
	for i := range parent {
		parent[i] = i
	}
	find := func(i int) int {
		for parent[i] != i {
			parent[i] = parent[parent[i]]
			i = parent[i]
		}
		return i
	}
	for k := range net.Links {
		if l := &net.Links[k]; l.Status != network.Closed {
			parent[find(l.From)] = find(l.To)
		}
	}
	out := make([]int, len(parent))
	for i := range out {
		out[i] = find(i)
	}
	return out
}

// DistrictSensors places an inlet flow meter on every open link that feeds a
// zone from a reservoir, and perZone pressure loggers in each zone: the
// first at the highest ground (the critical point), the rest by
// farthest-point sampling on straight-line distance, the way loggers are
// spread over a district (common practice, not from a source). Accuracies
// are netgen's: loggers ±0.02 bar, meters 1 % of the zone's base demand.
func DistrictSensors(net *network.Network, perZone int) []telemetry.Sensor {
	var out []telemetry.Sensor
	for _, z := range net.Zones() {
		base := 0.0
		var js []int
		for i := range net.Nodes {
			if n := &net.Nodes[i]; n.Kind == network.Junction && n.Zone == z {
				base += n.Demand
				js = append(js, i)
			}
		}
		for k := range net.Links {
			l := &net.Links[k]
			if l.Status != network.Closed && net.Nodes[l.From].IsFixedHead() && net.Nodes[l.To].Zone == z && net.Nodes[l.To].Kind == network.Junction {
				id := fmt.Sprintf("F-in-%s-%d", z, k)
				out = append(out, telemetry.Sensor{ID: id, Quantity: telemetry.Flow, At: l.ID, Unit: "L/s", Accuracy: math.Max(0.01, 0.01*base), Zone: z})
			}
		}
		for i, n := range spreadSites(net, js, perZone) {
			out = append(out, telemetry.Sensor{ID: fmt.Sprintf("P-%s-%02d", z, i+1), Quantity: telemetry.Pressure, At: net.Nodes[n].ID, Unit: "bar", Accuracy: 0.02, Zone: z})
		}
	}
	return out
}

// spreadSites picks n of the junctions js: the highest first, then each
// time the one farthest from those already picked.
func spreadSites(net *network.Network, js []int, n int) []int {
	if len(js) == 0 {
		return nil
	}
	xy := func(i int) (float64, float64) {
		c := net.Nodes[i].Coord
		return c.Lon * math.Cos(c.Lat*math.Pi/180), c.Lat
	}
	first := js[0]
	for _, j := range js {
		if net.Nodes[j].Elevation > net.Nodes[first].Elevation {
			first = j
		}
	}
	dist := make([]float64, len(js))
	for i := range dist {
		dist[i] = math.Inf(1)
	}
	picked := []int{first}
	for len(picked) < min(n, len(js)) {
		px, py := xy(picked[len(picked)-1])
		best := -1
		for i, j := range js {
			x, y := xy(j)
			dist[i] = math.Min(dist[i], math.Hypot(x-px, y-py))
			if best < 0 || dist[i] > dist[best] {
				best = i
			}
		}
		picked = append(picked, js[best])
	}
	return picked
}
