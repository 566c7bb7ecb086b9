package calib

import (
	"context"
	"errors"
	"fmt"
	"iter"
	"math"
	"sort"
	"time"

	"gonum.org/v1/gonum/mat"

	"plumbline/model/demand"
	"plumbline/model/network"
	"plumbline/model/telemetry"
)

// FitSeq is Fit for readings that arrive as a stream of snapshots in
// time order (a store query, a readings file): it keeps one snapshot per
// Settings.Interval as they come, so weeks of five-minute snapshots need
// not be held, then fits. An error from the stream ends it.
func FitSeq(ctx context.Context, net *network.Network, sensors []telemetry.Sensor, zones map[string]*time.Location, snaps iter.Seq2[telemetry.Snapshot, error], s Settings) (*Result, error) {
	th := NewThinner(s.withDefaults().Interval)
	p := Problem{Network: net, Sensors: sensors, Zones: zones}
	for snap, err := range snaps {
		if err != nil {
			return nil, fmt.Errorf("calibration: reading snapshots: %w", err)
		}
		if th.Keep(snap) {
			p.Snapshots = append(p.Snapshots, snap)
		}
	}
	return Fit(ctx, p, s)
}

// Fit calibrates the problem's network to its snapshots: see the package
// doc for the method. It returns an error for a problem it cannot fit
// (no network, no usable sensors or snapshots, a snapshot the recorded
// network cannot solve, a cancelled ctx); bad sensors and snapshots are
// left out and named in Result.Warnings.
func Fit(ctx context.Context, p Problem, s Settings) (*Result, error) {
	start := time.Now()
	if p.Network == nil {
		return nil, errors.New("calibration: no network")
	}
	s = s.withDefaults()
	res := &Result{}
	warn := func(msg string) { res.Warnings = append(res.Warnings, msg) }
	m, fit, held, fitDays, heldDays, locs, err := setup(p, s, warn)
	if err != nil {
		return nil, err
	}
	res.FitDays = fitDays
	res.FitSnapshots = len(fit)
	b := newBatch(fit, m.sens)
	res.Rows = b.rows
	np := len(m.params)
	theta0 := make([]float64, np)
	for i, pr := range m.params {
		theta0[i] = pr.prior
	}
	logf := func(msg string, kv ...any) {
		if s.Logger == nil {
			return
		}
		ev := s.Logger.Info()
		for i := 0; i+1 < len(kv); i += 2 {
			ev = ev.Interface(kv[i].(string), kv[i+1])
		}
		ev.Msg(msg)
	}

	st0, err := m.evaluateAll(ctx, b, theta0, nil, noTrial)
	if err != nil {
		return nil, fmt.Errorf("calibration: recorded network: %w", err)
	}
	// Snapshots the recorded network cannot solve are left out.
	var kept []*snapData
	for i, e := range st0.fails {
		if e != nil {
			warn(fmt.Sprintf("%v: left out", e))
		} else {
			kept = append(kept, fit[i])
		}
	}
	if len(kept) < len(fit) {
		if len(kept) == 0 {
			return nil, fmt.Errorf("calibration: the recorded network solves none of the %d snapshots: %w", len(fit), errors.Join(st0.fails...))
		}
		fit = kept
		res.FitSnapshots = len(fit)
		b = newBatch(fit, m.sens)
		res.Rows = b.rows
		if st0, err = m.evaluate(ctx, b, theta0, nil, noTrial); err != nil {
			return nil, fmt.Errorf("calibration: recorded network: %w", err)
		}
	}
	res.Evaluations++
	J := mat.NewDense(max(1, b.rows), max(1, np), nil)
	free := make([]bool, np)
	for i := range free {
		free[i] = true
	}
	var A *mat.SymDense
	var g []float64
	var priorScreen *linkScreen // closed-valve screen at the recorded state
	if np > 0 {
		if s.SuspectCandidates > 0 {
			nl := len(p.Network.Links)
			priorScreen = &linkScreen{g: make([]float64, nl), h: make([]float64, nl)}
		}
		if err := m.jacobian(ctx, b, st0, J, nil, priorScreen); err != nil {
			return nil, err
		}
		A, g = normal(J, b.w, st0.r, np)
		// Identifiability from the recorded network, by sensor accuracy.
		m.identify(A, free)
	}
	cost0 := b.cost(st0.r)
	res.MisfitBefore = cost0 / float64(max(1, b.rows))
	logf("calibration start", "snapshots", len(fit), "rows", b.rows, "parameters", np, "misfit", res.MisfitBefore)

	cur, theta := st0, theta0
	var scale []float64
	var cov *mat.SymDense
	for round := 0; ; round++ {
		if countTrue(free) == 0 {
			res.Status = NothingToFit
			cur, theta = st0, theta0
			if A != nil {
				scale = m.noiseFactors(b, J, A, cur.r, free)
				cov = m.covariance(b, J, A, free, scale)
			}
			break
		}
		cur, theta, A, g, err = m.levenberg(ctx, b, cur, theta, free, J, A, g, res, logf, noTrial, s.MaxIterations)
		if err != nil {
			return nil, err
		}
		scale = m.noiseFactors(b, J, A, cur.r, free)
		cov = m.covariance(b, J, A, free, scale)
		m.dayVariation(b, J, cur.r, theta, free, scale, cov, res)
		// Parameters whose standard error, with the residual noise, is
		// still too large go back to their prior and the rest is refitted.
		again := false
		for i := range m.params {
			if free[i] && math.Sqrt(cov.At(i, i)) > m.maxSE(i) {
				free[i] = false
				theta[i] = m.params[i].prior
				again = true
			}
		}
		if !again || round >= 2 {
			if again {
				cur, err = m.evaluate(ctx, b, theta, cur, noTrial)
				if err != nil {
					return nil, err
				}
				if err := m.jacobian(ctx, b, cur, J, nil, nil); err != nil {
					return nil, err
				}
				A, g = normal(J, b.w, cur.r, np)
				scale = m.noiseFactors(b, J, A, cur.r, free)
				cov = m.covariance(b, J, A, free, scale)
				m.dayVariation(b, J, cur.r, theta, free, scale, cov, res)
			}
			break
		}
		cur, err = m.evaluate(ctx, b, theta, cur, noTrial)
		if err != nil {
			return nil, err
		}
		res.Evaluations++
		if err := m.jacobian(ctx, b, cur, J, nil, nil); err != nil {
			return nil, err
		}
		A, g = normal(J, b.w, cur.r, np)
	}
	_ = g
	if scale == nil {
		scale = make([]float64, len(m.sens))
		for i := range scale {
			scale[i] = 1
		}
	}
	res.MisfitAfter = b.cost(cur.r) / float64(max(1, b.rows))
	if cov == nil {
		cov = mat.NewSymDense(max(1, np), nil)
	}
	res.Parameters = m.report(theta, free, A, cov)
	res.Sensors = m.sensorFits(b, st0.r, cur.r, scale)

	logf("calibration fitted", "elapsed", time.Since(start).String())
	// Validation on the held-out days.
	res.Validation.Days = heldDays
	if len(held) > 0 {
		hb := newBatch(held, m.sens)
		before, err := m.evaluateAll(ctx, hb, theta0, nil, noTrial)
		if err != nil {
			return nil, fmt.Errorf("calibration: validation, recorded network: %w", err)
		}
		var kept []*snapData
		for i, e := range before.fails {
			if e != nil {
				warn(fmt.Sprintf("validation: %v: left out", e))
			} else {
				kept = append(kept, held[i])
			}
		}
		if len(kept) < len(held) {
			held = kept
			hb = newBatch(held, m.sens)
			if before, err = m.evaluate(ctx, hb, theta0, nil, noTrial); err != nil {
				return nil, fmt.Errorf("calibration: validation, recorded network: %w", err)
			}
		}
		after, err := m.evaluate(ctx, hb, theta, before, noTrial)
		if err != nil {
			return nil, fmt.Errorf("calibration: validation, calibrated network: %w", err)
		}
		res.Validation.Snapshots = len(held)
		res.Validation.MisfitBefore = hb.cost(before.r) / float64(max(1, hb.rows))
		res.Validation.MisfitAfter = hb.cost(after.r) / float64(max(1, hb.rows))
		res.Validation.Sensors = m.sensorFits(hb, before.r, after.r, nil)
	}

	logf("calibration validated", "elapsed", time.Since(start).String())
	// Closed-valve and topology check.
	if s.SuspectCandidates > 0 {
		sus, err := m.suspects(ctx, b, cur, priorScreen, free, scale)
		if err != nil {
			return nil, err
		}
		res.Suspects = sus
	}
	res.Network = m.calibrated(theta, free, locs, warn)
	res.Elapsed = time.Since(start)
	logf("calibration done", "status", res.Status.String(), "iterations", res.Iterations, "misfit", res.MisfitAfter, "elapsed", res.Elapsed.String())
	return res, nil
}

func countTrue(b []bool) int {
	n := 0
	for _, v := range b {
		if v {
			n++
		}
	}
	return n
}

// setup resolves the sensors, builds the parameters and prepares the
// snapshots of a problem.
func setup(p Problem, s Settings, warn func(string)) (m *model, fit, held []*snapData, fitDays, heldDays []string, locs []*time.Location, err error) {
	m = &model{net: p.Network, set: s}
	m.sens = resolveSensors(p.Network, p.Sensors, p.Snapshots, warn)
	nObs := 0
	for _, si := range m.sens {
		if si.role == roleObserve {
			nObs++
		}
	}
	if nObs == 0 {
		return nil, nil, nil, nil, nil, nil, errors.New("calibration: no sensor can be compared with the model")
	}
	m.zones = p.Network.Zones()
	m.zoneOf = zoneIndex(p.Network, m.zones)
	locs = make([]*time.Location, len(m.zones))
	for z, name := range m.zones {
		locs[z] = time.UTC
		if l := p.Zones[name]; l != nil {
			locs[z] = l
		}
	}
	pz := m.buildParams(locs)
	fit, held, fitDays, heldDays, err = m.prepare(p, locs, pz, warn)
	if err != nil {
		return nil, nil, nil, nil, nil, nil, err
	}
	if len(fit) == 0 {
		return nil, nil, nil, nil, nil, nil, errors.New("calibration: no snapshot with usable readings to fit")
	}
	return m, fit, held, fitDays, heldDays, locs, nil
}

// buildParams makes the roughness and demand parameters and returns, per
// zone, the parameter of each of its 48 hour knots (weekday 0-23,
// weekend 24-47; −1 none).
func (m *model) buildParams(locs []*time.Location) [][]int {
	net := m.net
	m.rough0 = make([]float64, len(net.Links))
	m.linkPar = make([]int, len(net.Links))
	for l := range net.Links {
		m.rough0[l] = net.Links[l].Roughness
		m.linkPar[l] = -1
	}
	if !m.set.NoRoughness {
		m.groups = buildGroups(net)
	}
	lo, hi := m.set.CMin, m.set.CMax
	if net.Headloss == network.DarcyWeisbach {
		lo, hi = m.set.EpsMin, m.set.EpsMax
	}
	m.gparam = make([]int, len(m.groups))
	for gi, gr := range m.groups {
		m.gparam[gi] = -1
		if gr.mean <= 0 {
			continue
		}
		pi := len(m.params)
		m.gparam[gi] = pi
		m.params = append(m.params, param{
			kind: Roughness, group: gi, name: "roughness " + gr.name,
			lo: min(0, math.Log(lo/gr.mean)), hi: max(0, math.Log(hi/gr.mean)),
		})
		for _, l := range gr.links {
			if net.Links[l].Roughness > 0 {
				m.linkPar[l] = pi
			}
		}
	}
	pz := make([][]int, len(m.zones))
	base := make([]float64, len(m.zones))
	for j, z := range m.zoneOf {
		if z >= 0 {
			base[z] += net.Nodes[j].Demand
		}
	}
	for z, name := range m.zones {
		pz[z] = make([]int, 48)
		for i := range pz[z] {
			pz[z][i] = -1
		}
		if m.set.NoPatterns || base[z] <= 0 {
			continue
		}
		days := []string{"weekday", "weekend"}
		if m.set.NoWeekend {
			days = []string{"every-day"}
		}
		for dt, dname := range days {
			for h := range 24 {
				pz[z][dt*24+h] = len(m.params)
				m.params = append(m.params, param{
					kind: DemandMultiplier, zone: z, day: dt, hour: h, prior: 1,
					lo: m.set.MultMin, hi: m.set.MultMax,
					name: fmt.Sprintf("demand %s %s %02d:00", name, dname, h),
				})
			}
		}
	}
	return pz
}

func (m *model) maxSE(i int) float64 {
	if m.params[i].kind == Roughness {
		return m.set.MaxRoughnessSE
	}
	return m.set.MaxMultiplierSE
}

// cost returns Σ w r² over the batch's rows.
func (b *batch) cost(r []float64) float64 {
	var c float64
	for i, v := range r {
		c += b.w[i] * v * v
	}
	return c
}

// normal returns JᵀWJ and JᵀWr.
func normal(J *mat.Dense, w, r []float64, np int) (*mat.SymDense, []float64) {
	rows, _ := J.Dims()
	Jw := mat.NewDense(rows, np, nil)
	g := make([]float64, np)
	for i := range r {
		src := J.RawRowView(i)[:np]
		dst := Jw.RawRowView(i)
		sw := math.Sqrt(w[i])
		for p, v := range src {
			dst[p] = v * sw
			g[p] += w[i] * r[i] * v
		}
	}
	A := mat.NewSymDense(np, nil)
	A.SymOuterK(1, Jw.T())
	return A, g
}

// solveSet solves (A_S + P + λ·diag) δ_S = rhs_S on the index set S and
// returns δ (zero outside S) and the inverse of the matrix when wantInv.
func solveSet(A *mat.SymDense, rhs []float64, set []int, lambda float64) ([]float64, *mat.SymDense, bool) {
	n := len(set)
	M := mat.NewSymDense(n, nil)
	for a, i := range set {
		for c := a; c < n; c++ {
			M.SetSym(a, c, A.At(i, set[c]))
		}
		d := A.At(i, i) + 1/(priorSD*priorSD)
		M.SetSym(a, a, d+lambda*max(d, 1e-12))
	}
	var ch mat.Cholesky
	if !ch.Factorize(M) {
		return nil, nil, false
	}
	bv := mat.NewVecDense(n, nil)
	for a, i := range set {
		bv.SetVec(a, rhs[i])
	}
	var x mat.VecDense
	if err := ch.SolveVecTo(&x, bv); err != nil {
		return nil, nil, false
	}
	out := make([]float64, A.SymmetricDim())
	for a, i := range set {
		out[i] = x.AtVec(a)
	}
	var inv mat.SymDense
	if err := ch.InverseTo(&inv); err != nil {
		return out, nil, true
	}
	return out, &inv, true
}

// identify clears free[i] for every parameter whose standard error
// (from A + prior, by sensor accuracy) is above its limit, repeating
// until all left are within.
func (m *model) identify(A *mat.SymDense, free []bool) {
	for range len(free) + 1 {
		var set []int
		for i, f := range free {
			if f {
				set = append(set, i)
			}
		}
		if len(set) == 0 {
			return
		}
		_, inv, ok := solveSet(A, make([]float64, len(free)), set, 0)
		if !ok || inv == nil {
			return
		}
		changed := false
		for a, i := range set {
			if math.Sqrt(inv.At(a, a)) > m.maxSE(i) {
				free[i] = false
				changed = true
			}
		}
		if !changed {
			return
		}
	}
}

// levenberg runs Levenberg-Marquardt iterations (Levenberg 1944,
// Marquardt 1963) from cur on the free parameters, within their bounds
// (projected steps; a parameter on a bound whose gradient pushes out is
// held for that step). It leaves J, A and g at the returned state.
func (m *model) levenberg(ctx context.Context, b *batch, cur *state, theta []float64, free []bool, J *mat.Dense, A *mat.SymDense, g []float64, res *Result, logf func(string, ...any), tr trial, maxIter int) (*state, []float64, *mat.SymDense, []float64, error) {
	np := len(m.params)
	theta = append([]float64(nil), theta...)
	objective := func(st *state, th []float64) float64 {
		c := b.cost(st.r)
		for i := range th {
			if free[i] {
				d := (th[i] - m.params[i].prior) / priorSD
				c += d * d
			}
		}
		return c
	}
	cost := objective(cur, theta)
	lambda := 1e-3
	res.Status = IterationLimit
	for it := 0; it < maxIter; it++ {
		res.Iterations++
		// Gradient of −½ objective: JᵀWr − P(θ − prior).
		rhs := make([]float64, np)
		for i := range rhs {
			rhs[i] = g[i] - (theta[i]-m.params[i].prior)/(priorSD*priorSD)
		}
		var set []int
		for i := range free {
			if !free[i] {
				continue
			}
			pr := &m.params[i]
			if (theta[i] <= pr.lo && rhs[i] < 0) || (theta[i] >= pr.hi && rhs[i] > 0) {
				continue
			}
			set = append(set, i)
		}
		if len(set) == 0 {
			res.Status = Converged
			return cur, theta, A, g, nil
		}
		accepted := false
		for !accepted {
			if err := ctx.Err(); err != nil {
				return nil, nil, nil, nil, err
			}
			delta, _, ok := solveSet(A, rhs, set, lambda)
			if !ok {
				lambda *= 10
				if lambda > 1e12 {
					res.Status = Stalled
					return cur, theta, A, g, nil
				}
				continue
			}
			trialTheta := append([]float64(nil), theta...)
			step := 0.0
			for _, i := range set {
				pr := &m.params[i]
				trialTheta[i] = math.Min(pr.hi, math.Max(pr.lo, theta[i]+delta[i]))
				step = math.Max(step, math.Abs(trialTheta[i]-theta[i]))
			}
			if step < 1e-10 {
				res.Status = Converged
				return cur, theta, A, g, nil
			}
			trial, err := m.evaluate(ctx, b, trialTheta, cur, tr)
			res.Evaluations++
			tcost := math.Inf(1)
			if err == nil {
				tcost = objective(trial, trialTheta)
			} else if ctx.Err() != nil {
				return nil, nil, nil, nil, ctx.Err()
			}
			if tcost < cost {
				drop := (cost - tcost) / cost
				cur, theta, cost = trial, trialTheta, tcost
				lambda = math.Max(lambda/3, 1e-9)
				accepted = true
				logf("calibration iteration", "iteration", res.Iterations, "misfit", b.cost(cur.r)/float64(max(1, b.rows)), "lambda", lambda)
				if drop < m.set.Tolerance || step < 1e-7 {
					// Converged: the Jacobian of the previous iterate, a
					// step below the tolerance away, serves for the
					// covariance (it saves one adjoint pass).
					res.Status = Converged
					return cur, theta, A, g, nil
				}
				if err := m.jacobian(ctx, b, trial, J, nil, nil); err != nil {
					return nil, nil, nil, nil, err
				}
				A, g = normal(J, b.w, trial.r, np)
			} else {
				lambda *= 4
				if lambda > 1e10 {
					res.Status = Stalled
					return cur, theta, A, g, nil
				}
			}
		}
	}
	return cur, theta, A, g, nil
}

// noiseFactors returns, per sensor, the factor s² ≥ 1 by which its
// weighted squared residuals exceed what its accuracy predicts, with the
// degrees of freedom the fit took from it (its rows' leverages
// h = w J (JᵀWJ+P)⁻¹ Jᵀ) removed.
func (m *model) noiseFactors(b *batch, J *mat.Dense, A *mat.SymDense, r []float64, free []bool) []float64 {
	var set []int
	for i, f := range free {
		if f {
			set = append(set, i)
		}
	}
	num := make([]float64, len(m.sens))
	den := make([]float64, len(m.sens))
	var inv *mat.SymDense
	if len(set) > 0 {
		_, inv, _ = solveSet(A, make([]float64, len(free)), set, 0)
	}
	x := make([]float64, len(set))
	for i := range r {
		k := b.sen[i]
		num[k] += b.w[i] * r[i] * r[i]
		lev := 0.0
		if inv != nil {
			row := J.RawRowView(i)
			for a, pa := range set {
				x[a] = row[pa]
			}
			for a := range set {
				var sa float64
				for c := range set {
					sa += inv.At(a, c) * x[c]
				}
				lev += x[a] * sa
			}
			lev *= b.w[i]
		}
		den[k] += 1 - math.Min(lev, 0.999)
	}
	out := make([]float64, len(m.sens))
	for k := range out {
		out[k] = 1
		if den[k] > 0 {
			out[k] = math.Max(1, num[k]/den[k])
		}
	}
	return out
}

// covariance returns the covariance of the estimates: the sandwich
// (JᵀWJ+P)⁻¹ (Σ w s² JᵀJ) (JᵀWJ+P)⁻¹ over the free parameters, with each
// sensor's noise factor s², so that a sensor that fits worse than its
// accuracy counts as the noisier instrument it is; for fixed parameters
// the diagonal holds the variance they would have if freed alone, from
// A + prior with the others fixed.
func (m *model) covariance(b *batch, J *mat.Dense, A *mat.SymDense, free []bool, scale []float64) *mat.SymDense {
	np := len(m.params)
	cov := mat.NewSymDense(np, nil)
	var set []int
	for i, f := range free {
		if f {
			set = append(set, i)
		}
	}
	if len(set) > 0 {
		_, inv, ok := solveSet(A, make([]float64, np), set, 0)
		if ok && inv != nil {
			n := len(set)
			Jw := mat.NewDense(b.rows, n, nil)
			for i := 0; i < b.rows; i++ {
				row := J.RawRowView(i)
				f := math.Sqrt(b.w[i] * scale[b.sen[i]])
				dst := Jw.RawRowView(i)
				for a, p := range set {
					dst[a] = row[p] * f
				}
			}
			B := mat.NewSymDense(n, nil)
			B.SymOuterK(1, Jw.T())
			var t, c mat.Dense
			t.Mul(inv, B)
			c.Mul(&t, inv)
			for a, i := range set {
				for cc, j := range set {
					cov.SetSym(i, j, (c.At(a, cc)+c.At(cc, a))/2)
				}
			}
		}
	}
	// A fixed parameter: what freeing it alone would give.
	for i, f := range free {
		if f {
			continue
		}
		d := A.At(i, i) + 1/(priorSD*priorSD)
		var sc float64
		var n float64
		for k, s := range scale {
			if m.sens[k].role == roleObserve {
				sc += s
				n++
			}
		}
		if n > 0 {
			sc /= n
		}
		cov.SetSym(i, i, max(sc, 1)/d)
	}
	return cov
}

// dayVariation adds to cov the error that day-to-day variation of
// consumption leaves in the demand multipliers. Readings of one day share
// that day's weather and habits, so their errors are correlated across
// the hours; the multipliers of a zone then carry, together, the mean
// day factor of the fit days. For every zone and fit day the fit of one
// common demand factor δ to that day's residuals (linearised, through
// the zone's multiplier columns) gives the day-to-day spread; its
// pooled variance σ² (less the δ's own sampling variance), at least
// Settings.DayVariation², adds σ²/n · m mᵀ to the covariance of the n
// days' zone multipliers m of each day type.
func (m *model) dayVariation(b *batch, J *mat.Dense, r, theta []float64, free []bool, scale []float64, cov *mat.SymDense, res *Result) {
	type key struct{ z, day int }
	type acc struct {
		num, den float64
		dt       int
	}
	accs := map[key]*acc{}
	for i := range r {
		s := b.snaps[b.snap[i]]
		row := J.RawRowView(i)
		wt := b.w[i] / scale[b.sen[i]]
		for z := range m.zones {
			var u float64
			dt := -1
			for _, p := range []int{s.za[z], s.zb[z]} {
				if p >= 0 {
					u += row[p] * theta[p]
					dt = m.params[p].day
				}
			}
			if dt < 0 || u == 0 {
				continue
			}
			k := key{z, s.day}
			a := accs[k]
			if a == nil {
				a = &acc{dt: dt}
				accs[k] = a
			}
			a.num += wt * u * r[i]
			a.den += wt * u * u
		}
	}
	// Pooled spread per day type.
	type zd struct{ z, dt int }
	groups := map[zd][]*acc{}
	for k, a := range accs {
		if a.den > 0 {
			groups[zd{k.z, a.dt}] = append(groups[zd{k.z, a.dt}], a)
		}
	}
	var ss, samp float64
	var dof, nd int
	for _, as := range groups {
		if len(as) < 2 {
			continue
		}
		var mean float64
		for _, a := range as {
			mean += a.num / a.den
		}
		mean /= float64(len(as))
		for _, a := range as {
			d := a.num/a.den - mean
			ss += d * d
			samp += 1 / a.den
			nd++
		}
		dof += len(as) - 1
	}
	v := m.set.DayVariation * m.set.DayVariation
	if dof > 0 {
		est := ss/float64(dof) - samp/float64(nd)
		v = math.Max(v, est)
		res.DayVariation = math.Sqrt(math.Max(0, est))
	}
	res.DayVariationUsed = math.Sqrt(v)
	for g, as := range groups {
		n := float64(len(as))
		var idx []int
		for i, p := range m.params {
			if p.kind == DemandMultiplier && p.zone == g.z && p.day == g.dt && free[i] {
				idx = append(idx, i)
			}
		}
		for _, i := range idx {
			for _, j := range idx {
				if j < i {
					continue
				}
				cov.SetSym(i, j, cov.At(i, j)+v/n*theta[i]*theta[j])
			}
		}
	}
}

// report builds the parameter table.
func (m *model) report(theta []float64, free []bool, A *mat.SymDense, cov *mat.SymDense) []Parameter {
	out := make([]Parameter, len(m.params))
	unit := "C"
	if m.net.Headloss == network.DarcyWeisbach {
		unit = "mm"
	}
	for i, pr := range m.params {
		se := math.Sqrt(math.Max(0, cov.At(i, i)))
		p := Parameter{Name: pr.name, Kind: pr.kind, Identifiable: free[i]}
		const eps = 1e-9
		p.AtBound = free[i] && (theta[i] <= pr.lo+eps || theta[i] >= pr.hi-eps)
		switch pr.kind {
		case Roughness:
			g := &m.groups[pr.group]
			p.Group, p.Pipes, p.LengthM, p.Unit = g.name, len(g.links), math.Round(g.length*10)/10, unit
			p.Prior = g.mean
			p.Estimate = g.mean * math.Exp(theta[i])
			p.StdErr = p.Estimate * se
		case DemandMultiplier:
			p.Zone, p.Hour = m.zones[pr.zone], pr.hour
			p.DayType = "weekday"
			if m.set.NoWeekend {
				p.DayType = "every-day"
			} else if pr.day == 1 {
				p.DayType = "weekend"
			}
			p.Prior, p.Estimate, p.StdErr = pr.prior, theta[i], se
		}
		if free[i] {
			for j := range m.params {
				if j == i || !free[j] {
					continue
				}
				d := math.Sqrt(cov.At(i, i) * cov.At(j, j))
				if d > 0 {
					if c := math.Abs(cov.At(i, j) / d); c > p.MaxCorrelation {
						p.MaxCorrelation, p.CorrelatedWith = c, m.params[j].name
					}
				}
			}
		}
		out[i] = p
	}
	_ = A
	return out
}

// sensorFits returns per-sensor statistics of two residual vectors.
func (m *model) sensorFits(b *batch, before, after []float64, scale []float64) []SensorFit {
	type acc struct {
		n          int
		sb, ss, sa float64
		qa         float64
	}
	accs := make([]acc, len(m.sens))
	for i := range before {
		a := &accs[b.sen[i]]
		a.n++
		a.sb += before[i]
		a.ss += before[i] * before[i]
		a.sa += after[i]
		a.qa += after[i] * after[i]
	}
	var out []SensorFit
	for k, si := range m.sens {
		a := accs[k]
		if si.role != roleObserve || a.n == 0 {
			continue
		}
		n := float64(a.n)
		f := SensorFit{ID: si.s.ID, Quantity: si.s.Quantity.String(), Unit: si.s.Quantity.CanonicalUnit(), Sigma: si.sigma,
			Before: FitStats{Count: a.n, RMSE: math.Sqrt(a.ss / n), Bias: a.sb / n},
			After:  FitStats{Count: a.n, RMSE: math.Sqrt(a.qa / n), Bias: a.sa / n},
		}
		if scale != nil {
			f.NoiseFactor = math.Sqrt(scale[k])
		}
		out = append(out, f)
	}
	return out
}

// zoneLabel returns a name for a zone-specific pattern.
func zoneLabel(zone, pattern string, many bool) string {
	if !many {
		return zone + "-calibrated"
	}
	if pattern == "" {
		pattern = "constant"
	}
	return zone + "-" + pattern + "-calibrated"
}

// calibrated returns a copy of the network with the fitted roughness and
// the zones' calibrated patterns.
func (m *model) calibrated(theta []float64, free []bool, locs []*time.Location, warn func(string)) *network.Network {
	out := m.net.Clone()
	for l, p := range m.linkPar {
		if p >= 0 && free[p] {
			out.Links[l].Roughness = m.rough0[l] * math.Exp(theta[p])
		}
	}
	step := out.PatternStep
	if step <= 0 {
		step = network.DefaultPatternStep
	}
	day := 24 * time.Hour
	if day%step != 0 {
		warn(fmt.Sprintf("pattern step %s does not divide a day: calibrated patterns not written", step))
		return out
	}
	n := int(day / step)
	for z, zone := range m.zones {
		anyFree := false
		for i, pr := range m.params {
			if pr.kind == DemandMultiplier && pr.zone == z && free[i] {
				anyFree = true
			}
		}
		if !anyFree {
			continue
		}
		// The patterns the zone's junctions use.
		used := map[string]bool{}
		for j, zi := range m.zoneOf {
			if zi == z && out.Nodes[j].Demand != 0 {
				used[out.Nodes[j].Pattern] = true
			}
		}
		names := make([]string, 0, len(used))
		for p := range used {
			names = append(names, p)
		}
		sort.Strings(names)
		loc := locs[z]
		// A Monday and a Saturday as reference days.
		mon := time.Date(2024, 1, 1, 0, 0, 0, 0, loc)
		sat := time.Date(2024, 1, 6, 0, 0, 0, 0, loc)
		mult := func(dt int, t time.Duration) float64 {
			hf := t.Hours()
			h := int(math.Floor(hf)) % 24
			f := hf - math.Floor(hf)
			a := m.knotParam(z, dt, h)
			bb := m.knotParam(z, dt, (h+1)%24)
			va, vb := 1.0, 1.0
			if a >= 0 && free[a] {
				va = theta[a]
			}
			if bb >= 0 && free[bb] {
				vb = theta[bb]
			}
			return (1-f)*va + f*vb
		}
		rename := map[string]string{}
		for _, pn := range names {
			label := zoneLabel(zone, pn, len(names) > 1)
			wd := make([]float64, n)
			we := make([]float64, n)
			for k := range n {
				off := time.Duration(k) * step
				wd[k] = round6(patternAt(m.net, pn, mon.Add(off), loc) * mult(0, off))
				wdt := 1
				if m.set.NoWeekend {
					wdt = 0
				}
				we[k] = round6(patternAt(m.net, pn, sat.Add(off), loc) * mult(wdt, off))
			}
			out.Patterns[label] = wd
			if !m.set.NoWeekend || out.Patterns[pn+"-weekend"] != nil {
				out.Patterns[label+"-weekend"] = we
			}
			rename[pn] = label
		}
		for j, zi := range m.zoneOf {
			if zi == z && out.Nodes[j].Demand != 0 {
				out.Nodes[j].Pattern = rename[out.Nodes[j].Pattern]
			}
		}
	}
	return out
}

// knotParam returns the parameter of zone z's knot (day type, hour), −1
// none.
func (m *model) knotParam(z, dt, h int) int {
	for i, pr := range m.params {
		if pr.kind == DemandMultiplier && pr.zone == z && pr.day == dt && pr.hour == h {
			return i
		}
	}
	return -1
}

func patternAt(net *network.Network, name string, t time.Time, loc *time.Location) float64 {
	return demand.PatternAt(net, name, t, loc)
}

func round6(v float64) float64 { return math.Round(v*1e6) / 1e6 }
