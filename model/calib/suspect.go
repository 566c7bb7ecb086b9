package calib

import (
	"context"
	"fmt"
	"math"
	"sort"
	"strings"

	"gonum.org/v1/gonum/mat"

	"plumbline/model/hydraulic"
	"plumbline/model/network"
)

// suspectFactors are the resistance factors the check tries on each
// candidate link; +Inf shuts it.
var suspectFactors = []float64{10, 1000, math.Inf(1)}

// refitCandidates is how many scanned links are refitted, and
// refitDamping the Levenberg-Marquardt damping of the refit's step.
const (
	refitCandidates = 8
	refitDamping    = 1e-2
)

// suspects runs the closed-valve and topology check on the fitted state
// cur of batch b: a screen of every link by the linearised fit of a
// log-resistance increase to the remaining residuals, then full solves
// of the best candidates at rising resistance factors on a subset of the
// snapshots. scale holds the sensors' noise factors.
func (m *model) suspects(ctx context.Context, b *batch, cur *state, priorScreen *linkScreen, free []bool, scale []float64) ([]Suspect, error) {
	nl := len(m.net.Links)
	type cand struct {
		link  int
		score float64
	}
	// The fitted state is screened on a spread subset of the snapshots.
	scr, scrIdx := spread(b, 4*m.set.SuspectSnapshots)
	scrB := newBatch(scr, m.sens)
	scrWarm := &state{sols: make([]*hydraulic.Solution, len(scr))}
	for k, j := range scrIdx {
		scrWarm.sols[k] = cur.sols[j]
	}
	scrSt, err := m.evaluate(ctx, scrB, cur.theta, scrWarm, noTrial)
	if err != nil {
		return nil, err
	}
	fitScreen := &linkScreen{g: make([]float64, nl), h: make([]float64, nl)}
	J := mat.NewDense(max(1, scrB.rows), max(1, len(m.params)), nil)
	if err := m.jacobian(ctx, scrB, scrSt, J, scale, fitScreen); err != nil {
		return nil, err
	}
	// Screen at the fitted state and at the recorded one: the fit may
	// have bent roughness to mimic a shut valve, hiding part of its mark.
	seen := map[int]bool{}
	var cands []cand
	for _, screen := range []*linkScreen{fitScreen, priorScreen} {
		if screen == nil {
			continue
		}
		var cs []cand
		for l := range m.net.Links {
			lk := &m.net.Links[l]
			if lk.Kind == network.Pump || lk.Status == network.Closed || screen.h[l] <= 0 {
				continue
			}
			if screen.g[l] <= 0 { // only a resistance increase
				continue
			}
			cs = append(cs, cand{l, screen.g[l] * screen.g[l] / screen.h[l]})
		}
		sort.SliceStable(cs, func(a, c int) bool { return cs[a].score > cs[c].score })
		for _, c := range cs[:min(len(cs), m.set.SuspectCandidates)] {
			if !seen[c.link] {
				seen[c.link] = true
				cands = append(cands, c)
			}
		}
	}
	if len(cands) == 0 {
		return nil, nil
	}
	sub, subIdx := spread(b, m.set.SuspectSnapshots)
	sb := newBatch(sub, m.sens)
	warm := &state{sols: make([]*hydraulic.Solution, len(sub))}
	for k, j := range subIdx {
		warm.sols[k] = cur.sols[j]
	}
	base, err := m.evaluate(ctx, sb, cur.theta, warm, noTrial)
	if err != nil {
		return nil, err
	}
	perSensor := func(r []float64) []float64 {
		out := make([]float64, len(m.sens))
		for i, v := range r {
			k := sb.sen[i]
			out[k] += sb.w[i] * v * v / scale[k]
		}
		return out
	}
	sum := func(v []float64) float64 {
		var s float64
		for _, x := range v {
			s += x
		}
		return s
	}
	baseS := perSensor(base.r)
	baseCost := sum(baseS)
	// Scan with the fitted parameters held.
	type scanned struct {
		link int
		f    float64
		cost float64
	}
	var scans []scanned
	for _, c := range cands {
		bestF, bestCost := 1.0, baseCost
		for _, f := range suspectFactors {
			st, err := m.evaluate(ctx, sb, cur.theta, base, trial{link: c.link, factor: f})
			if err != nil {
				if ctx.Err() != nil {
					return nil, ctx.Err()
				}
				continue // e.g. shutting it cuts junctions off
			}
			if cst := sum(perSensor(st.r)); cst < bestCost {
				bestF, bestCost = f, cst
			}
		}
		if bestCost < baseCost {
			scans = append(scans, scanned{c.link, bestF, bestCost})
		}
	}
	sort.SliceStable(scans, func(a, c int) bool { return scans[a].cost < scans[c].cost })
	// The best few are refitted with the link's resistance raised, so
	// that roughness bent to mimic the valve can move back.
	var out []Suspect
	np := len(m.params)
	refit := func(tr trial) (*state, error) {
		// One damped Gauss-Newton step of all free parameters from the
		// fitted values, with the link changed; kept if it helps.
		st, err := m.evaluate(ctx, sb, cur.theta, base, tr)
		if err != nil {
			return nil, err
		}
		Jt := mat.NewDense(max(1, sb.rows), max(1, np), nil)
		if err := m.jacobian(ctx, sb, st, Jt, nil, nil); err != nil {
			return nil, err
		}
		A, g := normal(Jt, sb.w, st.r, np)
		var set []int
		for i, f := range free {
			if f {
				set = append(set, i)
				g[i] -= (cur.theta[i] - m.params[i].prior) * m.params[i].precision()
			}
		}
		if len(set) == 0 {
			return st, nil
		}
		delta, _, ok := m.solveSet(A, g, set, refitDamping)
		if !ok {
			return st, nil
		}
		th := append([]float64(nil), cur.theta...)
		for _, i := range set {
			th[i] = math.Min(m.params[i].hi, math.Max(m.params[i].lo, th[i]+delta[i]))
		}
		st2, err := m.evaluate(ctx, sb, th, st, tr)
		if err != nil || sb.cost(st2.r) >= sb.cost(st.r) {
			return st, nil
		}
		return st2, nil
	}
	// The baseline is refitted the same way, so that only the link's
	// change counts, not the refit on fewer snapshots.
	if len(scans) > 0 {
		st, err := refit(noTrial)
		if err != nil {
			return nil, err
		}
		baseS = perSensor(st.r)
		baseCost = sum(baseS)
		base.r = st.r
	}
	for _, sc := range scans[:min(len(scans), refitCandidates)] {
		factors := []float64{sc.f}
		if !math.IsInf(sc.f, 1) {
			factors = append(factors, math.Inf(1))
		}
		bestF, bestCost := 1.0, baseCost
		var bestR []float64
		for _, f := range factors {
			fitted, err := refit(trial{link: sc.link, factor: f})
			if err != nil {
				if ctx.Err() != nil {
					return nil, ctx.Err()
				}
				continue
			}
			if cst := sum(perSensor(fitted.r)); cst < bestCost {
				bestF, bestCost, bestR = f, cst, fitted.r
			}
		}
		drop := baseCost - bestCost
		if bestF < m.set.SuspectFactor || drop < math.Max(25, 0.05*baseCost) {
			continue
		}
		out = append(out, m.suspect(sc.link, bestF, baseCost, bestCost, baseS, perSensor(bestR), sb, base.r, bestR, cur))
	}
	sort.SliceStable(out, func(a, c int) bool {
		return out[a].MisfitBefore-out[a].MisfitAfter > out[c].MisfitBefore-out[c].MisfitAfter
	})
	return out, nil
}

// spread returns up to n snapshots of b spread evenly over their demand
// levels, with their indices in b.
func spread(b *batch, n int) ([]*snapData, []int) {
	idx := make([]int, len(b.snaps))
	for i := range idx {
		idx[i] = i
	}
	sort.SliceStable(idx, func(a, c int) bool { return b.snaps[idx[a]].level < b.snaps[idx[c]].level })
	n = min(n, len(idx))
	var sub []*snapData
	var subIdx []int
	for k := range n {
		j := idx[len(idx)/2]
		if n > 1 {
			j = idx[int(math.Round(float64(k)*float64(len(idx)-1)/float64(n-1)))]
		}
		sub = append(sub, b.snaps[j])
		subIdx = append(subIdx, j)
	}
	return sub, subIdx
}

// suspect writes one suspect with its evidence.
func (m *model) suspect(l int, f, before, after float64, sb, sa []float64, b *batch, rb, ra []float64, cur *state) Suspect {
	lk := &m.net.Links[l]
	s := Suspect{Link: lk.ID, Kind: lk.Kind.String(), MisfitBefore: before, MisfitAfter: after}
	if math.IsInf(f, 1) {
		s.Closed = true
	} else {
		s.Factor = f
	}
	// Sensors whose misfit falls most.
	order := make([]int, len(m.sens))
	for k := range order {
		order[k] = k
	}
	sort.SliceStable(order, func(a, c int) bool { return sb[order[a]]-sa[order[a]] > sb[order[c]]-sa[order[c]] })
	rms := func(r []float64, k int) float64 {
		var s float64
		var n int
		for i, v := range r {
			if b.sen[i] == k {
				s += v * v
				n++
			}
		}
		if n == 0 {
			return 0
		}
		return math.Sqrt(s / float64(n))
	}
	var parts []string
	for _, k := range order[:min(3, len(order))] {
		if sb[k]-sa[k] <= 0 {
			break
		}
		s.Sensors = append(s.Sensors, m.sens[k].s.ID)
		parts = append(parts, fmt.Sprintf("%s RMSE %.3g → %.3g %s", m.sens[k].s.ID, rms(rb, k), rms(ra, k), m.sens[k].s.Quantity.CanonicalUnit()))
	}
	what := fmt.Sprintf("resistance ×%.0f", f)
	if s.Closed {
		what = "it shut"
	}
	limit := "a valve's own loss cannot rise so far when fully open"
	if lk.Kind == network.Pipe {
		limit = fmt.Sprintf("roughness within its bounds explains at most ×%.3g", m.roughnessLimit(l, cur))
	}
	s.Evidence = fmt.Sprintf("%s %s (%s): the readings fit best with %s (%s); weighted misfit over %d snapshots falls from %.4g to %.4g; %s",
		lk.Kind, lk.ID, GroupOfIfPipe(lk), what, limit, len(b.snaps), before, after, strings.Join(parts, "; "))
	return s
}

// GroupOfIfPipe returns a pipe's calibration group, or the valve type of
// a valve.
func GroupOfIfPipe(l *network.Link) string {
	if l.Kind == network.Pipe {
		return GroupOf(l)
	}
	if l.Kind == network.Valve {
		return l.Valve.String()
	}
	return l.Kind.String()
}

// roughnessLimit is the largest factor by which the friction loss of pipe
// l could rise, at the fitted state, by moving its roughness to the
// roughest bound: (C/CMin)^1.852 for Hazen-Williams, f(εmax)/f(ε) at the
// pipe's first-snapshot Reynolds number for Darcy-Weisbach.
func (m *model) roughnessLimit(l int, cur *state) float64 {
	net := cur.nets[0]
	lk := &net.Links[l]
	if net.Headloss != network.DarcyWeisbach {
		return math.Max(1, math.Pow(lk.Roughness/m.set.CMin, hwExp))
	}
	q := 0.0
	if len(cur.sols) > 0 && cur.sols[0] != nil {
		q = math.Abs(cur.sols[0].Flow[l]) / 1000
	}
	d := lk.Diameter / 1000
	nu := net.Viscosity
	if nu <= 0 {
		nu = network.DefaultViscosity
	}
	re := math.Max(4000, q*d/(math.Pi*d*d/4*nu))
	f0 := hydraulic.FrictionFactor(re, math.Max(lk.Roughness, 1e-6)/lk.Diameter)
	f1 := hydraulic.FrictionFactor(re, m.set.EpsMax/lk.Diameter)
	return math.Max(1, f1/f0)
}
