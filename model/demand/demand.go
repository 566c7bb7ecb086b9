// Package demand computes junction consumption from base demands and
// daily patterns: the one rule that the simulator, the detector and
// calibration share, so that "expected consumption" means the same
// everywhere.
//
// Patterns are lists of multipliers at the network's pattern step,
// anchored at 00:00 in the given location (UTC when nil) and repeating.
// Between two pattern points the multiplier is interpolated linearly. On
// Saturdays and Sundays the pattern "<name>-weekend" is used where the
// network has one.
package demand

import (
	"time"

	"plumbline/model/network"
)

// WeekendSuffix is appended to a pattern name to find its weekend shape.
const WeekendSuffix = "-weekend"

// PatternAt returns the multiplier of the named pattern at time t, read in
// location loc (nil: UTC). An empty or unknown name gives 1.
func PatternAt(net *network.Network, name string, t time.Time, loc *time.Location) float64 {
	if loc == nil {
		loc = time.UTC
	}
	lt := t.In(loc)
	if wd := lt.Weekday(); wd == time.Saturday || wd == time.Sunday {
		if _, ok := net.Patterns[name+WeekendSuffix]; ok {
			name += WeekendSuffix
		}
	}
	p := net.Patterns[name]
	if len(p) == 0 {
		return 1
	}
	step := net.PatternStep
	if step <= 0 {
		step = network.DefaultPatternStep
	}
	y, m, d := lt.Date()
	midnight := time.Date(y, m, d, 0, 0, 0, 0, loc)
	off := lt.Sub(midnight)
	// Days since an arbitrary epoch keep patterns longer than a day in phase.
	days := int64(midnight.Sub(time.Date(2000, 1, 1, 0, 0, 0, 0, loc)).Hours()/24 + 0.5)
	off += time.Duration(days) * 24 * time.Hour
	k := int64(off / step)
	frac := float64(off%step) / float64(step)
	n := int64(len(p))
	a := p[((k%n)+n)%n]
	b := p[(((k+1)%n)+n)%n]
	return a + (b-a)*frac
}

// Base fills dst (one entry per node) with each junction's base demand
// times its pattern at t, and 0 for other nodes. zoneLoc gives the
// location of each zone's clock (nil map or missing zone: UTC). It
// returns dst, allocated if nil.
//
// Each (pattern, zone) pair is looked up once per call. Networks have a
// handful of such pairs and neighbouring junctions mostly share one, so
// the pairs are kept in a short list (the last pair used first) rather
// than hashed per junction: the detector calls Base every model step.
func Base(net *network.Network, t time.Time, zoneLoc map[string]*time.Location, dst []float64) []float64 {
	if dst == nil {
		dst = make([]float64, len(net.Nodes))
	}
	type pair struct {
		pattern, zone string
		mult          float64
	}
	var store [16]pair
	pairs := store[:0]
	var many map[[2]string]float64 // beyond maxPairs pairs
	const maxPairs = 32
	last := -1
	for i := range net.Nodes {
		n := &net.Nodes[i]
		if n.Kind != network.Junction || n.Demand == 0 {
			dst[i] = 0
			continue
		}
		if last >= 0 && pairs[last].pattern == n.Pattern && pairs[last].zone == n.Zone {
			dst[i] = n.Demand * pairs[last].mult
			continue
		}
		last = -1
		for j := range pairs {
			if pairs[j].pattern == n.Pattern && pairs[j].zone == n.Zone {
				last = j
				break
			}
		}
		if last >= 0 {
			dst[i] = n.Demand * pairs[last].mult
			continue
		}
		if len(pairs) == maxPairs {
			k := [2]string{n.Pattern, n.Zone}
			m, ok := many[k]
			if !ok {
				if many == nil {
					many = map[[2]string]float64{}
				}
				m = PatternAt(net, n.Pattern, t, zoneLoc[n.Zone])
				many[k] = m
			}
			dst[i] = n.Demand * m
			continue
		}
		pairs = append(pairs, pair{n.Pattern, n.Zone, PatternAt(net, n.Pattern, t, zoneLoc[n.Zone])})
		last = len(pairs) - 1
		dst[i] = n.Demand * pairs[last].mult
	}
	return dst
}
