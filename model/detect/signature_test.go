package detect

import (
	"math"
	"testing"
)

// handResidual is the residual a leak of q L/s at junction j leaves at
// every evidence logger of ev, computed from first principles with two
// full solves at the operating point of ev: (a) the real network, where
// the leak's water leaves at j; (b) the inflow-matched model, which
// sees q more inflow and spreads it over the zone's junctions in
// proportion to their demand. The residual is measured − modelled, (a) −
// (b), in m of head (= m of pressure at a fixed node).
func handResidual(t *testing.T, d *Detector, ev evidence, j int, q float64) []float64 {
	t.Helper()
	c := d.refConditions(ev)
	real := c
	real.Demand = append([]float64(nil), c.Demand...)
	real.Demand[j] += q
	a, err := d.solver.Solve(&real, nil)
	if err != nil {
		t.Fatal(err)
	}
	model := c
	model.Demand = append([]float64(nil), c.Demand...)
	total := 0.0
	for _, i := range d.zones[ev.zone].junctions {
		total += c.Demand[i]
	}
	for _, i := range d.zones[ev.zone].junctions {
		model.Demand[i] += q * c.Demand[i] / total
	}
	b, err := d.solver.Solve(&model, nil)
	if err != nil {
		t.Fatal(err)
	}
	out := make([]float64, len(ev.sensors))
	for k, si := range ev.sensors {
		n := d.sens[si].node
		out[k] = a.Head[n] - b.Head[n]
	}
	return out
}

// gridEvidence is the evidence of every logger of the grid town at its
// base demand (scale 1), unit weights and no balance term.
func gridEvidence(t *testing.T) (*Detector, evidence) {
	t.Helper()
	d, err := New(gridConfig(gridTown()))
	if err != nil {
		t.Fatal(err)
	}
	return d, loggerEvidence(d)
}

// loggerEvidence is the evidence of every logger of d's first zone at
// base demand (scale 1), unit weights, no residual and no balance term.
func loggerEvidence(d *Detector) evidence {
	ev := evidence{zone: 0, scale: 1}
	for _, si := range d.zones[0].evidence {
		ev.sensors = append(ev.sensors, si)
		ev.w = append(ev.w, 1)
	}
	ev.dr = make([]float64, len(ev.sensors))
	return ev
}

var sigJunctions = []string{"J-43", "J-05", "J-11", "J-55", "J-30"}

// The linear leak signature S_j − ubar (adjoint sensitivities, Outflow
// minus the demand-weighted mean response) is the derivative of the
// residual a leak leaves, d r / d q at q = 0. Checked against finite
// differences of two full solves by hand (handResidual), the way
// derivatives are checked in numerical optimisation (Nocedal & Wright
// 2006, Numerical Optimization, §8.1, from memory): the central
// difference (r(q) − r(−q))/2q differs from the derivative by O(q²) and
// the one-sided r(q)/q by O(q), so halving q must quarter the central
// error and halve the one-sided one; a wrong signature would leave an
// error that does not shrink with q at all.
func TestLeakSignatureAgainstFiniteDifference(t *testing.T) {
	d, ev := gridEvidence(t)
	sg, err := d.signatures(ev)
	if err != nil {
		t.Fatal(err)
	}
	for _, id := range sigJunctions {
		j, _ := d.net.NodeIndex(id)
		g := make([]float64, len(ev.sensors))
		gmax := 0.0
		for k := range g {
			g[k] = sg.sens.Outflow[k][j] - sg.ubar[k]
			gmax = math.Max(gmax, math.Abs(g[k]))
		}
		if gmax < 1e-3 {
			t.Fatalf("%s: largest signature %.3g m per L/s: too small to check", id, gmax)
		}
		central := func(q float64) (maxErr float64) {
			rp, rm := handResidual(t, d, ev, j, q), handResidual(t, d, ev, j, -q)
			for k := range g {
				maxErr = math.Max(maxErr, math.Abs((rp[k]-rm[k])/(2*q)-g[k]))
			}
			return maxErr
		}
		oneSided := func(q float64) (maxErr float64) {
			r := handResidual(t, d, ev, j, q)
			for k := range g {
				maxErr = math.Max(maxErr, math.Abs(r[k]/q-g[k]))
			}
			return maxErr
		}
		const q = 0.4 // L/s, 3% of the district's 12.6 L/s
		c1, c2 := central(q), central(q/2)
		o1, o2 := oneSided(q), oneSided(q/2)
		t.Logf("%s: max |g| %.4f m/(L/s); central error %.2e → %.2e, one-sided %.2e → %.2e", id, gmax, c1, c2, o1, o2)
		// Linearisation error small against the signature itself: under
		// 1% for the central difference at 3% of the zone's flow.
		if c1 > 0.01*gmax {
			t.Errorf("%s: central difference differs from the signature by %.3g m/(L/s), more than 1%% of its largest entry %.3g", id, c1, gmax)
		}
		// Orders of convergence: 4 for O(q²), 2 for O(q), each ±25%
		// (the next term of the expansion moves the ratio by O(q)).
		if r := c1 / c2; r < 3 || r > 5 {
			t.Errorf("%s: central error ratio %.2f when q halves, want 4 ± 1 (an O(q²) error)", id, r)
		}
		if r := o1 / o2; r < 1.5 || r > 2.5 {
			t.Errorf("%s: one-sided error ratio %.2f when q halves, want 2 ± 0.5 (an O(q) error)", id, r)
		}
	}
}

// refineLeaks' non-linear residual is the same thing without
// linearising: fed the hand-computed residual of a leak at j as the
// evidence, its misfit at j must vanish (to the solver's precision, not
// the linearisation's), and its misfit at another junction j′ must be
// Σ w (r_j − r_j′)² from the hand solves. The linear fit (leakFits, size
// fitted) is only first-order: its size may miss by the linearisation
// error, bounded exactly (Hölder's inequality, unit weights) by
// |q̂ − q| ≤ max_k |r_k − q g_k| · Σ|g_k| / Σ g_k², and it need only put
// j on the shortlist that refineLeaks re-scores, where j must come first.
func TestRefineLeaksAgainstFullSolves(t *testing.T) {
	d, ev := gridEvidence(t)
	sg, err := d.signatures(ev)
	if err != nil {
		t.Fatal(err)
	}
	const q = 0.5 // L/s
	other, _ := d.net.NodeIndex("J-22")
	rOther := handResidual(t, d, ev, other, q)
	for _, id := range sigJunctions {
		j, _ := d.net.NodeIndex(id)
		r := handResidual(t, d, ev, j, q)
		e := ev
		e.dr = r
		norm := 0.0
		for k := range r {
			norm += r[k] * r[k]
		}
		got := d.refineLeaks(e, sg, []ranked{{idx: j}, {idx: other}}, q)
		// The hand solves start cold and refineLeaks' warm: both meet the
		// solver's tolerance (largest imbalance 1e-6 L/s), which moves
		// heads by far less than 1e-6 m; the misfit is a sum of squares
		// of such differences.
		if got[0].sse > 1e-10*math.Max(norm, 1e-6) {
			t.Errorf("%s: refineLeaks misfit %.3g at the true junction, want 0 (|r|² = %.3g)", id, got[0].sse, norm)
		}
		want := 0.0
		for k := range r {
			want += (r[k] - rOther[k]) * (r[k] - rOther[k])
		}
		if math.Abs(got[1].sse-want) > 1e-6*want+1e-12 {
			t.Errorf("%s: refineLeaks misfit at J-22 %.6g, hand solves give %.6g", id, got[1].sse, want)
		}

		fits := d.leakFits(0, e, sg, -1)
		var fit ranked
		for _, f := range fits {
			if f.idx == j {
				fit = f
			}
		}
		maxLin, sumAbs, sumSq := 0.0, 0.0, 0.0
		for k := range r {
			g := sg.sens.Outflow[k][j] - sg.ubar[k]
			maxLin = math.Max(maxLin, math.Abs(r[k]-q*g))
			sumAbs += math.Abs(g)
			sumSq += g * g
		}
		if bound := maxLin * sumAbs / sumSq; math.Abs(fit.size-q) > bound*(1+1e-9) {
			t.Errorf("%s: linear fit size %.4f L/s, true %.4f: off by more than the linearisation bound %.4f", id, fit.size, q, bound)
		}
		short, _ := rank(fits, shortlist)
		top, _ := rank(d.refineLeaks(e, sg, short, q), 1)
		if len(top) == 0 || top[0].idx != j {
			names := []string{}
			for _, s := range short {
				names = append(names, d.net.Nodes[s.idx].ID)
			}
			t.Errorf("%s: not first after re-scoring the linear shortlist %v", id, names)
		}
	}
}

// handHeads is the head change at every evidence logger of ev when link l
// of the reference conditions has its resistance multiplied by factor,
// from two cold full solves.
func handHeads(t *testing.T, d *Detector, ev evidence, l int, factor float64) []float64 {
	t.Helper()
	c := d.refConditions(ev)
	a, err := d.solver.Solve(&c, nil)
	if err != nil {
		t.Fatal(err)
	}
	c.ResistanceFactor = make([]float64, len(d.net.Links))
	for i := range c.ResistanceFactor {
		c.ResistanceFactor[i] = 1
	}
	c.ResistanceFactor[l] = factor
	b, err := d.solver.Solve(&c, nil)
	if err != nil {
		t.Fatal(err)
	}
	out := make([]float64, len(ev.sensors))
	for k, si := range ev.sensors {
		n := d.sens[si].node
		out[k] = b.Head[n] - a.Head[n]
	}
	return out
}

// With the size unknown (q < 0), refineLeaks fits it from surrogates of
// the head response and checks the fit with a full solve. Fed the hand
// residual of a leak of q at j (handResidual, full solves), the fitted
// size must be q. The independent reference is the misfit of cold full
// solves minimised over the size by golden section (Kiefer 1953), with
// no surrogate: the fitted size must be within 2% of its minimum. The
// 2% is ours (common practice: sizes are reported to 0.01 L/s).
func TestRefineLeaksFitsTheSize(t *testing.T) {
	d, ev := gridEvidence(t)
	sg, err := d.signatures(ev)
	if err != nil {
		t.Fatal(err)
	}
	for _, q := range []float64{0.3, 1.5, 4} {
		for _, id := range []string{"J-43", "J-55"} {
			j, _ := d.net.NodeIndex(id)
			e := ev
			e.dr = handResidual(t, d, ev, j, q)
			// The balance saw the leak, but weakly (a weight of one).
			e.dI, e.wI = q, 1
			got := d.refineLeaks(e, sg, []ranked{{idx: j, size: 0.8 * q}}, -1)
			// Independent: golden section over the exact misfit of full
			// cold solves (Kiefer 1953).
			exact := func(qq float64) float64 {
				r := handResidual(t, d, ev, j, qq)
				s := (e.dI - qq) * (e.dI - qq) * e.wI
				for k := range r {
					s += (e.dr[k] - r[k]) * (e.dr[k] - r[k])
				}
				return s
			}
			want, _ := golden(exact, 0, 3*q, 30)
			if math.Abs(got[0].size-want) > 0.02*want {
				t.Errorf("%s, %.1f L/s: fitted size %.3f, full-solve minimum at %.3f", id, q, got[0].size, want)
			}
			if math.Abs(got[0].size-q) > 0.02*q {
				t.Errorf("%s, %.1f L/s: fitted size %.3f, true %.3f", id, q, got[0].size, q)
			}
			t.Logf("%s, %.1f L/s: fitted %.3f (full-solve minimum %.3f), misfit %.2g", id, q, got[0].size, want, got[0].sse)
		}
	}
}

// fitOpenFraction recovers the open fraction of a constricted pipe from
// the head changes it leaves (hand solves with the resistance factor
// 1/f², the law of a partly open valve in terms of its open area: head
// loss ∝ (Q/A)², from memory), from 50% down to 5% open, within 5% of
// f, and the true pipe's misfit is far below a wrong pipe's.
func TestFitOpenFractionAgainstFullSolves(t *testing.T) {
	d, ev := gridEvidence(t)
	sg, err := d.signatures(ev)
	if err != nil {
		t.Fatal(err)
	}
	l, ok := d.net.LinkIndex("P-J-01-e")
	other, ok2 := d.net.LinkIndex("P-J-33-s")
	if !ok || !ok2 {
		t.Fatal("grid town pipes not found")
	}
	for _, f := range []float64{0.5, 0.2, 0.1, 0.05} {
		e := ev
		e.dr = handHeads(t, d, ev, l, 1/(f*f))
		got := d.refineBlockages(e, sg, []ranked{{idx: l}, {idx: other}})
		norm := e.misfit(func(int) float64 { return 0 })
		if math.Abs(got[0].size-f) > 0.05*f {
			t.Errorf("%.2f open: fitted %.3f", f, got[0].size)
		}
		if got[0].sse > 1e-3*norm {
			t.Errorf("%.2f open: misfit %.3g at the true pipe, |r|² = %.3g", f, got[0].sse, norm)
		}
		if got[1].sse < 10*got[0].sse+1e-3*norm {
			t.Errorf("%.2f open: a wrong pipe fits nearly as well (%.3g against %.3g)", f, got[1].sse, got[0].sse)
		}
		t.Logf("%.2f open: fitted %.4f, misfit %.2g (|r|² %.2g, wrong pipe %.2g)", f, got[0].size, got[0].sse, norm, got[1].sse)
	}
}
