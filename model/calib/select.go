package calib

import (
	"fmt"
	"math"
	"sort"
	"time"

	"plumbline/model/demand"
	"plumbline/model/network"
	"plumbline/model/telemetry"
)

// Thin keeps, of snapshots in time order, the first one in each interval
// (counted from the zero time, so hourly intervals start on the hour
// UTC). It is what Fit does first; a caller that streams weeks of
// five-minute snapshots can thin them as they come with a Thinner.
func Thin(snaps []telemetry.Snapshot, interval time.Duration) []telemetry.Snapshot {
	t := NewThinner(interval)
	var out []telemetry.Snapshot
	for _, s := range snaps {
		if t.Keep(s) {
			out = append(out, s)
		}
	}
	return out
}

// Thinner keeps the first snapshot of each interval of a stream in time
// order. The zero value is not usable; make one with NewThinner.
type Thinner struct {
	interval time.Duration
	last     time.Time
	started  bool
}

// NewThinner returns a Thinner for the interval (≤ 0: one hour).
func NewThinner(interval time.Duration) *Thinner {
	if interval <= 0 {
		interval = time.Hour
	}
	return &Thinner{interval: interval}
}

// Keep reports whether s is the first snapshot seen in its interval.
func (t *Thinner) Keep(s telemetry.Snapshot) bool {
	b := s.Step.Truncate(t.interval)
	if t.started && !b.After(t.last) {
		return false
	}
	t.started, t.last = true, b
	return true
}

// prepare turns the problem's snapshots into model snapshots, split into
// fit and held-out sets.
func (m *model) prepare(p Problem, locs []*time.Location, pz [][]int, warn func(string)) (fit, held []*snapData, fitDays, heldDays []string, err error) {
	snaps := make([]telemetry.Snapshot, 0, len(p.Snapshots))
	for i, s := range p.Snapshots {
		if len(s.Values) != len(p.Sensors) {
			warn(fmt.Sprintf("snapshot %d at %s: %d values for %d sensors: left out", i, s.Step.Format(time.RFC3339), len(s.Values), len(p.Sensors)))
			continue
		}
		snaps = append(snaps, s)
	}
	sort.SliceStable(snaps, func(a, b int) bool { return snaps[a].Step.Before(snaps[b].Step) })
	snaps = Thin(snaps, m.set.Interval)
	if len(snaps) == 0 {
		return nil, nil, nil, nil, fmt.Errorf("calibration: no usable snapshots")
	}
	zl := map[string]*time.Location{}
	for z, name := range m.zones {
		zl[name] = locs[z]
	}
	// Mean reading of each flow meter, to express demand level.
	meanFlow := make([]float64, len(m.sens))
	cnt := make([]int, len(m.sens))
	for _, s := range snaps {
		for k, a := range s.Values {
			if m.sens[k].role == roleObserve && m.sens[k].link >= 0 && !m.sens[k].pump && a.Quality.Usable() && finite(a.Value) {
				meanFlow[k] += math.Abs(a.Value)
				cnt[k]++
			}
		}
	}
	for k := range meanFlow {
		if cnt[k] > 0 {
			meanFlow[k] /= float64(cnt[k])
		}
	}
	day0 := time.Date(snaps[0].Step.UTC().Year(), snaps[0].Step.UTC().Month(), snaps[0].Step.UTC().Day(), 0, 0, 0, 0, time.UTC)
	nn := len(m.net.Nodes)
	var all []*snapData
	for _, s := range snaps {
		d := &snapData{
			t:   s.Step,
			day: int(s.Step.Sub(day0) / (24 * time.Hour)),
			y:   make([]float64, len(m.sens)),
			za:  make([]int, len(m.zones)),
			zb:  make([]int, len(m.zones)),
			zf:  make([]float64, len(m.zones)),
			zs:  make([]float64, len(m.zones)),
		}
		var lvl float64
		var nl int
		for k, a := range s.Values {
			d.y[k] = math.NaN()
			si := &m.sens[k]
			if !a.Quality.Usable() || !finite(a.Value) {
				continue
			}
			switch si.role {
			case roleObserve:
				d.y[k] = a.Value
				d.obs = append(d.obs, k)
				if si.pump && math.Abs(a.Value) < si.pumpOff {
					d.off = append(d.off, si.link)
				}
				if si.link >= 0 && !si.pump && meanFlow[k] > 0 {
					lvl += math.Abs(a.Value) / meanFlow[k]
					nl++
				}
			case roleBoundary:
				if d.head == nil {
					d.head = make([]float64, nn)
					for i := range d.head {
						d.head[i] = math.NaN()
					}
				}
				nd := &m.net.Nodes[si.node]
				if si.s.Quantity == telemetry.Head {
					d.head[si.node] = a.Value
				} else {
					d.head[si.node] = nd.Elevation + a.Value
				}
			}
		}
		d.pd = demand.Base(m.net, s.Step, zl, nil)
		if nl > 0 {
			d.level = lvl / float64(nl)
		} else {
			for _, v := range d.pd {
				d.level += v
			}
		}
		for z := range m.zones {
			lt := s.Step.In(locs[z])
			dt := 0
			if wd := lt.Weekday(); !m.set.NoWeekend && (wd == time.Saturday || wd == time.Sunday) {
				dt = 1
			}
			h := lt.Hour()
			frac := float64(lt.Minute()*60+lt.Second())/3600 + float64(lt.Nanosecond())/3.6e12
			d.za[z] = pz[z][dt*24+h]
			d.zb[z] = pz[z][dt*24+(h+1)%24]
			d.zf[z] = frac
		}
		if !m.matchSnapshot(d) {
			continue
		}
		all = append(all, d)
	}
	// Whole days held out: the last ones.
	var days []int
	for _, d := range all {
		if len(days) == 0 || days[len(days)-1] != d.day {
			days = append(days, d.day)
		}
	}
	hold := 0
	if m.set.HoldOut > 0 && len(days) >= 2 {
		hold = min(len(days)-1, max(1, int(math.Round(m.set.HoldOut*float64(len(days))))))
	}
	cut := math.MaxInt
	if hold > 0 {
		cut = days[len(days)-hold]
	}
	dayName := func(i int) string { return day0.AddDate(0, 0, i).Format("2006-01-02") }
	for _, dd := range days {
		if dd >= cut {
			heldDays = append(heldDays, dayName(dd))
		} else {
			fitDays = append(fitDays, dayName(dd))
		}
	}
	for _, d := range all {
		if len(d.obs) == 0 {
			continue
		}
		if d.day >= cut {
			held = append(held, d)
		} else {
			fit = append(fit, d)
		}
	}
	fit = m.stratify(fit, locs)
	return fit, held, fitDays, heldDays, nil
}

// stratify keeps at most MaxSnapshots of the fit snapshots: quotas per
// hour bin (day type and local hour of the first zone) in proportion to
// the bin's size, and within a bin snapshots spread evenly over the
// demand levels seen, from the lowest to the highest.
func (m *model) stratify(snaps []*snapData, locs []*time.Location) []*snapData {
	M := m.set.MaxSnapshots
	if len(snaps) <= M {
		return snaps
	}
	loc := time.UTC
	if len(locs) > 0 {
		loc = locs[0]
	}
	bins := map[int][]*snapData{}
	var keys []int
	for _, s := range snaps {
		lt := s.t.In(loc)
		k := lt.Hour()
		if wd := lt.Weekday(); wd == time.Saturday || wd == time.Sunday {
			k += 24
		}
		if _, ok := bins[k]; !ok {
			keys = append(keys, k)
		}
		bins[k] = append(bins[k], s)
	}
	sort.Ints(keys)
	quota := make(map[int]int, len(keys))
	type rem struct {
		k int
		f float64
	}
	var rems []rem
	used := 0
	for _, k := range keys {
		exact := float64(M) * float64(len(bins[k])) / float64(len(snaps))
		q := int(exact)
		quota[k] = q
		used += q
		rems = append(rems, rem{k, exact - float64(q)})
	}
	sort.SliceStable(rems, func(a, b int) bool { return rems[a].f > rems[b].f })
	for i := 0; used < M && i < len(rems); i++ {
		quota[rems[i].k]++
		used++
	}
	var out []*snapData
	for _, k := range keys {
		b := bins[k]
		q := min(quota[k], len(b))
		if q == 0 {
			continue
		}
		sorted := append([]*snapData(nil), b...)
		sort.SliceStable(sorted, func(a, c int) bool { return sorted[a].level < sorted[c].level })
		for i := range q {
			var idx int
			if q == 1 {
				idx = len(sorted) / 2
			} else {
				idx = int(math.Round(float64(i) * float64(len(sorted)-1) / float64(q-1)))
			}
			out = append(out, sorted[idx])
		}
	}
	sort.SliceStable(out, func(a, b int) bool { return out[a].t.Before(out[b].t) })
	return out
}

// zoneIndex maps each node to its zone's index (−1: none or not a
// junction).
func zoneIndex(net *network.Network, zones []string) []int {
	idx := map[string]int{}
	for i, z := range zones {
		idx[z] = i
	}
	out := make([]int, len(net.Nodes))
	for i := range net.Nodes {
		out[i] = -1
		if net.Nodes[i].Kind != network.Junction {
			continue
		}
		if z, ok := idx[net.Nodes[i].Zone]; ok {
			out[i] = z
		}
	}
	return out
}
