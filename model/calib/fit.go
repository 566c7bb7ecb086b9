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
	m.estimateKnots(fit)
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
	var A *mat.SymDense
	var g []float64
	var screen *linkScreen // every link's score and information at the recorded state
	if np > 0 {
		nl := len(p.Network.Links)
		screen = &linkScreen{g: make([]float64, nl), h: make([]float64, nl)}
		if err := m.jacobian(ctx, b, st0, J, nil, screen); err != nil {
			return nil, err
		}
		A, g = normal(J, b.w, st0.r, np)
	}
	free := make([]bool, np)
	for i := range free {
		free[i] = true
	}
	if np > 0 {
		// Identifiability from the recorded network, by sensor accuracy.
		m.identify(A, free)
	}
	res.MisfitBefore = b.accCost(st0.r) / float64(max(1, b.rows))
	logf("calibration start", "snapshots", len(fit), "rows", b.rows, "parameters", np, "misfit", res.MisfitBefore)

	// The groups and zone patterns first.
	ft := &fitting{b: b, J: J, A: A, g: g, cur: st0, theta: theta0, free: free}
	if err := m.fitRounds(ctx, ft, fit, st0, theta0, res, logf, !s.NoReweight); err != nil {
		return nil, err
	}
	// Closed-valve and topology check, on that fit: pipes with their own
	// roughness could bend to mimic a shut valve nearby.
	if s.SuspectCandidates > 0 && screen != nil {
		sus, err := m.suspects(ctx, ft.b, ft.cur, screen, ft.free, ft.scale)
		if err != nil {
			return nil, err
		}
		res.Suspects = sus
	}
	logf("calibration groups fitted", "elapsed", time.Since(start).String())
	// Then the pipes the readings see one by one, with the rest.
	if screen != nil && m.addPipeEffects(screen, st0) {
		n := len(m.params)
		grow := func(v []float64) []float64 { return append(v, make([]float64, n-len(v))...) }
		theta0 = grow(theta0)
		st0.theta = append([]float64(nil), theta0...)
		ft.theta = grow(ft.theta)
		ft.cur.theta = append([]float64(nil), ft.theta...)
		for len(ft.free) < n {
			ft.free = append(ft.free, true)
		}
		np = n
		ft.J = mat.NewDense(max(1, ft.b.rows), np, nil)
		if err := m.jacobian(ctx, ft.b, ft.cur, ft.J, nil, nil); err != nil {
			return nil, err
		}
		ft.A, ft.g = normal(ft.J, ft.b.w, ft.cur.r, np)
		if err := m.fitRounds(ctx, ft, fit, st0, theta0, res, logf, false); err != nil {
			return nil, err
		}
	}
	b, J, A, cur, theta, free := ft.b, ft.J, ft.A, ft.cur, ft.theta, ft.free
	scale, cov := ft.scale, ft.cov
	if scale == nil {
		scale = make([]float64, len(m.sens))
		for i := range scale {
			scale[i] = 1
		}
	}
	res.MisfitAfter = b.accCost(cur.r) / float64(max(1, b.rows))
	if cov == nil {
		cov = mat.NewSymDense(max(1, np), nil)
	}
	res.Parameters = append(m.report(theta, free, A, cov), m.matchedParameters()...)
	if dv, ok := m.matchedDayVariation(); ok {
		res.DayVariation = math.Max(res.DayVariation, dv)
		res.DayVariationUsed = math.Max(res.DayVariationUsed, dv)
	}
	if m.matchedN+m.unmatchedN > 0 {
		res.InflowMatched = m.matchedN
		if m.unmatchedN > 0 {
			warn(fmt.Sprintf("%d zone-snapshots left out: a balance meter unreadable", m.unmatchedN))
		}
	}
	res.PipeEffects = m.pipeEffects(theta, free, cov)
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
		res.Validation.MisfitBefore = hb.accCost(before.r) / float64(max(1, hb.rows))
		res.Validation.MisfitAfter = hb.accCost(after.r) / float64(max(1, hb.rows))
		res.Validation.Sensors = m.sensorFits(hb, before.r, after.r, nil)
	}

	logf("calibration validated", "elapsed", time.Since(start).String())
	res.Network = m.calibrated(theta, free, locs, warn)
	res.Elapsed = time.Since(start)
	logf("calibration done", "status", res.Status.String(), "iterations", res.Iterations, "misfit", res.MisfitAfter, "elapsed", res.Elapsed.String())
	return res, nil
}

// fitting is the state of a fit between its phases: the batch (its
// weights change when the sensors are reweighted), the Jacobian and
// normal equations at cur, the estimates and which are free, and after
// fitRounds the sensors' noise factors and the covariance.
type fitting struct {
	b     *batch
	J     *mat.Dense
	A     *mat.SymDense
	g     []float64
	cur   *state
	theta []float64
	free  []bool
	scale []float64
	cov   *mat.SymDense
}

// fitRounds runs Levenberg-Marquardt from ft's state on its free
// parameters (with reweight, then reweights the sensors and goes on,
// see reweight), computes the noise factors and the covariance, returns
// parameters whose standard error is still too large to their prior and
// refits the rest, up to three rounds. st0 and theta0 are the recorded
// state, for a fit with nothing free.
func (m *model) fitRounds(ctx context.Context, ft *fitting, fit []*snapData, st0 *state, theta0 []float64, res *Result, logf func(string, ...any), reweight bool) error {
	np := len(m.params)
	var err error
	for round := 0; ; round++ {
		if countTrue(ft.free) == 0 {
			res.Status = NothingToFit
			ft.cur, ft.theta = st0, theta0
			if ft.A != nil {
				ft.scale = m.noiseFactors(ft.b, ft.J, ft.A, ft.cur.r, ft.free)
				ft.cov = m.covariance(ft.b, ft.J, ft.A, ft.free, ft.scale)
			}
			return nil
		}
		// A fit that only serves to measure the sensors' scatter before
		// they are reweighted need not be as tight.
		tol := 0.0
		if round == 0 && reweight {
			tol = math.Max(m.set.Tolerance, preReweightTolerance)
		}
		ft.cur, ft.theta, ft.A, ft.g, err = m.levenberg(ctx, ft.b, ft.cur, ft.theta, ft.free, ft.J, ft.A, ft.g, res, logf, noTrial, m.set.MaxIterations, tol)
		if err != nil {
			return err
		}
		ft.scale = m.noiseFactors(ft.b, ft.J, ft.A, ft.cur.r, ft.free)
		// Reweighting: each sensor weighed by what it really scatters,
		// then the fit goes on from where it is.
		for rw := 0; round == 0 && reweight && rw < maxReweights && m.reweight(ft.scale); rw++ {
			ft.b = newBatch(fit, m.sens)
			ft.A, ft.g = normal(ft.J, ft.b.w, ft.cur.r, np)
			logf("calibration reweighted", "round", rw+1)
			ft.cur, ft.theta, ft.A, ft.g, err = m.levenberg(ctx, ft.b, ft.cur, ft.theta, ft.free, ft.J, ft.A, ft.g, res, logf, noTrial, m.set.MaxIterations, 0)
			if err != nil {
				return err
			}
			ft.scale = m.noiseFactors(ft.b, ft.J, ft.A, ft.cur.r, ft.free)
		}
		ft.cov = m.covariance(ft.b, ft.J, ft.A, ft.free, ft.scale)
		m.dayVariation(ft.b, ft.J, ft.cur.r, ft.theta, ft.free, ft.scale, ft.cov, res)
		// Parameters whose standard error, with the residual noise, is
		// still too large go back to their prior and the rest is refitted.
		again := false
		for i := range m.params {
			if ft.free[i] && math.Sqrt(ft.cov.At(i, i)) > m.maxSE(i) {
				ft.free[i] = false
				ft.theta[i] = m.params[i].prior
				again = true
			}
		}
		if !again {
			return nil
		}
		ft.cur, err = m.evaluate(ctx, ft.b, ft.theta, ft.cur, noTrial)
		if err != nil {
			return err
		}
		res.Evaluations++
		if err := m.jacobian(ctx, ft.b, ft.cur, ft.J, nil, nil); err != nil {
			return err
		}
		ft.A, ft.g = normal(ft.J, ft.b.w, ft.cur.r, np)
		if round >= 2 {
			ft.scale = m.noiseFactors(ft.b, ft.J, ft.A, ft.cur.r, ft.free)
			ft.cov = m.covariance(ft.b, ft.J, ft.A, ft.free, ft.scale)
			m.dayVariation(ft.b, ft.J, ft.cur.r, ft.theta, ft.free, ft.scale, ft.cov, res)
			return nil
		}
	}
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
	m.resolveBalances(p, warn)
	m.locs = locs
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
		if m.set.NoPatterns || base[z] <= 0 || (m.matched != nil && m.matched[z]) {
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
	switch m.params[i].kind {
	case Roughness:
		return m.set.MaxRoughnessSE
	case pipeEffect:
		// A pipe's own effect is bounded by its prior: never "not
		// identified", never returned to the group's value for that.
		return math.Inf(1)
	}
	return m.set.MaxMultiplierSE
}

// cost returns Σ w r² over the batch's rows, with the fit's weights.
func (b *batch) cost(r []float64) float64 {
	var c float64
	for i, v := range r {
		c += b.w[i] * v * v
	}
	return c
}

// accCost returns Σ r²/σ² over the batch's rows, σ the sensors'
// accuracy: the misfit the report states.
func (b *batch) accCost(r []float64) float64 {
	var c float64
	for i, v := range r {
		c += b.aw[i] * v * v
	}
	return c
}

// preReweightTolerance ends the fit whose residuals give the sensors'
// noise factors: a tenth of a per cent of the objective changes a noise
// factor by about as much, far less than its own sampling error (our
// choice).
const preReweightTolerance = 1e-3

// maxReweights is how many times the fit reweights its sensors: the
// second pass finds factors within a few per cent of one (our
// observation on the demo town), a third changes nothing that matters.
const maxReweights = 2

// reweight multiplies each observed sensor's variance factor by its
// noise factor s² (≥ 1) from a converged fit, and reports whether any
// changed by more than 10 % (otherwise the weights are left as they are).
func (m *model) reweight(scale []float64) bool {
	changed := false
	for k := range m.sens {
		if m.sens[k].role == roleObserve && scale[k] > 1.1 {
			changed = true
		}
	}
	if !changed {
		return false
	}
	for k := range m.sens {
		if m.sens[k].role == roleObserve {
			m.sens[k].vf = m.sens[k].weightFactor() * scale[k]
		}
	}
	return true
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
func (m *model) solveSet(A *mat.SymDense, rhs []float64, set []int, lambda float64) ([]float64, *mat.SymDense, bool) {
	n := len(set)
	M := mat.NewSymDense(n, nil)
	for a, i := range set {
		for c := a; c < n; c++ {
			M.SetSym(a, c, A.At(i, set[c]))
		}
		d := A.At(i, i) + m.params[i].precision()
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
		_, inv, ok := m.solveSet(A, make([]float64, len(free)), set, 0)
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
//
// tol is the relative fall of the objective that ends it (≤ 0:
// Settings.Tolerance).
func (m *model) levenberg(ctx context.Context, b *batch, cur *state, theta []float64, free []bool, J *mat.Dense, A *mat.SymDense, g []float64, res *Result, logf func(string, ...any), tr trial, maxIter int, tol float64) (*state, []float64, *mat.SymDense, []float64, error) {
	if tol <= 0 {
		tol = m.set.Tolerance
	}
	np := len(m.params)
	theta = append([]float64(nil), theta...)
	objective := func(st *state, th []float64) float64 {
		c := b.cost(st.r)
		for i := range th {
			if free[i] {
				d := (th[i] - m.params[i].prior) / m.params[i].priorSD()
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
			rhs[i] = g[i] - (theta[i]-m.params[i].prior)*m.params[i].precision()
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
			delta, _, ok := m.solveSet(A, rhs, set, lambda)
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
				if drop < tol || step < 1e-7 {
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
		_, inv, _ = m.solveSet(A, make([]float64, len(free)), set, 0)
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
// (JᵀWJ+P)⁻¹ (Σ w s² JᵀJ + P_δ) (JᵀWJ+P)⁻¹ over the free parameters
// (P_δ the prior precision of the pipes' own roughness), with each
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
		_, inv, ok := m.solveSet(A, make([]float64, np), set, 0)
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
			// A pipe's own roughness is a random departure from its
			// group's, of the prior's spread: that spread is part of what
			// the estimates vary with (Henderson's mixed-model equations),
			// so its precision joins the data's information in the middle.
			for a, i := range set {
				if m.params[i].kind == pipeEffect {
					B.SetSym(a, a, B.At(a, a)+m.params[i].precision())
				}
			}
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
		d := A.At(i, i) + m.params[i].precision()
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
	out = out[:0]
	for i, pr := range m.params {
		if pr.kind == pipeEffect {
			continue
		}
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
		out = append(out, p)
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
			f.NoiseFactor = math.Sqrt(scale[k] * si.weightFactor())
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
		if p < 0 {
			continue
		}
		v := 0.0
		if free[p] {
			v = theta[p]
		}
		if d := m.devOf(theta, l); d != 0 && free[m.linkDev[l]] {
			v += d
		}
		if v != 0 {
			out.Links[l].Roughness = m.rough0[l] * math.Exp(v)
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
		matched := m.knots != nil && m.knots[z] != nil
		for i := 0; matched && i < 48; i++ {
			if v, _ := m.knotValue(z, i/24, i%24); v != 1 {
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
			if matched {
				va, _ := m.knotValue(z, dt, h)
				vb, _ := m.knotValue(z, dt, (h+1)%24)
				return (1-f)*va + f*vb
			}
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
