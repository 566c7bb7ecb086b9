package detect

import (
	"fmt"
	"math"
	"sort"
	"strings"
	"time"

	"plumbline/model/finding"
	"plumbline/model/hydraulic"
	"plumbline/model/network"
)

// evidence is the residual picture of one zone over a window: the mean
// change of each logger's hourly residual since the onset, with its
// weight (hours / σ²), the mean change of the zone imbalance, and the
// zone's mean demand scale over the window (its operating point).
type evidence struct {
	zone    int
	scale   float64
	sensors []int     // sensor indices
	dr      []float64 // mean residual change, m
	w       []float64 // weight 1/σ² of dr
	dI      float64   // mean imbalance change, L/s
	wI      float64   // weight of dI
	hours   int
}

func (d *Detector) gather(zi int, onset time.Time) evidence {
	ev := evidence{zone: zi, scale: d.st.MeanMult[zi]}
	if m, n := d.st.Zones[zi].Scale.since(onset); n > 0 {
		ev.scale = m
	}
	for _, si := range d.zones[zi].evidence {
		ss := &d.st.Sensors[si]
		if ss.Excluded {
			continue
		}
		m, n := ss.Ring.since(onset)
		if n == 0 {
			continue
		}
		s := ss.Base.Sigma()
		ev.sensors = append(ev.sensors, si)
		ev.dr = append(ev.dr, m)
		ev.w = append(ev.w, float64(n)/(s*s))
		ev.hours = max(ev.hours, n)
	}
	zs := &d.st.Zones[zi]
	if m, n := zs.Ring.since(onset); n > 0 {
		s := zs.Base.Sigma()
		ev.dI, ev.wI = m, float64(n)/(s*s)
	}
	return ev
}

// signatures are the responses of the zone's loggers at the average
// operating point: per logger k, d pressure / d extra outflow at every
// node, and d pressure / d ln resistance of every link; ubar[k] is the
// response to the zone's whole demand growing by 1 L/s in proportion to
// its base demands (what the inflow-matched solve does with unexplained
// inflow).
type signatures struct {
	sens *hydraulic.Sensitivity
	ubar []float64
}

// refConditions are the boundary conditions of the operating point of
// the evidence: base demands times the evidence zone's mean demand scale
// over its window and the other zones' mean multipliers, with this
// step's fixed heads.
func (d *Detector) refConditions(ev evidence) hydraulic.Conditions {
	c := d.cond
	c.Demand = make([]float64, len(d.net.Nodes))
	for i := range d.net.Nodes {
		n := &d.net.Nodes[i]
		if n.Kind != network.Junction {
			continue
		}
		m := 1.0
		if z := d.nodeZone[i]; z == ev.zone {
			m = ev.scale
		} else if z >= 0 {
			m = d.st.MeanMult[z]
		}
		c.Demand[i] = n.Demand * m
	}
	return c
}

// fitOpenFraction finds the open fraction of link l whose full
// (non-linear) solve at the average operating point best reproduces the
// residual changes: the linear signature ranks candidates, but a valve
// 10% open is far outside the range where it gives the size. Golden-
// section search over f in (0.01, 1) (Kiefer 1953).
func (d *Detector) fitOpenFraction(l int, ev evidence) (float64, float64) {
	c := d.refConditions(ev)
	base, err := d.solver.Solve(&c, d.prevMat)
	if err != nil {
		return math.NaN(), math.Inf(1)
	}
	c.ResistanceFactor = make([]float64, len(d.net.Links))
	for i := range c.ResistanceFactor {
		c.ResistanceFactor[i] = 1
	}
	sse := func(f float64) float64 {
		c.ResistanceFactor[l] = 1 / (f * f)
		sol, err := d.solver.Solve(&c, base)
		if err != nil {
			return math.Inf(1)
		}
		e := 0.0
		for k, si := range ev.sensors {
			n := d.sens[si].node
			r := ev.dr[k] - (sol.Head[n] - base.Head[n])
			e += ev.w[k] * r * r
		}
		return e
	}
	f, e := golden(sse, 0.01, 1, 12)
	return f, e + ev.wI*ev.dI*ev.dI
}

// refineLeaks re-scores the best linear leak candidates with full solves:
// the residual a leak of size q at j leaves is what the water really does
// (the measured pressures fall by the leak at j) minus what the
// inflow-matched model does (it spreads q over the zone's demand). Near a
// logger a large leak is far from linear. q < 0 fits q to each candidate
// (golden section over (0, 3·max(dI, linear size)]).
func (d *Detector) refineLeaks(ev evidence, cands []ranked, q float64) []ranked {
	c := d.refConditions(ev)
	base, err := d.solver.Solve(&c, d.prevMat)
	if err != nil {
		return cands
	}
	zone := d.zones[ev.zone]
	spread := func(qq float64) (*hydraulic.Solution, error) {
		cc := c
		cc.Demand = append([]float64(nil), c.Demand...)
		total := 0.0
		for _, j := range zone.junctions {
			total += c.Demand[j]
		}
		if total > 0 {
			for _, j := range zone.junctions {
				cc.Demand[j] *= 1 + qq/total
			}
		}
		return d.solver.Solve(&cc, base)
	}
	misfit := func(j int, qq float64, model *hydraulic.Solution) float64 {
		cc := c
		cc.Demand = append([]float64(nil), c.Demand...)
		cc.Demand[j] += qq
		real, err := d.solver.Solve(&cc, base)
		if err != nil {
			return math.Inf(1)
		}
		e := 0.0
		for k, si := range ev.sensors {
			n := d.sens[si].node
			r := ev.dr[k] - ((real.Head[n] - base.Head[n]) - (model.Head[n] - base.Head[n]))
			e += ev.w[k] * r * r
		}
		if q < 0 {
			e += ev.wI * (ev.dI - qq) * (ev.dI - qq)
		}
		return e
	}
	out := make([]ranked, 0, len(cands))
	var fixedModel *hydraulic.Solution
	if q >= 0 {
		if fixedModel, err = spread(q); err != nil {
			return cands
		}
	}
	for _, cd := range cands {
		if q >= 0 {
			out = append(out, ranked{idx: cd.idx, sse: misfit(cd.idx, q, fixedModel), size: q})
			continue
		}
		hi := 3 * math.Max(math.Max(ev.dI, cd.size), 0.1)
		f := func(qq float64) float64 {
			m, err := spread(qq)
			if err != nil {
				return math.Inf(1)
			}
			return misfit(cd.idx, qq, m)
		}
		best, e := golden(f, 0, hi, 9)
		out = append(out, ranked{idx: cd.idx, sse: e, size: best})
	}
	return out
}

// refineBlockages re-scores the best linear blockage candidates with the
// non-linear open-fraction fit.
func (d *Detector) refineBlockages(ev evidence, cands []ranked) []ranked {
	out := make([]ranked, 0, len(cands))
	for _, cd := range cands {
		f, e := d.fitOpenFraction(cd.idx, ev)
		out = append(out, ranked{idx: cd.idx, sse: e, size: f})
	}
	return out
}

// golden minimises f over [lo, hi] by golden-section search (Kiefer
// 1953) with n narrowings; it returns the point and its value.
func golden(f func(float64) float64, lo, hi float64, n int) (float64, float64) {
	g := (math.Sqrt(5) - 1) / 2
	a, b := hi-g*(hi-lo), lo+g*(hi-lo)
	fa, fb := f(a), f(b)
	for i := 0; i < n; i++ {
		if fa < fb {
			hi, b, fb = b, a, fa
			a = hi - g*(hi-lo)
			fa = f(a)
		} else {
			lo, a, fa = a, b, fb
			b = lo + g*(hi-lo)
			fb = f(b)
		}
	}
	if fa < fb {
		return a, fa
	}
	return b, fb
}

// shortlist is how many linear candidates the non-linear fits re-score.
const shortlist = 10

func (d *Detector) signatures(ev evidence) (*signatures, error) {
	zi, sensors := ev.zone, ev.sensors
	c := d.refConditions(ev)
	ref, err := d.solver.Solve(&c, d.prevMat)
	if err != nil {
		return nil, fmt.Errorf("reference solve: %w", err)
	}
	obs := make([]hydraulic.Observation, len(sensors))
	for k, si := range sensors {
		obs[k] = hydraulic.Observation{Node: d.sens[si].node, Link: -1}
	}
	sens, err := d.solver.Sensitivities(ref, obs)
	if err != nil {
		return nil, fmt.Errorf("sensitivities: %w", err)
	}
	sg := &signatures{sens: sens, ubar: make([]float64, len(sensors))}
	total := 0.0
	for _, j := range d.zones[zi].junctions {
		total += c.Demand[j]
	}
	if total > 0 {
		for k := range sensors {
			u := 0.0
			for _, j := range d.zones[zi].junctions {
				u += c.Demand[j] / total * sens.Outflow[k][j]
			}
			sg.ubar[k] = u
		}
	}
	return sg, nil
}

// ranked is one hypothesis location with its weighted misfit.
type ranked struct {
	idx  int
	sse  float64
	size float64
}

// rank sorts hypotheses by misfit and turns misfits into scores: the
// likelihood of each relative to the best, exp(−(SSE − SSE_best)/2).
func rank(rs []ranked, n int) ([]ranked, []float64) {
	sort.SliceStable(rs, func(a, b int) bool { return rs[a].sse < rs[b].sse })
	if len(rs) > n {
		rs = rs[:n]
	}
	scores := make([]float64, len(rs))
	for i, r := range rs {
		scores[i] = math.Exp(-(r.sse - rs[0].sse) / 2)
	}
	return rs, scores
}

// leakFits scores a leak at every junction of the zone. With fixed >= 0
// the leak's size is that (the balance measured it); otherwise it is
// fitted to the residuals, and the balance enters as one more observation.
func (d *Detector) leakFits(zi int, ev evidence, sg *signatures, fixed float64) []ranked {
	var out []ranked
	g := make([]float64, len(ev.sensors))
	for _, j := range d.zones[zi].junctions {
		for k := range ev.sensors {
			g[k] = sg.sens.Outflow[k][j] - sg.ubar[k]
		}
		q := fixed
		if q < 0 {
			num, den := ev.wI*ev.dI, ev.wI
			for k := range g {
				num += ev.w[k] * ev.dr[k] * g[k]
				den += ev.w[k] * g[k] * g[k]
			}
			q = 0
			if den > 0 {
				q = math.Max(0, num/den)
			}
		}
		sse := 0.0
		for k := range g {
			r := ev.dr[k] - q*g[k]
			sse += ev.w[k] * r * r
		}
		if fixed < 0 {
			sse += ev.wI * (ev.dI - q) * (ev.dI - q)
		}
		out = append(out, ranked{idx: j, sse: sse, size: q})
	}
	return out
}

// blockageFits scores a resistance increase on every pipe and valve that
// touches the zone; the zone balance should not move.
func (d *Detector) blockageFits(zi int, ev evidence, sg *signatures) []ranked {
	var out []ranked
	for l, lk := range d.net.Links {
		if lk.Kind == network.Pump || (d.nodeZone[lk.From] != zi && d.nodeZone[lk.To] != zi) {
			continue
		}
		num, den := 0.0, 0.0
		for k := range ev.sensors {
			b := sg.sens.Resistance[k][l]
			num += ev.w[k] * ev.dr[k] * b
			den += ev.w[k] * b * b
		}
		theta := 0.0
		if den > 0 {
			theta = math.Max(0, num/den)
		}
		sse := ev.wI * ev.dI * ev.dI
		for k := range ev.sensors {
			r := ev.dr[k] - theta*sg.sens.Resistance[k][l]
			sse += ev.w[k] * r * r
		}
		out = append(out, ranked{idx: l, sse: sse, size: theta})
	}
	return out
}

// accept resets a zone's tests after a finding and takes the change into
// the baselines, so that later tests look for what is new.
func (d *Detector) accept(zi int, ev evidence, leak float64, now time.Time, f finding.Finding) {
	zs := &d.st.Zones[zi]
	if i, ok := d.sameEvent(f); ok {
		// The change is the one an open finding already reports (a
		// blockage's effect grows and shrinks with the day's flows): the
		// finding is updated, not raised again.
		old := &d.st.Findings[i]
		old.Candidates, old.Evidence = f.Candidates, f.Evidence+" (update)"
		if f.Kind == finding.Blockage {
			old.OpenFrac = f.OpenFrac
		}
		d.updated = append(d.updated, *old)
		leak = 0
	} else {
		idx := d.raise(f)
		if f.Kind == finding.Leak || f.Kind == finding.Blockage {
			d.watch(idx, zi, ev, now)
		}
	}
	if leak != 0 {
		zs.Base.Shift(leak)
		zs.Offset += leak
		zs.Rebase = true
		zs.LeakQuiet = now.Add(24 * time.Hour)
	}
	zs.Burst.Reset()
	zs.Night.Reset()
	zs.Base.Relearn = 24
	zs.Level, zs.LevelN = 0, 0
	for _, si := range d.zones[zi].evidence {
		ss := &d.st.Sensors[si]
		ss.Base.Relearn = 24
		ss.Up.Reset()
		ss.Down.Reset()
	}
	zs.ResidQuiet = now.Add(12 * time.Hour)
}

// zoneHypothesis explains a rise of a zone's imbalance: a leak somewhere
// in the zone, or an inflow meter reading high. The inflow-matched solve
// spreads the unexplained water over the zone's demand, so a meter error
// lowers the modelled pressures by size × ubar everywhere and shows as
// positive residuals, while a real leak takes the measured pressures down
// with it near its place and leaves residuals size × (S_j − ubar).
func (d *Detector) zoneHypothesis(zi int, onset, now time.Time, size float64, why string) bool {
	zs := &d.st.Zones[zi]
	zone := d.zones[zi].z.ID
	if now.Before(zs.LeakQuiet) || size <= 0 {
		zs.Burst.Reset()
		zs.Night.Reset()
		return false
	}
	onset = d.refineOnset(zi, onset, size)
	ev := d.gather(zi, onset)
	f := finding.Finding{Kind: finding.Leak, Zone: zone, Onset: onset, Raised: now, SizeLPS: round2(size), Candidates: []finding.Candidate{}}
	if len(ev.sensors) == 0 {
		f.Evidence = why + "; no pressure loggers in the zone to locate it"
		d.accept(zi, ev, size, now, f)
		return true
	}
	sg, err := d.signatures(ev)
	if err != nil {
		f.Evidence = why + "; location not computed: " + err.Error()
		d.accept(zi, ev, size, now, f)
		return true
	}
	short, _ := rank(d.leakFits(zi, ev, sg, size), shortlist)
	top, scores := rank(d.refineLeaks(ev, short, size), d.cfg.Candidates)
	meterSSE := 0.0
	for k := range ev.sensors {
		r := ev.dr[k] + size*sg.ubar[k]
		meterSSE += ev.w[k] * r * r
	}
	// A meter error must explain the residuals clearly better than the best
	// leak (by more than the 2 units of SSE one parameter may buy, Akaike
	// 1974) before the finding blames the instrument.
	if len(top) > 0 && meterSSE+2 < top[0].sse && len(d.zones[zi].inlets)+len(d.zones[zi].outlets) > 0 {
		f.Kind = finding.SensorFault
		f.SizeLPS = 0
		for _, m := range append(append([]meter{}, d.zones[zi].inlets...), d.zones[zi].outlets...) {
			f.Candidates = append(f.Candidates, finding.Candidate{ID: d.sens[m.sensor].s.ID, Score: 1})
			d.st.Sensors[m.sensor].Excluded = true
		}
		f.Evidence = fmt.Sprintf("%s, but pressures did not fall as a leak of that size would: loggers read %s above the model, as a flow meter over-reading would make them; check the zone's flow meters",
			why, describeResiduals(d, ev, 3))
		d.accept(zi, ev, 0, now, f)
		return true
	}
	for i, r := range top {
		f.Candidates = append(f.Candidates, finding.Candidate{ID: d.net.Nodes[r.idx].ID, Score: round2(scores[i])})
	}
	f.Evidence = fmt.Sprintf("%s since %s; pressure residuals (%s) best match a leak at %s",
		why, onset.UTC().Format("2006-01-02 15:04"), describeResiduals(d, ev, 3), f.Candidates[0].ID)
	d.accept(zi, ev, size, now, f)
	return true
}

// residualHypothesis explains one logger's residual change when the zone
// balance has not moved enough to raise a leak by itself: a constriction
// somewhere (pressure down beyond it, balance unchanged), a leak too small
// for the balance, or the logger itself.
func (d *Detector) residualHypothesis(si int, onset, now time.Time) bool {
	zi := d.sens[si].zone
	zs := &d.st.Zones[zi]
	ss := &d.st.Sensors[si]
	if now.Before(zs.ResidQuiet) {
		ss.Up.Reset()
		ss.Down.Reset()
		return false
	}
	dir := 1.0
	if ss.Down.S > ss.Down.H {
		dir = -1
	}
	onset = changePoint(&ss.Ring, onset.Add(-12*time.Hour), dir, onset)
	ev := d.gather(zi, onset)
	me := -1
	for k, s := range ev.sensors {
		if s == si {
			me = k
		}
	}
	if me < 0 {
		return false
	}
	zone := d.zones[zi].z.ID
	faultSSE := ev.wI * ev.dI * ev.dI
	for k := range ev.sensors {
		if k != me {
			faultSSE += ev.w[k] * ev.dr[k] * ev.dr[k]
		}
	}
	var blocks, leaks []ranked
	if len(ev.sensors) > 1 {
		sg, err := d.signatures(ev)
		if err == nil {
			blocks = d.blockageFits(zi, ev, sg)
			leaks = d.leakFits(zi, ev, sg, -1)
		}
	}
	bTop, _ := rank(blocks, shortlist)
	lTop, _ := rank(leaks, shortlist)
	bTop, bScores := rank(d.refineBlockages(ev, bTop), d.cfg.Candidates)
	lq := -1.0
	if ev.wI > 0 && ev.dI*math.Sqrt(ev.wI) > 3 {
		lq = ev.dI // the balance moved clearly: it measures the leak
	}
	lTop, lScores := rank(d.refineLeaks(ev, lTop, lq), d.cfg.Candidates)
	bestB, bestL := math.Inf(1), math.Inf(1)
	// Each explanation must matter in practice as well as fit: a blockage
	// must move some logger by more than that logger's accuracy, and a
	// leak must show in the zone balance (the primary leak evidence), at
	// least two of its σ above normal.
	if len(bTop) > 0 && d.largestChange(ev) {
		bestB = bTop[0].sse
	}
	if len(lTop) > 0 && lTop[0].size > 0 && ev.wI > 0 && ev.dI*math.Sqrt(ev.wI) > 2 {
		bestL = lTop[0].sse
	}
	desc := describeResiduals(d, ev, 3)
	switch {
	case faultSSE <= bestB && faultSSE <= bestL && math.Abs(ev.dr[me]) < d.sens[si].accuracy:
		// A logger that moved by less than its own stated accuracy is not
		// faulty enough for a visit, and nothing else explains it better:
		// no finding, its baseline takes the change in.
		ss.Up.Reset()
		ss.Down.Reset()
		ss.Base.Relearn = 24
		return false
	case faultSSE <= bestB && faultSSE <= bestL && faultSSE > 4*float64(len(ev.sensors)):
		// The other loggers moved too, but no physical change explains the
		// picture: no finding; the zone's baselines take it in.
		for _, s := range d.zones[zi].evidence {
			o := &d.st.Sensors[s]
			o.Up.Reset()
			o.Down.Reset()
			o.Base.Relearn = 24
		}
		return false
	case faultSSE <= bestB && faultSSE <= bestL:
		d.faultFinding(si, onset, now, fmt.Sprintf("residual moved %+.2f m since %s while the other loggers in zone %s stayed within their noise (%s) and the zone balance did not change",
			ev.dr[me], onset.UTC().Format("2006-01-02 15:04"), zone, desc))
		ss.Up.Reset()
		ss.Down.Reset()
		return true
	case bestB <= bestL:
		l := bTop[0]
		f := finding.Finding{Kind: finding.Blockage, Zone: zone, Onset: onset, Raised: now,
			OpenFrac: round2(l.size)}
		for i, r := range bTop {
			f.Candidates = append(f.Candidates, finding.Candidate{ID: d.net.Links[r.idx].ID, Score: round2(bScores[i])})
		}
		f.Evidence = fmt.Sprintf("pressures changed (%s) since %s while zone inflow moved only %+.2f L/s; the pattern matches extra head loss on %s (about %.0f%% open)",
			desc, onset.UTC().Format("2006-01-02 15:04"), ev.dI, f.Candidates[0].ID, 100*f.OpenFrac)
		d.accept(zi, ev, 0, now, f)
		return true
	default:
		l := lTop[0]
		size := l.size
		if ev.dI > 0 {
			size = ev.dI // the balance measures a leak better than the pressures do
		}
		f := finding.Finding{Kind: finding.Leak, Zone: zone, Onset: onset, Raised: now, SizeLPS: round2(size)}
		for i, r := range lTop {
			f.Candidates = append(f.Candidates, finding.Candidate{ID: d.net.Nodes[r.idx].ID, Score: round2(lScores[i])})
		}
		f.Evidence = fmt.Sprintf("pressures fell (%s) since %s in the pattern of a leak of about %.2f L/s at %s; zone imbalance %+.2f L/s",
			desc, onset.UTC().Format("2006-01-02 15:04"), l.size, f.Candidates[0].ID, ev.dI)
		d.accept(zi, ev, l.size, now, f)
		return true
	}
}

// changePoint returns the hour at which the series in r most likely
// stepped, in the direction dir (±1): the τ in [lo, end] that maximises
// S_τ²/n_τ with S_τ the sum of the values since τ (the likelihood-ratio
// change point of a mean shift of unknown size in unit-variance noise;
// Hinkley 1970, from memory).
func changePoint(r *ring, lo time.Time, dir float64, fallback time.Time) time.Time {
	best, at := 0.0, fallback
	sum, n := 0.0, 0
	for i := len(r.Vals) - 1; i >= 0; i-- {
		t := r.End.Add(-time.Duration(len(r.Vals)-1-i) * time.Hour)
		if t.Before(lo) {
			break
		}
		if math.IsNaN(r.Vals[i]) {
			continue
		}
		sum += r.Vals[i]
		n++
		if dir*sum > 0 && sum*sum/float64(n) > best {
			best, at = sum*sum/float64(n), t
		}
	}
	return at
}

// sameEvent finds an active blockage of the same zone whose best
// candidates overlap f's: the same constriction seen again. Leaks are not
// merged: a second leak in a zone adds to the first.
func (d *Detector) sameEvent(f finding.Finding) (int, bool) {
	if f.Kind != finding.Blockage {
		return 0, false
	}
	top := func(cs []finding.Candidate) map[string]bool {
		m := map[string]bool{}
		for i := 0; i < len(cs) && i < 3; i++ {
			m[cs[i].ID] = true
		}
		return m
	}
	mine := top(f.Candidates)
	for i := len(d.st.Findings) - 1; i >= 0; i-- {
		g := d.st.Findings[i]
		if g.Kind != f.Kind || g.Zone != f.Zone || (i < len(d.st.Resolved) && d.st.Resolved[i]) {
			continue
		}
		for id := range top(g.Candidates) {
			if mine[id] {
				return i, true
			}
		}
	}
	return 0, false
}

// largestChange reports whether some logger of the evidence moved by more
// than its own stated accuracy.
func (d *Detector) largestChange(ev evidence) bool {
	for k, si := range ev.sensors {
		if math.Abs(ev.dr[k]) > d.sens[si].accuracy {
			return true
		}
	}
	return false
}

// refineOnset moves a zone change's onset to the hour that best fits a
// step of the given size in the hourly imbalance (the maximum-likelihood
// change point of a known mean shift), searching from a day before the
// test's own onset.
func (d *Detector) refineOnset(zi int, onset time.Time, size float64) time.Time {
	r := &d.st.Zones[zi].Ring
	lo := onset.Add(-24 * time.Hour)
	best, bestAt, cum := 0.0, onset, 0.0
	for i := len(r.Vals) - 1; i >= 0; i-- {
		at := r.End.Add(-time.Duration(len(r.Vals)-1-i) * time.Hour)
		if at.Before(lo) {
			break
		}
		if math.IsNaN(r.Vals[i]) {
			continue
		}
		cum += r.Vals[i] - size/2
		if cum > best {
			best, bestAt = cum, at
		}
	}
	return bestAt
}

func describeResiduals(d *Detector, ev evidence, n int) string {
	idx := make([]int, len(ev.sensors))
	for i := range idx {
		idx[i] = i
	}
	sort.SliceStable(idx, func(a, b int) bool { return math.Abs(ev.dr[idx[a]]) > math.Abs(ev.dr[idx[b]]) })
	var parts []string
	for _, k := range idx[:min(n, len(idx))] {
		parts = append(parts, fmt.Sprintf("%s %+.2f m", d.sens[ev.sensors[k]].s.ID, ev.dr[k]))
	}
	if len(parts) == 0 {
		return "no loggers"
	}
	return strings.Join(parts, ", ")
}

func round2(x float64) float64 { return math.Round(x*100) / 100 }
