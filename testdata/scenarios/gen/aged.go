package main

import (
	"fmt"
	"math"
	"sort"
	"time"

	"plumbline/daemon/config"
	"plumbline/model/calib"
	"plumbline/model/demand"
	"plumbline/model/hydraulic"
	"plumbline/model/network"
	"plumbline/model/sim"
	"plumbline/model/telemetry"
)

// The aged condition: the realistic condition's wrong records (the same
// sim.Perturb draws), plus the network's oldest pipe group far rougher
// than recorded and one link shut in truth but open in the records. The
// operator's model keeps the nominal values.
const (
	// agedFactor multiplies the oldest group's C. Unlined cast iron laid
	// in the 1930s is commonly found at C 40-60 after tuberculation,
	// against 80-90 in records that carry the roughness of its middle
	// age (from memory of the usual C tables by pipe age); 0.6 takes a
	// recorded 83 to 50.
	agedFactor = 0.6
	// agedMinShare is the least share of the network's pipe length a
	// group must hold to be the aged one: a few stray pipes would not be
	// "old cast iron" but noise (our choice).
	agedMinShare = 0.05
	// shutLow and shutHigh bound the effect of the shut link: the largest
	// change of a logger's pressure at the day's peak demand, m. Below
	// 1 m (five times a logger's 0.2 m accuracy) nobody could see it; above
	// 3 m customers would complain and the valve would be found (our
	// choice, as in model/calib's closed-valve test).
	shutLow, shutHigh = 1.0, 3.0
)

// agedSpec is what the aged condition changes, for the scenario comments.
type agedSpec struct {
	group  string  // aged calibration group
	factor float64 // its C factor
	shut   string  // link shut in truth ("" none)
	effect float64 // the shut link's largest logger pressure change, m
}

// oldestGroup returns the calibration group (calib.GroupOf) whose pipes
// were laid earliest on average (length-weighted installation year),
// among the groups with at least agedMinShare of the pipe length whose
// pipes carry an installation year. "" when no group qualifies.
func oldestGroup(net *network.Network) string {
	type acc struct{ length, yearLen float64 }
	groups := map[string]*acc{}
	total := 0.0
	for l := range net.Links {
		lk := &net.Links[l]
		if lk.Kind != network.Pipe || lk.Roughness <= 0 {
			continue
		}
		total += lk.Length
		if lk.Installed <= 0 {
			continue
		}
		g := calib.GroupOf(lk)
		a := groups[g]
		if a == nil {
			a = &acc{}
			groups[g] = a
		}
		a.length += lk.Length
		a.yearLen += float64(lk.Installed) * lk.Length
	}
	names := make([]string, 0, len(groups))
	for g := range groups {
		names = append(names, g)
	}
	sort.Strings(names)
	best, bestYear := "", math.Inf(1)
	for _, g := range names {
		a := groups[g]
		if a.length < agedMinShare*total {
			continue
		}
		if y := a.yearLen / a.length; y < bestYear {
			best, bestYear = g, y
		}
	}
	return best
}

// agedMismatch returns the aged condition's mismatch of target t: the
// realistic one, the oldest group aged, and a link shut chosen by
// shutLink on the aged true network (avoiding the links that events of
// the suite name).
func agedMismatch(net *network.Network, cfg *config.Config, t target, scs []scenario) (sim.Mismatch, agedSpec, error) {
	m := sim.Mismatch{Demand: mismatch, Diameter: mismatch, Roughness: mismatch, Seed: t.perturbSeed}
	spec := agedSpec{group: oldestGroup(net), factor: agedFactor}
	if spec.group != "" {
		g := spec.group
		m.Aged = []sim.Aging{{Name: g, Match: func(l *network.Link) bool { return l.Kind == network.Pipe && calib.GroupOf(l) == g }, Factor: agedFactor}}
	}
	tn, _, err := sim.Perturb(net, m)
	if err != nil {
		return m, spec, fmt.Errorf("%s: aged: %w", t.network, err)
	}
	avoid := map[string]bool{}
	for _, s := range scs {
		for _, e := range s.events {
			avoid[e.at] = true
		}
	}
	spec.shut, spec.effect, err = shutLink(tn, cfg.Sensors, avoid)
	if err != nil {
		return m, spec, fmt.Errorf("%s: aged: %w", t.network, err)
	}
	if spec.shut != "" {
		m.Shut = []string{spec.shut}
	}
	return m, spec, nil
}

// shutLink picks the link left shut: an open pipe between two junctions
// of one zone whose closure cuts no consumer off from every reservoir
// and tank, and moves some pressure logger by shutLow to shutHigh metres
// at the day's peak demand (the hour of the largest total base × pattern
// demand on a Monday, UTC). Of those it takes the one of median effect
// (ties by id); without any, the one whose effect is nearest 2 m among
// those of at least half of shutLow; "" when no link qualifies.
func shutLink(net *network.Network, sensors []telemetry.Sensor, avoid map[string]bool) (string, float64, error) {
	s, err := hydraulic.NewSolver(net, hydraulic.Options{})
	if err != nil {
		return "", 0, err
	}
	// The peak hour's demand.
	monday := time.Date(2024, 1, 1, 0, 0, 0, 0, time.UTC)
	var peak []float64
	peakSum := -1.0
	for h := range 24 {
		d := demand.Base(net, monday.Add(time.Duration(h)*time.Hour), nil, nil)
		sum := 0.0
		for i, v := range d {
			if net.Nodes[i].Kind == network.Junction {
				sum += v
			}
		}
		if sum > peakSum {
			peak, peakSum = d, sum
		}
	}
	c := &hydraulic.Conditions{Demand: peak, Status: make([]network.Status, len(net.Links))}
	for l := range net.Links {
		c.Status[l] = net.Links[l].Status
	}
	base, err := s.Solve(c, nil)
	if err != nil {
		return "", 0, fmt.Errorf("shut link: peak-hour solve: %w", err)
	}
	var loggers []int
	for _, sn := range sensors {
		if sn.Quantity != telemetry.Pressure {
			continue
		}
		if i, ok := net.NodeIndex(sn.At); ok && net.Nodes[i].Kind == network.Junction {
			loggers = append(loggers, i)
		}
	}
	type cand struct {
		id     string
		effect float64
	}
	var inRange, measurable []cand
	for l := range net.Links {
		lk := &net.Links[l]
		a, b := &net.Nodes[lk.From], &net.Nodes[lk.To]
		if lk.Kind != network.Pipe || lk.Status == network.Closed || avoid[lk.ID] ||
			a.Kind != network.Junction || b.Kind != network.Junction || a.Zone == "" || a.Zone != b.Zone {
			continue
		}
		if !allSupplied(net, l) {
			continue
		}
		c.Status[l] = network.Closed
		sol, err := s.Solve(c, base)
		c.Status[l] = lk.Status
		if err != nil {
			continue
		}
		eff := 0.0
		for _, i := range loggers {
			eff = math.Max(eff, math.Abs(sol.Pressure[i]-base.Pressure[i]))
		}
		switch {
		case eff >= shutLow && eff <= shutHigh:
			inRange = append(inRange, cand{lk.ID, eff})
		case eff >= shutLow/2:
			measurable = append(measurable, cand{lk.ID, eff})
		}
	}
	if len(inRange) > 0 {
		sort.Slice(inRange, func(i, j int) bool {
			if inRange[i].effect != inRange[j].effect {
				return inRange[i].effect < inRange[j].effect
			}
			return inRange[i].id < inRange[j].id
		})
		p := inRange[len(inRange)/2]
		return p.id, p.effect, nil
	}
	if len(measurable) == 0 {
		return "", 0, nil
	}
	sort.Slice(measurable, func(i, j int) bool {
		di, dj := math.Abs(measurable[i].effect-2), math.Abs(measurable[j].effect-2)
		if di != dj {
			return di < dj
		}
		return measurable[i].id < measurable[j].id
	})
	return measurable[0].id, measurable[0].effect, nil
}

// allSupplied reports whether, with link shut closed as well, every
// junction with a demand still has a path of open links to a reservoir or
// tank (links taken both ways: the question is connection, not flow).
func allSupplied(net *network.Network, shut int) bool {
	adj := make([][]int, len(net.Nodes))
	for l := range net.Links {
		lk := &net.Links[l]
		if l == shut || lk.Status == network.Closed {
			continue
		}
		adj[lk.From] = append(adj[lk.From], lk.To)
		adj[lk.To] = append(adj[lk.To], lk.From)
	}
	seen := make([]bool, len(net.Nodes))
	var queue []int
	for i := range net.Nodes {
		if k := net.Nodes[i].Kind; k == network.Reservoir || k == network.Tank {
			seen[i] = true
			queue = append(queue, i)
		}
	}
	for len(queue) > 0 {
		n := queue[0]
		queue = queue[1:]
		for _, m := range adj[n] {
			if !seen[m] {
				seen[m] = true
				queue = append(queue, m)
			}
		}
	}
	for i := range net.Nodes {
		if net.Nodes[i].Kind == network.Junction && net.Nodes[i].Demand > 0 && !seen[i] {
			return false
		}
	}
	return true
}
