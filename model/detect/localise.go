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

	"gonum.org/v1/gonum/interp"
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
	cond hydraulic.Conditions // the operating point (refConditions)
	ref  *hydraulic.Solution  // solved at cond
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

// responses measures what full solves at the operating point of sg do
// at the evidence loggers: each call solves the reference conditions with
// the demand changed by mod (or the resistance factor of one link set)
// and returns every logger's head change from the reference solution.
// One scratch demand vector serves every call. The solves are
// hydraulic.SolveNear's with the Detector's Near: each trial differs from
// the last in a few links' or junctions' terms, so the Newton matrix
// factored for one serves the next in all but a few rows of its factor.
type responses struct {
	d      *Detector
	sg     *signatures
	ev     evidence
	demand []float64
	factor []float64
	link   int
	solves int
	// chain warm-starts the next solve from the last one instead of the
	// reference: the samples of one candidate, each a little further from
	// the reference than the one before, take fewer Newton iterations.
	chain bool
	// from, when set, is the start of the next solve instead (a blend of
	// the candidate's kept solutions, trialPath); the solve clears it.
	from *hydraulic.Solution
}

func (d *Detector) responses(ev evidence, sg *signatures) *responses {
	return &responses{d: d, sg: sg, ev: ev, demand: make([]float64, len(sg.cond.Demand)), link: -1}
}

// demandChange solves with the reference demand changed by mod.
func (r *responses) demandChange(mod func(dem []float64)) ([]float64, error) {
	copy(r.demand, r.sg.cond.Demand)
	mod(r.demand)
	c := r.sg.cond
	c.Demand = r.demand
	return r.solve(&c)
}

// resistance solves with link l's resistance multiplied by factor.
func (r *responses) resistance(l int, factor float64) ([]float64, error) {
	if r.factor == nil {
		r.factor = make([]float64, len(r.d.net.Links))
		for i := range r.factor {
			r.factor[i] = 1
		}
	}
	if r.link >= 0 {
		r.factor[r.link] = 1
	}
	r.factor[l], r.link = factor, l
	c := r.sg.cond
	c.ResistanceFactor = r.factor
	return r.solve(&c)
}

func (r *responses) solve(c *hydraulic.Conditions) ([]float64, error) {
	r.solves++
	warm := r.sg.ref
	if r.chain && r.d.trial != nil {
		warm = r.d.trial
	}
	if r.from != nil {
		warm, r.from = r.from, nil
	}
	if r.d.near == nil {
		r.d.near = r.d.solver.NewNear()
	}
	sol, err := r.d.solver.SolveNear(c, warm, r.d.trial, r.d.near)
	if err != nil {
		r.d.trial = nil // partly written: not reused
		return nil, err
	}
	r.d.trial = sol
	out := make([]float64, len(r.ev.sensors))
	for k, si := range r.ev.sensors {
		n := r.d.sens[si].node
		out[k] = sol.Head[n] - r.sg.ref.Head[n]
	}
	return out, nil
}

// spread is the inflow-matched model's answer to qq L/s of unexplained
// inflow: the zone's demand scaled up by qq over its total.
func (r *responses) spread(qq float64) ([]float64, error) {
	zone := r.d.zones[r.ev.zone]
	total := 0.0
	for _, j := range zone.junctions {
		total += r.sg.cond.Demand[j]
	}
	return r.demandChange(func(dem []float64) {
		if total > 0 {
			for _, j := range zone.junctions {
				dem[j] *= 1 + qq/total
			}
		}
	})
}

// leak is the real network's answer to a leak of qq L/s at junction j.
func (r *responses) leak(j int, qq float64) ([]float64, error) {
	return r.demandChange(func(dem []float64) { dem[j] += qq })
}

// misfit is the weighted sum of squares of the evidence minus a modelled
// residual change pred (per logger).
func (ev evidence) misfit(pred func(k int) float64) float64 {
	e := 0.0
	for k := range ev.sensors {
		r := ev.dr[k] - pred(k)
		e += ev.w[k] * r * r
	}
	return e
}

// quadratic is y(x) = a·x + b·x², per logger, through the origin and two
// samples (x1, y1) and (x2, y2): the surrogate of a head response in a
// flow added somewhere, whose curvature comes from the head-loss laws'
// exponent (close to 2).
type quadratic struct{ a, b []float64 }

func fitQuadratic(x1 float64, y1 []float64, x2 float64, y2 []float64) quadratic {
	q := quadratic{a: make([]float64, len(y1)), b: make([]float64, len(y1))}
	det := x1 * x2 * (x2 - x1)
	for k := range y1 {
		q.b[k] = (x1*y2[k] - x2*y1[k]) / det
		q.a[k] = (y1[k] - q.b[k]*x1*x1) / x1
	}
	return q
}

func (q quadratic) at(k int, x float64) float64 { return q.a[k]*x + q.b[k]*x*x }

// fitOpenFraction finds the open fraction f of link l whose full
// (non-linear) solve at the average operating point best reproduces the
// residual changes: the linear signature ranks candidates, but a valve
// 10% open is far outside the range where it gives the size. The head
// response is sampled by full solves at open fractions spread evenly in
// ln(1/f²) (the log of the resistance factor, over which it is smooth and
// monotone), interpolated per logger by the monotone piecewise cubic of
// Fritsch & Carlson (1980; Fritsch & Butland 1984, gonum/interp), the
// misfit of the interpolant minimised by golden-section search (Kiefer
// 1953), and the best fraction checked by one more full solve, whose
// misfit is the one returned. The check starts from the samples' solutions
// on either side of it, blended (trialPath), rather than from the
// reference: a fraction fitted at 1% open is two iterations from the 1%
// sample, seven or eight from the reference on the 100k-junction town.
func (d *Detector) fitOpenFraction(l int, ev evidence, rs *responses) (float64, float64) {
	xs := []float64{0}
	ys := make([][]float64, len(ev.sensors))
	for k := range ys {
		ys[k] = []float64{0}
	}
	// A pipe into a part without a source of its own changes heads
	// beyond it only, linearly in its resistance (bridge.go).
	bridge := d.passiveBridge(l, rs.sg.ref)
	respond := func(factor float64) ([]float64, error) {
		if bridge {
			return bridgeResponse(rs.sg, l, factor), nil
		}
		return rs.resistance(l, factor)
	}
	path := &d.path
	path.reset()
	path.keep(0, rs.sg.ref)
	for i, f := range openSamples {
		rs.chain = i > 0
		dh, err := respond(1 / (f * f))
		if err != nil {
			break // e.g. the link cut a part of the network off: fit what solved
		}
		xs = append(xs, -2*math.Log(f))
		if !bridge {
			path.keep(xs[len(xs)-1], d.trial)
		}
		for k := range ys {
			ys[k] = append(ys[k], dh[k])
		}
	}
	if len(xs) < 3 {
		return math.NaN(), math.Inf(1)
	}
	curves := make([]interp.FritschButland, len(ys))
	for k := range ys {
		if err := curves[k].Fit(xs, ys[k]); err != nil {
			return math.NaN(), math.Inf(1)
		}
	}
	xmax := xs[len(xs)-1]
	x, _ := golden(func(x float64) float64 {
		return ev.misfit(func(k int) float64 { return curves[k].Predict(x) })
	}, 0, xmax, 40)
	f := math.Exp(-x / 2)
	rs.chain = false
	if !bridge {
		rs.from = path.around(x)
	}
	dh, err := respond(1 / (f * f))
	if err != nil {
		return math.NaN(), math.Inf(1)
	}
	return f, ev.misfit(func(k int) float64 { return dh[k] }) + ev.wI*ev.dI*ev.dI
}

// openSamples are the open fractions at which fitOpenFraction samples a
// link's head response: from 60% down to 1% open, about evenly in the
// log of the resistance factor 1/f².
var openSamples = [...]float64{0.6, 0.3, 0.12, 0.04, 0.01}

// refineLeaks re-scores the best linear leak candidates with full solves:
// the residual a leak of size q at j leaves is what the water really does
// (the measured pressures fall by the leak at j) minus what the
// inflow-matched model does (it spreads q over the zone's demand). Near a
// logger a large leak is far from linear.
//
// q ≥ 0 is the size the balance measured: one full solve per candidate.
// q < 0 fits the size to each candidate over (0, 3·max(dI, linear size)]:
// the real network's response is sampled by two full solves and the
// model's by two shared ones, each taken as a quadratic through the
// origin; the size that minimises the misfit of the surrogates (golden
// section) is checked by a full solve of the leak (started from the
// quadratic through the reference's and the two samples' solutions, and
// the second sample from the line through the reference's and the
// first's: trialPath), and that misfit (with
// the model's side from its surrogate, which is nearly linear: the
// spread water changes every junction's demand by a small fraction)
// ranks the candidate.
func (d *Detector) refineLeaks(ev evidence, sg *signatures, cands []ranked, q float64) []ranked {
	rs := d.responses(ev, sg)
	out := make([]ranked, 0, len(cands))
	if q >= 0 {
		model, err := rs.spread(q)
		if err != nil {
			return cands
		}
		for _, cd := range cands {
			real, err := rs.leak(cd.idx, q)
			sse := math.Inf(1)
			if err == nil {
				sse = ev.misfit(func(k int) float64 { return real[k] - model[k] })
			}
			out = append(out, ranked{idx: cd.idx, sse: sse, size: q})
		}
		return out
	}
	his := make([]float64, len(cands))
	top := 0.0
	for i, cd := range cands {
		his[i] = 3 * math.Max(math.Max(ev.dI, cd.size), 0.1)
		top = math.Max(top, his[i])
	}
	m1, err1 := rs.spread(top / 2)
	m2, err2 := rs.spread(top)
	if err1 != nil || err2 != nil {
		return cands
	}
	model := fitQuadratic(top/2, m1, top, m2)
	balance := func(qq float64) float64 { return ev.wI * (ev.dI - qq) * (ev.dI - qq) }
	for i, cd := range cands {
		hi := his[i]
		path := &d.path
		path.reset()
		path.keep(0, rs.sg.ref)
		r1, err1 := rs.leak(cd.idx, hi/2)
		if err1 == nil {
			path.keep(hi/2, d.trial)
			rs.from = path.blend(hi, 0, 1)
		}
		r2, err2 := rs.leak(cd.idx, hi)
		if err2 == nil {
			path.keep(hi, d.trial)
		}
		if err1 != nil || err2 != nil {
			out = append(out, ranked{idx: cd.idx, sse: math.Inf(1)})
			continue
		}
		real := fitQuadratic(hi/2, r1, hi, r2)
		best, _ := golden(func(qq float64) float64 {
			return ev.misfit(func(k int) float64 { return real.at(k, qq) - model.at(k, qq) }) + balance(qq)
		}, 0, hi, 40)
		rs.from = path.blend(best, 0, 1, 2)
		rb, err := rs.leak(cd.idx, best)
		sse := math.Inf(1)
		if err == nil {
			sse = ev.misfit(func(k int) float64 { return rb[k] - model.at(k, best) }) + balance(best)
		}
		out = append(out, ranked{idx: cd.idx, sse: sse, size: best})
	}
	return out
}

// refineBlockages re-scores the best linear blockage candidates with the
// non-linear open-fraction fit.
func (d *Detector) refineBlockages(ev evidence, sg *signatures, cands []ranked) []ranked {
	rs := d.responses(ev, sg)
	out := make([]ranked, 0, len(cands))
	for _, cd := range cands {
		f, e := d.fitOpenFraction(cd.idx, ev, rs)
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
	sens, err := d.solver.SensitivitiesInto(ref, obs, d.sensBuf)
	if err != nil {
		return nil, fmt.Errorf("sensitivities: %w", err)
	}
	d.sensBuf = sens
	sg := &signatures{sens: sens, ubar: make([]float64, len(sensors)), cond: c, ref: ref}
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

// rank sorts hypotheses by misfit, keeps the best n, and turns misfits
// into scores: the likelihood of each relative to the best,
// exp(−(SSE − SSE_best)/2). Ties keep their order. From a list much
// longer than n (a fit at every junction of a zone) the best n are
// selected instead of sorting the whole list: the same n in the same
// order as the stable sort's first n.
func rank(rs []ranked, n int) ([]ranked, []float64) {
	if n > 0 && len(rs) > 8*n && !anyNaN(rs) {
		rs = smallest(rs, n)
	} else {
		sort.SliceStable(rs, func(a, b int) bool { return rs[a].sse < rs[b].sse })
		if len(rs) > n {
			rs = rs[:n]
		}
	}
	scores := make([]float64, len(rs))
	for i, r := range rs {
		scores[i] = math.Exp(-(r.sse - rs[0].sse) / 2)
	}
	return rs, scores
}

// smallest returns the n entries of rs with the least misfit, ascending,
// ties in their order in rs: a bounded insertion sort in one pass.
func smallest(rs []ranked, n int) []ranked {
	out := make([]ranked, 0, n+1)
	for _, r := range rs {
		if len(out) == n && !(r.sse < out[n-1].sse) {
			continue
		}
		// After every entry of equal misfit already kept.
		i := sort.Search(len(out), func(i int) bool { return out[i].sse > r.sse })
		out = append(out, ranked{})
		copy(out[i+1:], out[i:])
		out[i] = r
		if len(out) > n {
			out = out[:n]
		}
	}
	return out
}

// anyNaN reports whether some misfit is NaN, which the stable sort
// orders by position alone.
func anyNaN(rs []ranked) bool {
	for _, r := range rs {
		if math.IsNaN(r.sse) {
			return true
		}
	}
	return false
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
	d.acceptAll(zi, ev, leak, now, true, f)
}

// acceptAll is accept for one change explained by several findings (two
// leaks at once); watch false raises them without the day of refining,
// whose re-ranking fits one leak to the whole picture.
func (d *Detector) acceptAll(zi int, ev evidence, leak float64, now time.Time, watch bool, fs ...finding.Finding) {
	for _, f := range fs {
		d.takeIn(zi, ev, now, watch, f, &leak)
	}
	d.settle(zi, leak, now)
}

// seenAgain starts the note an updated finding carries of its latest look.
const seenAgain = "; seen again "

// takeIn raises f or, when it is a change an open finding already
// reports, updates that one (and then it moves no baseline: *leak = 0).
func (d *Detector) takeIn(zi int, ev evidence, now time.Time, watch bool, f finding.Finding, leak *float64) {
	if i, ok := d.sameEvent(f); ok {
		old := &d.st.Findings[i]
		// The change is the one an open finding already reports (a
		// blockage's effect grows and shrinks with the day's flows): the
		// finding is updated, not raised again. Its candidates stay those
		// it was located by (a day of evidence); a later look, from hours
		// of the change's swing, is noted beside them.
		if k := strings.Index(old.Evidence, seenAgain); k >= 0 {
			old.Evidence = old.Evidence[:k]
		}
		best := ""
		if len(f.Candidates) > 0 {
			best = ", best " + f.Candidates[0].ID
		}
		old.Evidence += seenAgain + f.Raised.UTC().Format("2006-01-02 15:04") + best
		d.updated = append(d.updated, *old)
		*leak = 0
		return
	}
	idx := d.raise(f)
	if watch && (f.Kind == finding.Leak || f.Kind == finding.Blockage) {
		d.watch(idx, zi, ev, now)
	}
}

// settle resets a zone's tests after its change was explained and takes
// a leak of the given size into the baselines.
func (d *Detector) settle(zi int, leak float64, now time.Time) {
	zs := &d.st.Zones[zi]
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
	fits := d.leakFits(zi, ev, sg, size)
	short, _ := rank(append([]ranked(nil), fits...), shortlist)
	top, scores := rank(d.refineLeaks(ev, sg, short, size), d.cfg.Candidates)
	meterSSE := 0.0
	for k := range ev.sensors {
		r := ev.dr[k] + size*sg.ubar[k]
		meterSSE += ev.w[k] * r * r
	}
	if d.cfg.Trace != nil {
		d.tracef("%s zone %s: %s (onset %s); leak %s; meter-error misfit %.1f; %d loggers",
			now.UTC().Format(time.RFC3339), zone, why, onset.UTC().Format(time.RFC3339), d.traceBest(top, 0, false), meterSSE, len(ev.sensors))
	}
	// A meter error must explain the residuals clearly better than the best
	// leak (by more than the 2 units of SSE one parameter may buy, Akaike
	// 1974) before the finding blames the instrument.
	if len(top) > 0 && meterSSE+2 < top[0].sse && len(d.zones[zi].inlets)+len(d.zones[zi].outlets) > 0 {
		d.meterFault(zi, ev, size, onset, now, why+", but pressures did not fall as a leak of that size would")
		return true
	}
	single := math.Inf(1)
	if len(top) > 0 {
		single = top[0].sse
	}
	if d.grownLeak(zi, fits, size, now, why) || d.raisePair(zi, ev, sg, fits, size, single, onset, now, why) {
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

// grownLeak asks whether more water lost in zone zi (q L/s; fits are the
// zone's linear leak fits at q, leakFits) is an open leak of the zone growing (a crack opening) rather than a
// second leak: it is when a leak of q at the open leak's best place fits
// the residuals within 2 + 2·ln N of the best place of the zone (the
// margin by which pairFit wants a second place; N the zone's junctions).
// The open leak then grows by q, and true is returned.
func (d *Detector) grownLeak(zi int, fits []ranked, q float64, now time.Time, why string) bool {
	best := math.Inf(1)
	at := map[int]float64{}
	for _, r := range fits {
		best = math.Min(best, r.sse)
		at[r.idx] = r.sse
	}
	margin := 2 + 2*math.Log(float64(max(len(d.zones[zi].junctions), 1)))
	for i := len(d.st.Findings) - 1; i >= 0; i-- {
		g := &d.st.Findings[i]
		if g.Kind != finding.Leak || g.Zone != d.zones[zi].z.ID || len(g.Candidates) == 0 || (i < len(d.st.Resolved) && d.st.Resolved[i]) {
			continue
		}
		j, ok := d.net.NodeIndex(g.Candidates[0].ID)
		if !ok {
			continue
		}
		if sse, ok := at[j]; !ok || sse-best > margin {
			continue
		}
		d.tracef("%s zone %s: leak at %s grew by %.2f L/s (misfit %.1f there, %.1f at the best place)", now.UTC().Format(time.RFC3339), g.Zone, g.Candidates[0].ID, q, at[j], best)
		g.Evidence = fmt.Sprintf("%s | grew by %.2f L/s at %s: %s", g.Evidence, q, now.UTC().Format("2006-01-02 15:04"), why)
		g.SizeLPS = round2(g.SizeLPS + q)
		d.updated = append(d.updated, *g)
		d.settle(zi, q, now)
		return true
	}
	return false
}

// raisePair raises two leak findings in place of one when pairFit finds
// that two leaks explain the change of size q clearly better.
func (d *Detector) raisePair(zi int, ev evidence, sg *signatures, fits []ranked, q, single float64, onset, now time.Time, why string) bool {
	pair, ok := d.pairFit(zi, ev, sg, fits, q, single)
	if !ok {
		return false
	}
	fs := make([]finding.Finding, len(pair))
	for i, part := range pair {
		fs[i] = finding.Finding{Kind: finding.Leak, Zone: d.zones[zi].z.ID, Onset: onset, Raised: now, SizeLPS: round2(part.size),
			Candidates: d.leakCandidates(part.ev, sg, part.size)}
		if len(fs[i].Candidates) == 0 {
			fs[i].Candidates = []finding.Candidate{{ID: d.net.Nodes[part.at].ID, Score: 1}}
		}
	}
	for i, part := range pair {
		fs[i].Evidence = fmt.Sprintf("%s since %s; pressure residuals (%s) match two leaks better than one: this one of about %.2f L/s at %s, the other of about %.2f L/s at %s",
			why, onset.UTC().Format("2006-01-02 15:04"), describeResiduals(d, ev, 3), part.size, fs[i].Candidates[0].ID, pair[1-i].size, fs[1-i].Candidates[0].ID)
	}
	d.acceptAll(zi, ev, q, now, false, fs...)
	return true
}

// leakPart is one of two leaks that explain a change together: its size,
// its best place, and the evidence with the other leak's (linear) part
// taken out.
type leakPart struct {
	at   int
	size float64
	ev   evidence
}

// pairFit asks whether two leaks explain the residuals of a zone change
// of q L/s clearly better than one (fits are the zone's linear single-leak
// fits at q, leakFits; single is the misfit of the best one
// after the non-linear re-scoring: a large leak near a logger is far from
// linear, and a linear single fit would leave a misfit that a second
// place can take up): for each of the best single-leak
// places a and every other junction b of the zone, the linear residual of
// x L/s at a and q − x at b, x fitted by weighted least squares, each
// part at least a fifth of q. The pair is taken when it lowers the misfit
// by more than 2 + 2·ln N (N junctions in the zone): the 2 that one more
// parameter may buy (Akaike 1974) and the 2·ln N that choosing the second
// place among N buys by chance (a Bonferroni bound on the best of N
// one-parameter fits, our choice).
func (d *Detector) pairFit(zi int, ev evidence, sg *signatures, fits []ranked, q, single float64) ([2]leakPart, bool) {
	var out [2]leakPart
	junctions := d.zones[zi].junctions
	if len(junctions) < 2 || len(ev.sensors) < 3 {
		return out, false
	}
	best1 := single
	for _, r := range fits {
		best1 = math.Min(best1, r.sse)
	}
	short, _ := rank(append([]ranked(nil), fits...), shortlist)
	m := len(ev.sensors)
	g := func(j int, dst []float64) {
		for k := range dst {
			dst[k] = sg.sens.Outflow[k][j] - sg.ubar[k]
		}
	}
	ga, gb, r0, dd := make([]float64, m), make([]float64, m), make([]float64, m), make([]float64, m)
	best2, bestA, bestB, bestX := math.Inf(1), -1, -1, 0.0
	for _, a := range short {
		g(a.idx, ga)
		for _, b := range junctions {
			if b == a.idx {
				continue
			}
			g(b, gb)
			num, den := 0.0, 0.0
			for k := 0; k < m; k++ {
				r0[k] = ev.dr[k] - q*gb[k]
				dd[k] = ga[k] - gb[k]
				num += ev.w[k] * r0[k] * dd[k]
				den += ev.w[k] * dd[k] * dd[k]
			}
			if den <= 0 {
				continue
			}
			x := num / den
			if x < 0.2*q || x > 0.8*q {
				continue
			}
			sse := 0.0
			for k := 0; k < m; k++ {
				r := r0[k] - x*dd[k]
				sse += ev.w[k] * r * r
			}
			if sse < best2 {
				best2, bestA, bestB, bestX = sse, a.idx, b, x
			}
		}
	}
	if bestA < 0 || best1-best2 <= 2+2*math.Log(float64(len(junctions))) {
		return out, false
	}
	d.tracef("zone %s: two leaks, %.2f L/s at %s and %.2f L/s at %s, misfit %.1f against %.1f for one",
		d.zones[zi].z.ID, bestX, d.net.Nodes[bestA].ID, q-bestX, d.net.Nodes[bestB].ID, best2, best1)
	part := func(at int, size float64, other int, otherSize float64) leakPart {
		e := ev
		e.dr = make([]float64, m)
		g(other, gb)
		for k := range e.dr {
			e.dr[k] = ev.dr[k] - otherSize*gb[k]
		}
		return leakPart{at: at, size: size, ev: e}
	}
	out[0] = part(bestA, bestX, bestB, q-bestX)
	out[1] = part(bestB, q-bestX, bestA, bestX)
	return out, true
}

// leakCandidates ranks the places of one leak of size q (linear fits,
// then the non-linear re-scoring of the shortlist).
func (d *Detector) leakCandidates(ev evidence, sg *signatures, q float64) []finding.Candidate {
	short, _ := rank(d.leakFits(ev.zone, ev, sg, q), shortlist)
	top, scores := rank(d.refineLeaks(ev, sg, short, q), d.cfg.Candidates)
	cs := []finding.Candidate{}
	for i, r := range top {
		cs = append(cs, finding.Candidate{ID: d.net.Nodes[r.idx].ID, Score: round2(scores[i])})
	}
	return cs
}

// meterFault raises a sensor fault on the zone's flow meters: the
// residual picture is that of the inflow-matched model spreading water
// that is not there (a meter over-reading: loggers read above the model)
// or missing water that is (under-reading: below it). The meters are left
// out of the balance until they read plausibly again and the error delta
// (L/s, reading minus truth) the finding fitted is gone (meterBack).
func (d *Detector) meterFault(zi int, ev evidence, delta float64, onset, now time.Time, why string) {
	zs := &d.st.Zones[zi]
	zs.MeterErr, zs.OutSum, zs.OutN = delta, 0, 0
	f := finding.Finding{Kind: finding.SensorFault, Zone: d.zones[zi].z.ID, Onset: onset, Raised: now, Candidates: []finding.Candidate{}}
	for _, m := range d.zones[zi].boundary {
		f.Candidates = append(f.Candidates, finding.Candidate{ID: d.sens[m.sensor].s.ID, Score: 1})
		d.st.Sensors[m.sensor].Excluded = true
	}
	f.Evidence = fmt.Sprintf("%s: loggers read %s against the model, as a zone flow meter reading wrong would make them; check the zone's flow meters",
		why, describeResiduals(d, ev, 3))
	d.accept(zi, ev, 0, now, f)
}

// meterFit fits a zone flow meter error δ (L/s, reading minus truth) to
// the evidence: the inflow-matched model spreads δ over the zone's
// demand, so every logger's residual moves by −δ·ubar, and the balance
// by δ. It returns δ and the misfit, or +Inf when the zone has no meter
// or no balance, δ is within the meter's stated accuracy, or the balance
// does not show it.
func (d *Detector) meterFit(ev evidence, sg *signatures) (float64, float64) {
	z := &d.zones[ev.zone]
	if len(z.inlets)+len(z.outlets) == 0 || ev.wI <= 0 {
		return 0, math.Inf(1)
	}
	num, den := ev.wI*ev.dI, ev.wI
	for k := range ev.sensors {
		num -= ev.w[k] * ev.dr[k] * sg.ubar[k]
		den += ev.w[k] * sg.ubar[k] * sg.ubar[k]
	}
	delta := num / den
	acc := math.Inf(1)
	for _, m := range z.boundary {
		acc = math.Min(acc, d.sens[m.sensor].accuracy)
	}
	// A meter's error shows in the balance itself, at least two of its σ,
	// on the side the pressures say: otherwise the pressures moved for
	// another reason (a leak mended shows as a fall of the balance with
	// pressures rising near the leak).
	if math.Abs(delta) <= acc || math.Abs(balanceZ(ev)) <= 2 || delta*ev.dI <= 0 {
		return delta, math.Inf(1)
	}
	sse := ev.wI * (ev.dI - delta) * (ev.dI - delta)
	sse += ev.misfit(func(k int) float64 { return -delta * sg.ubar[k] })
	return delta, sse
}

// hypotheses are the ranked physical explanations of a residual picture:
// blockages and leaks, each with the misfit of its best candidate, or
// +Inf where that kind is not a candidate explanation at all.
type hypotheses struct {
	blocks, leaks           []ranked
	blockScores, leakScores []float64
	bestBlockage, bestLeak  float64
	// meter is the misfit of a zone flow meter error of meterSize L/s.
	meter, meterSize float64
	sg               *signatures
}

// physicalHypotheses ranks blockages and leaks for the evidence of a
// residual alarm: the linear fits at every link and junction of the zone
// (adjoint signatures), then the non-linear re-scoring of each shortlist.
// Each explanation must matter in practice as well as fit: a blockage
// must move the loggers by more than their accuracy (largestChange), and a leak
// must show in the zone balance (the primary leak evidence), at least
// two of its σ above normal; a kind that cannot pass is not re-scored.
func (d *Detector) physicalHypotheses(ev evidence) hypotheses {
	hy := hypotheses{bestBlockage: math.Inf(1), bestLeak: math.Inf(1), meter: math.Inf(1)}
	if len(ev.sensors) < 2 {
		return hy
	}
	sg, err := d.signatures(ev)
	if err != nil {
		return hy
	}
	hy.sg = sg
	hy.meterSize, hy.meter = d.meterFit(ev, sg)
	if d.largestChange(ev) {
		short, _ := rank(d.blockageFits(ev.zone, ev, sg), shortlist)
		hy.blocks, hy.blockScores = rank(d.refineBlockages(ev, sg, short), d.cfg.Candidates)
		if len(hy.blocks) > 0 {
			hy.bestBlockage = hy.blocks[0].sse
		}
	}
	if z := balanceZ(ev); z > 2 {
		// The leak's size is fitted to the pressures and the balance
		// together, each by its weight: where the balance is precise (a
		// small zone) it sets the size; where the zone's whole demand
		// swings from day to day by more than a leak (a large one), the
		// balance's rise holds that swing too, which the inflow-matched
		// model spreads over the zone as it really is, and only the
		// pressures tell the leak's share.
		short, _ := rank(d.leakFits(ev.zone, ev, sg, -1), shortlist)
		hy.leaks, hy.leakScores = rank(d.refineLeaks(ev, sg, short, -1), d.cfg.Candidates)
		if len(hy.leaks) > 0 && hy.leaks[0].size > 0 {
			hy.bestLeak = hy.leaks[0].sse
		}
	}
	return hy
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
	hy := d.physicalHypotheses(ev)
	bTop, bScores, lTop, lScores := hy.blocks, hy.blockScores, hy.leaks, hy.leakScores
	bestB, bestL := hy.bestBlockage, hy.bestLeak
	desc := describeResiduals(d, ev, 3)
	if d.cfg.Trace != nil {
		d.tracef("%s residual alarm on %s (onset %s): moved %+.3f m (accuracy %.3f); sensor-fault misfit %.1f; blockage %s; leak %s; meter error %+.2f L/s misfit %.1f; balance %+.2f L/s (%.1fσ); %d loggers",
			now.UTC().Format(time.RFC3339), d.sens[si].s.ID, onset.UTC().Format(time.RFC3339), ev.dr[me], d.sens[si].accuracy, faultSSE,
			d.traceBest(bTop, bestB, true), d.traceBest(lTop, bestL, false), hy.meterSize, hy.meter, ev.dI, balanceZ(ev), len(ev.sensors))
	}
	switch {
	case hy.meter+2 < math.Min(faultSSE, math.Min(bestB, bestL)):
		// Every logger moved as the zone meter's error would move them, and
		// by more than the 2 units of SSE one parameter may buy (Akaike
		// 1974) better than any other explanation.
		side := "over"
		if hy.meterSize < 0 {
			side = "under"
		}
		d.meterFault(zi, ev, hy.meterSize, onset, now, fmt.Sprintf("pressures moved together since %s in the pattern of the zone's flow metering %s-reading by about %.2f L/s (zone imbalance %+.2f L/s)",
			onset.UTC().Format("2006-01-02 15:04"), side, math.Abs(hy.meterSize), ev.dI))
		return true
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
		size := l.size // fitted to the pressures and the balance together
		if hy.sg != nil {
			// Whether two leaks share the water, or an open one has grown,
			// is weighed on all the water the balance says is gone.
			total := size
			if ev.dI > 0 {
				total = ev.dI
			}
			why := fmt.Sprintf("zone imbalance %+.2f L/s", ev.dI)
			fits := d.leakFits(zi, ev, hy.sg, total)
			if d.grownLeak(zi, fits, total, now, why) || d.raisePair(zi, ev, hy.sg, fits, total, l.sse, onset, now, why) {
				return true
			}
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

// balanceZ is the zone imbalance change of the evidence in its σ.
func balanceZ(ev evidence) float64 {
	if ev.wI <= 0 {
		return 0
	}
	return ev.dI * math.Sqrt(ev.wI)
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

// sameEvent finds an open blockage of the same zone whose candidates
// overlap f's or touch them (share a node): the same constriction seen
// again. Pipes in series along one main leave nearly the same picture,
// so a later look may rank another pipe along it first.
// Leaks are matched by grownLeak instead.
func (d *Detector) sameEvent(f finding.Finding) (int, bool) {
	if f.Kind != finding.Blockage {
		return 0, false
	}
	ends := func(cs []finding.Candidate) map[int]bool {
		m := map[int]bool{}
		for _, c := range cs {
			if l, ok := d.net.LinkIndex(c.ID); ok {
				m[d.net.Links[l].From], m[d.net.Links[l].To] = true, true
			}
		}
		return m
	}
	mine := ends(f.Candidates)
	for i := len(d.st.Findings) - 1; i >= 0; i-- {
		g := d.st.Findings[i]
		if g.Kind != f.Kind || g.Zone != f.Zone || (i < len(d.st.Resolved) && d.st.Resolved[i]) {
			continue
		}
		for n := range ends(g.Candidates) {
			if mine[n] {
				return i, true
			}
		}
	}
	return 0, false
}

// largestChange reports whether the loggers of the evidence moved, taken
// together, by more than their stated accuracy: the root-sum-square of
// each logger's change over its accuracy, less what the noise of the mean
// change adds (1/w per logger), exceeds one. A logger's accuracy bounds
// the slow drift a residual change may be; drifts of independent loggers
// projected onto the direction of a change picture have that same size,
// so a picture that several loggers share is a physical change sooner
// than one logger alone. For one logger it is the test that its change
// exceeds its accuracy.
func (d *Detector) largestChange(ev evidence) bool {
	sum := 0.0
	for k, si := range ev.sensors {
		a := d.sens[si].accuracy
		noise := 0.0
		if ev.w[k] > 0 {
			noise = 1 / ev.w[k]
		}
		sum += (ev.dr[k]*ev.dr[k] - noise) / (a * a)
	}
	return sum > 1
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

// tracef sends one decision line to Config.Trace.
func (d *Detector) tracef(format string, args ...any) {
	if d.cfg.Trace != nil {
		d.cfg.Trace(fmt.Sprintf(format, args...))
	}
}

// traceBest describes the best of a ranked list for the trace: its place,
// size and misfit, or why the kind was not in the running (best = +Inf).
func (d *Detector) traceBest(top []ranked, best float64, link bool) string {
	if len(top) == 0 {
		return "not considered"
	}
	var id string
	if link {
		id = d.net.Links[top[0].idx].ID
	} else {
		id = d.net.Nodes[top[0].idx].ID
	}
	s := fmt.Sprintf("%s (size %.3g) misfit %.1f", id, top[0].size, top[0].sse)
	if math.IsInf(best, 1) {
		s += " (not eligible)"
	}
	return s
}

func round2(x float64) float64 { return math.Round(x*100) / 100 }

// trialPath keeps full solutions of one candidate at points of its
// parameter (ln 1/f² of a blockage's open fraction, a leak's size), so
// that a later solve of the same candidate can start from a blend of them
// rather than from the reference. Its memory is the Detector's, reused
// from candidate to candidate (heads, flows and link states of a few
// solutions).
type trialPath struct {
	pts   []pathPoint
	n     int
	start hydraulic.Solution
}

// pathPoint is one kept solution: what a warm start reads of it.
type pathPoint struct {
	at         float64
	head, flow []float64
	state      []hydraulic.LinkState
}

// reset forgets the kept points.
func (p *trialPath) reset() { p.n = 0 }

// keep adds sol as the point at parameter value at; points are kept in
// the order given.
func (p *trialPath) keep(at float64, sol *hydraulic.Solution) {
	if p.n == len(p.pts) {
		p.pts = append(p.pts, pathPoint{})
	}
	q := &p.pts[p.n]
	q.at = at
	q.head = append(q.head[:0], sol.Head...)
	q.flow = append(q.flow[:0], sol.Flow...)
	q.state = append(q.state[:0], sol.State...)
	p.n++
}

// around returns the start at at blended from the two kept points either
// side of it (points kept in ascending order), or the last point's
// solution beyond it.
func (p *trialPath) around(at float64) *hydraulic.Solution {
	i := 1
	for i < p.n-1 && p.pts[i].at < at {
		i++
	}
	if i >= p.n || at >= p.pts[i].at {
		return p.blend(at, p.n-1)
	}
	return p.blend(at, i-1, i)
}

// blend returns the start at parameter value at interpolated (or
// extrapolated) through the kept points idx by Lagrange's formula, heads
// and flows alike, with the link states of the point nearest at. The
// weights sum to one and reproduce a linear function of the parameter, so
// where the conditions are linear in it (a leak's size in the demand; a
// link's resistance, which leaves the demand alone) the blended flows
// meet continuity at the conditions of at, and only the links' energy
// equations are left for Newton's method. The start is the trialPath's:
// it is overwritten by the next blend.
func (p *trialPath) blend(at float64, idx ...int) *hydraulic.Solution {
	w := make([]float64, len(idx))
	near := idx[0]
	for a, i := range idx {
		w[a] = 1
		for _, j := range idx {
			if j != i {
				w[a] *= (at - p.pts[j].at) / (p.pts[i].at - p.pts[j].at)
			}
		}
		if math.Abs(at-p.pts[i].at) < math.Abs(at-p.pts[near].at) {
			near = i
		}
	}
	s := &p.start
	first := &p.pts[idx[0]]
	s.Head = append(s.Head[:0], first.head...)
	s.Flow = append(s.Flow[:0], first.flow...)
	for v := range s.Head {
		s.Head[v] *= w[0]
	}
	for v := range s.Flow {
		s.Flow[v] *= w[0]
	}
	for a := 1; a < len(idx); a++ {
		q := &p.pts[idx[a]]
		for v, h := range q.head {
			s.Head[v] += w[a] * h
		}
		for v, f := range q.flow {
			s.Flow[v] += w[a] * f
		}
	}
	s.State = append(s.State[:0], p.pts[near].state...)
	return s
}
