package calib

import (
	"fmt"
	"math"
	"sort"
)

// maxMatch bounds the inflow-matched scale of a zone's demand, as the
// detector's does (0..5).
const maxMatch = 5

// balanceMeter is one flow sensor of a zone's balance, oriented: sign
// +1 when its reading counts as inflow.
type balanceMeter struct {
	k    int
	sign float64
}

// knotEstimate is one hour knot of a matched zone's demand multiplier,
// estimated from the matched demand: the mean scale over the fit
// snapshots at that knot, its standard error, and the number of days
// behind it.
type knotEstimate struct {
	mean, se float64
	sd       float64 // the day-to-day spread, relative, pooled over the day type's knots (NaN: one day)
	days     int
}

// resolveBalances finds the meters of each zone's balance among the
// sensors (Problem.Balances); a zone whose list names a sensor that is
// not a flow sensor of the problem is not matched, with a warning.
func (m *model) resolveBalances(p Problem, warn func(string)) {
	if len(p.Balances) == 0 {
		return
	}
	bySensor := map[string]int{}
	for k, si := range m.sens {
		bySensor[si.s.ID] = k
	}
	m.bal = make([][]balanceMeter, len(m.zones))
	m.matched = make([]bool, len(m.zones))
	base := make([]float64, len(m.zones))
	for j, z := range m.zoneOf {
		if z >= 0 {
			base[z] += m.net.Nodes[j].Demand
		}
	}
	for z, name := range m.zones {
		zm, has := p.Balances[name]
		if !has || len(zm.Inlets)+len(zm.Outlets) == 0 || base[z] <= 0 {
			continue
		}
		ok := true
		for _, list := range []struct {
			ids    []string
			outlet bool
		}{{zm.Inlets, false}, {zm.Outlets, true}} {
			for _, id := range list.ids {
				k, found := bySensor[id]
				if !found || m.sens[k].link < 0 || m.sens[k].role != roleObserve {
					warn(fmt.Sprintf("zone %s: balance meter %s is not a usable flow sensor of the problem: the zone's demand stays on its patterns", name, id))
					ok = false
					continue
				}
				// Oriented as model/detect orients a boundary meter.
				l := &m.net.Links[m.sens[k].link]
				from, to := m.net.Nodes[l.From].Zone == name, m.net.Nodes[l.To].Zone == name
				sign := 1.0
				switch {
				case to && !from:
				case from && !to:
					sign = -1
				case list.outlet:
					sign = -1
				}
				m.bal[z] = append(m.bal[z], balanceMeter{k, sign})
			}
		}
		m.matched[z] = ok
	}
}

// matchSnapshot scales the snapshot's demand, zone by zone, to what each
// matched zone's meters measure (inflow less outflow over the patterns'
// demand, within 0..maxMatch) and records the scale in d.zs. For a fit,
// a snapshot with a matched zone's meter unreadable is left out (false),
// and the meters of the balances are taken out of the observations:
// their flow is the zone's consumption now, and a zone fed through one
// meter would match it exactly. A pump's meter stays observed: the pump
// curve and the rising main still decide what the model pumps. For an
// evaluation such a zone stays on its patterns for that snapshot.
func (m *model) matchSnapshot(d *snapData) bool {
	for z := range d.zs {
		d.zs[z] = math.NaN()
	}
	if m.matched == nil {
		return true
	}
	input := map[int]bool{}
	for z, ok := range m.matched {
		if !ok {
			continue
		}
		q := 0.0
		usable := true
		for _, mt := range m.bal[z] {
			if !m.sens[mt.k].pump {
				input[mt.k] = true
			}
			v := d.y[mt.k]
			if math.IsNaN(v) {
				usable = false
				continue
			}
			q += mt.sign * v
		}
		dem := 0.0
		for j, zi := range m.zoneOf {
			if zi == z {
				dem += d.pd[j]
			}
		}
		if !usable || dem <= 0 {
			m.unmatchedN++
			if !m.set.evaluating {
				return false
			}
			continue
		}
		f := math.Min(maxMatch, math.Max(0, q/dem))
		d.zs[z] = f
		for j, zi := range m.zoneOf {
			if zi == z {
				d.pd[j] *= f
			}
		}
		m.matchedN++
	}
	if !m.set.evaluating && len(input) > 0 {
		obs := d.obs[:0]
		for _, k := range d.obs {
			if !input[k] {
				obs = append(obs, k)
			}
		}
		d.obs = obs
	}
	return true
}

// estimateKnots estimates, for every matched zone, its demand multiplier
// at each hour knot (weekday and weekend, as the fitted ones) from the
// matched scales of the fit snapshots: a snapshot between two knots
// counts for each by its interpolation weight. The standard error is the
// day-to-day spread of the day means about their knot's mean, relative
// and pooled over the knots of the day type (at least
// Settings.DayVariation), times the mean, over the square root of the
// days behind it: the mean of n independent days (any statistics text).
func (m *model) estimateKnots(fit []*snapData) {
	if m.matched == nil {
		return
	}
	days := 1
	if !m.set.NoWeekend {
		days = 2
	}
	m.knots = make([][]knotEstimate, len(m.zones))
	for z, ok := range m.matched {
		if !ok {
			continue
		}
		type acc struct{ w, ws float64 }
		byDay := make([]map[int]*acc, 48)
		for _, d := range fit {
			f := d.zs[z]
			if math.IsNaN(f) {
				continue
			}
			dt, h := m.knotOf(d, z)
			for _, kw := range [2]struct {
				h int
				w float64
			}{{h, 1 - d.zf[z]}, {(h + 1) % 24, d.zf[z]}} {
				if kw.w <= 0 {
					continue
				}
				i := dt*24 + kw.h
				if byDay[i] == nil {
					byDay[i] = map[int]*acc{}
				}
				a := byDay[i][d.day]
				if a == nil {
					a = &acc{}
					byDay[i][d.day] = a
				}
				a.w += kw.w
				a.ws += kw.w * f
			}
		}
		m.knots[z] = make([]knotEstimate, 48)
		// Day means per knot; the spread of a day about its knot's mean,
		// relative, pooled over the knots of a day type: one day's weather
		// and habits move every hour of it.
		means := make([][]float64, 48)
		var ss [2]float64
		var dof [2]int
		for i := range means {
			if i >= days*24 {
				continue
			}
			for _, a := range byDay[i] {
				means[i] = append(means[i], a.ws/a.w)
			}
			sort.Float64s(means[i])
			if len(means[i]) < 2 {
				continue
			}
			mean := 0.0
			for _, v := range means[i] {
				mean += v / float64(len(means[i]))
			}
			if mean <= 0 {
				continue
			}
			for _, v := range means[i] {
				ss[i/24] += (v/mean - 1) * (v/mean - 1)
			}
			dof[i/24] += len(means[i]) - 1
		}
		for i := range m.knots[z] {
			k := knotEstimate{mean: math.NaN(), se: math.Inf(1), sd: math.NaN()}
			if len(means[i]) == 0 {
				m.knots[z][i] = k
				continue
			}
			n := float64(len(means[i]))
			var mean float64
			for _, v := range means[i] {
				mean += v / n
			}
			rel := m.set.DayVariation
			if dt := i / 24; dof[dt] > 0 {
				k.sd = math.Sqrt(ss[dt] / float64(dof[dt]))
				rel = math.Max(rel, k.sd)
			}
			k.mean, k.se, k.days = mean, rel*mean/math.Sqrt(n), len(means[i])
			m.knots[z][i] = k
		}
	}
}

// knotOf returns the day type (0 weekday or every day, 1 weekend) and the
// local hour of the knot before the snapshot in zone z.
func (m *model) knotOf(d *snapData, z int) (dt, h int) {
	lt := d.t.In(m.locs[z])
	if wd := lt.Weekday(); !m.set.NoWeekend && (wd == 0 || wd == 6) {
		dt = 1
	}
	return dt, lt.Hour()
}

// knotValue returns a matched zone's estimated multiplier at knot (day
// type, hour) and whether it is identified: at least two days behind it
// (one day says nothing of its own spread) and its standard error within
// Settings.MaxMultiplierSE. A weekend knot that is not identified takes
// the weekday knot's value when that one is: the records draw no line
// between the two, and a step between them at midnight would be a step
// in the zone's expected consumption that no water makes.
func (m *model) knotValue(z, dt, h int) (float64, bool) {
	if m.knots == nil || m.knots[z] == nil {
		return 1, false
	}
	k := m.knots[z][dt*24+h]
	if !math.IsNaN(k.mean) && k.days >= 2 && k.se <= m.set.MaxMultiplierSE {
		return k.mean, true
	}
	if dt == 1 {
		if v, ok := m.knotValue(z, 0, h); ok {
			return v, false
		}
	}
	return 1, false
}

// matchedParameters returns the report's parameters of the matched
// zones' knots.
func (m *model) matchedParameters() []Parameter {
	var out []Parameter
	days := []string{"weekday", "weekend"}
	if m.set.NoWeekend {
		days = []string{"every-day"}
	}
	for z, ks := range m.knots {
		if ks == nil {
			continue
		}
		for dt, dname := range days {
			for h := range 24 {
				k := ks[dt*24+h]
				v, ok := m.knotValue(z, dt, h)
				if !ok && dt == 0 {
					v = 1
				}
				p := Parameter{Name: fmt.Sprintf("demand %s %s %02d:00", m.zones[z], dname, h), Kind: DemandMultiplier,
					Zone: m.zones[z], DayType: dname, Hour: h, Prior: 1, Estimate: v, StdErr: k.se, Identifiable: ok}
				if math.IsInf(p.StdErr, 1) {
					p.StdErr = priorSD // no reading at that hour: what the prior says
				}
				out = append(out, p)
			}
		}
	}
	return out
}

// matchedDayVariation returns the day-to-day spread of the matched zones'
// consumption: the pooled relative standard deviation of the day means
// about their knots (0 with fewer than two days).
func (m *model) matchedDayVariation() (float64, bool) {
	var ss float64
	var n int
	for _, ks := range m.knots {
		for _, k := range ks {
			if !math.IsNaN(k.sd) {
				ss += k.sd * k.sd
				n++
			}
		}
	}
	if n == 0 {
		return 0, false
	}
	return math.Sqrt(ss / float64(n)), true
}
