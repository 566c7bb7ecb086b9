package hydraulic

import (
	"errors"
	"fmt"
	"math"

	"plumbline/model/network"
)

// Solve computes the steady state under the conditions c (nil: as in the
// network), starting from warm if it is a solution of this Solver's
// network (nil: a cold start). It returns the solution, or an error:
// a *NotConvergedError (with the last iterate as the Solution), a
// *DisconnectedError naming junctions cut off from every source, or an
// error naming the bad entry of c. The Solution is freshly allocated.
func (s *Solver) Solve(c *Conditions, warm *Solution) (*Solution, error) {
	return s.SolveInto(c, warm, nil)
}

// SolveInto is Solve writing the solution into the memory of dst, so
// that a sequence of warm solves (one per model step) allocates nothing.
// dst must be nil (a fresh Solution is allocated, as Solve does) or a
// Solution of a Solver of the same network; it may be warm itself (the
// warm start is read before dst is overwritten). The result is bit for
// bit that of Solve with the same c and warm. The returned Solution is
// dst when dst is not nil. On an error other than *NotConvergedError,
// dst's contents are unspecified (a partly written iterate): do not use
// it as a warm start after such an error.
func (s *Solver) SolveInto(c *Conditions, warm, dst *Solution) (*Solution, error) {
	if c == nil {
		c = &Conditions{}
	}
	if dst != nil && !s.fits(dst) {
		dst = nil
	}
	if warm != nil && !s.fitsWarm(warm) {
		warm = nil
	}
	if warm != nil && dst != nil && (warm == dst || sharesMemory(warm, dst)) {
		warm = s.keepWarm(warm)
	}
	sol, err := s.newSolution(c, dst)
	if err != nil {
		return nil, err
	}
	if err := s.checkConnected(sol); err != nil {
		return nil, err
	}
	s.initialise(sol, warm)
	return s.iterate(sol)
}

// fits reports whether sol's slices have this Solver's network's sizes.
func (s *Solver) fits(sol *Solution) bool {
	nn, nl := len(s.net.Nodes), len(s.net.Links)
	return len(sol.Head) == nn && len(sol.Pressure) == nn && len(sol.Demand) == nn && len(sol.Leak) == nn &&
		len(sol.Flow) == nl && len(sol.Velocity) == nl && len(sol.Headloss) == nl && len(sol.State) == nl &&
		len(sol.leakC) == nn && len(sol.leakN) == nn && len(sol.speed) == nl && len(sol.setting) == nl && len(sol.factor) == nl
}

// fitsWarm reports whether warm can start a solve of this network.
func (s *Solver) fitsWarm(warm *Solution) bool {
	return len(warm.Head) == len(s.net.Nodes) && len(warm.Flow) == len(s.net.Links) && len(warm.State) == len(s.net.Links)
}

// sharesMemory reports whether the warm start's slices are dst's.
func sharesMemory(warm, dst *Solution) bool {
	same := func(a, b []float64) bool { return len(a) > 0 && len(b) > 0 && &a[0] == &b[0] }
	return same(warm.Head, dst.Head) || same(warm.Flow, dst.Flow) || (len(warm.State) > 0 && len(dst.State) > 0 && &warm.State[0] == &dst.State[0])
}

// keepWarm copies what initialise reads of a warm start (heads, flows,
// states) into the Solver's workspace, for a solve that overwrites it.
func (s *Solver) keepWarm(warm *Solution) *Solution {
	s.warm.Head = append(s.warm.Head[:0], warm.Head...)
	s.warm.Flow = append(s.warm.Flow[:0], warm.Flow...)
	s.warm.State = append(s.warm.State[:0], warm.State...)
	return &s.warm
}

func (s *Solver) newSolution(c *Conditions, dst *Solution) (*Solution, error) {
	net := s.net
	nn, nl := len(net.Nodes), len(net.Links)
	check := func(name string, got, want int) error {
		if got != 0 && got != want {
			return fmt.Errorf("hydraulic: conditions: %s has %d entries, want %d", name, got, want)
		}
		return nil
	}
	for _, e := range []error{
		check("Demand", len(c.Demand), nn),
		check("FixedHead", len(c.FixedHead), nn),
		check("LeakCoeff", len(c.LeakCoeff), nn),
		check("LeakExponent", len(c.LeakExponent), nn),
		check("Status", len(c.Status), nl),
		check("PumpSpeed", len(c.PumpSpeed), nl),
		check("ValveSetting", len(c.ValveSetting), nl),
		check("ResistanceFactor", len(c.ResistanceFactor), nl),
	} {
		if e != nil {
			return nil, e
		}
	}
	if (c.LeakCoeff == nil) != (c.LeakExponent == nil) {
		return nil, errors.New("hydraulic: conditions: LeakCoeff and LeakExponent must be given together")
	}
	s.condLeak = c.LeakCoeff != nil
	sol := dst
	if sol == nil {
		sol = &Solution{
			Head: make([]float64, nn), Pressure: make([]float64, nn),
			Demand: make([]float64, nn), Leak: make([]float64, nn),
			Flow: make([]float64, nl), Velocity: make([]float64, nl), Headloss: make([]float64, nl),
			State: make([]LinkState, nl),
			leakC: make([]float64, nn), leakN: make([]float64, nn),
			speed: make([]float64, nl), setting: make([]float64, nl), factor: make([]float64, nl),
		}
	} else {
		// Everything a fresh Solution starts with at zero and the steps
		// below do not all write.
		clear(sol.Demand)
		clear(sol.Leak)
		clear(sol.leakC)
		clear(sol.leakN)
		clear(sol.Velocity)
		clear(sol.speed)
		clear(sol.setting)
		sol.Iterations, sol.MaxFlowChange, sol.MaxImbalance, sol.Converged = 0, 0, 0, false
	}
	sol.solver = s
	bad := func(v float64) bool { return math.IsNaN(v) || math.IsInf(v, 0) }
	// The network's values come from the Solver's per-node tables (the
	// same numbers, without reading every Node).
	for i := range s.jx {
		if s.jx[i] < 0 {
			h := s.fixedHead[i]
			if c.FixedHead != nil && !math.IsNaN(c.FixedHead[i]) {
				h = c.FixedHead[i]
			}
			if bad(h) {
				return nil, fmt.Errorf("hydraulic: conditions: node %s: fixed head is not a number", net.Nodes[i].ID)
			}
			sol.Head[i] = h
			continue
		}
		d := s.baseDemand[i]
		if c.Demand != nil {
			d = c.Demand[i]
		}
		if bad(d) {
			return nil, fmt.Errorf("hydraulic: conditions: junction %s: demand is not a number", net.Nodes[i].ID)
		}
		sol.Demand[i] = d
		if i == s.leakBad {
			return nil, fmt.Errorf("hydraulic: junction %s: leak coefficient and exponent must be ≥ 0", net.Nodes[i].ID)
		}
		if c.LeakCoeff != nil {
			lc, le := c.LeakCoeff[i], c.LeakExponent[i]
			if lc < 0 || le < 0 || bad(lc) || bad(le) {
				return nil, fmt.Errorf("hydraulic: conditions: junction %s: leak coefficient and exponent must be ≥ 0", net.Nodes[i].ID)
			}
			sol.leakC[i], sol.leakN[i] = lc, le
		}
	}
	// The links' fields from the Solver's tables (the packed hot table and
	// the statuses); the network's Link only for pumps and valves.
	for k := range s.hot {
		kind := s.hot[k].kind
		st := s.status[k]
		if c.Status != nil {
			st = c.Status[k]
		}
		sol.factor[k] = 1
		if c.ResistanceFactor != nil {
			f := c.ResistanceFactor[k]
			if !(f > 0) || bad(f) {
				return nil, fmt.Errorf("hydraulic: conditions: link %s: resistance factor must be positive, got %g", net.Links[k].ID, f)
			}
			sol.factor[k] = f
		}
		switch kind {
		case lkPump:
			l := &net.Links[k]
			sp := l.Speed
			if sp == 0 {
				sp = 1 // zero value of Link.Speed means nominal
			}
			if c.PumpSpeed != nil && !math.IsNaN(c.PumpSpeed[k]) {
				sp = c.PumpSpeed[k]
			}
			if sp < 0 || bad(sp) {
				return nil, fmt.Errorf("hydraulic: conditions: pump %s: speed must be ≥ 0, got %g", l.ID, sp)
			}
			sol.speed[k] = sp
			if sp == 0 {
				st = network.Closed
			}
		case lkValve:
			l, m := &net.Links[k], &s.lm[k]
			set := l.Setting
			if c.ValveSetting != nil && !math.IsNaN(c.ValveSetting[k]) {
				set = c.ValveSetting[k]
			}
			if bad(set) {
				return nil, fmt.Errorf("hydraulic: conditions: valve %s: setting is not a number", l.ID)
			}
			if (m.valve == network.FlowControl || m.valve == network.Throttle) && set < 0 {
				return nil, fmt.Errorf("hydraulic: valve %s: %s setting must be ≥ 0, got %g", l.ID, m.valve, set)
			}
			sol.setting[k] = set
		}
		switch {
		case st == network.Closed:
			sol.State[k] = Closed
		case kind == lkPipe:
			sol.State[k] = Open // defaultState of a pipe
		default:
			sol.State[k] = s.defaultState(k)
		}
	}
	return sol, nil
}

// defaultState is the state a link not closed starts in.
func (s *Solver) defaultState(k int) LinkState {
	m := &s.lm[k]
	if m.kind == lkValve {
		switch m.valve {
		case network.PressureReducing, network.PressureSustaining, network.FlowControl:
			return Active
		}
	}
	return Open
}

// checkConnected finds junctions with no path of non-closed links to a
// fixed-head node. The answer depends only on which links are closed: a
// solve with the closed links of the last check that passed skips the
// search.
func (s *Solver) checkConnected(sol *Solution) error {
	if s.connOK {
		same := true
		for k, st := range sol.State {
			if (st == Closed) != s.connClosed[k] {
				same = false
				break
			}
		}
		if same {
			return nil
		}
	}
	s.connOK = false
	q := s.queue[:0]
	for i := range s.seen {
		s.seen[i] = s.jx[i] < 0
		if s.seen[i] {
			q = append(q, i)
		}
	}
	for h := 0; h < len(q); h++ {
		n := q[h]
		for _, k := range s.incLink[s.incPtr[n]:s.incPtr[n+1]] {
			if sol.State[k] == Closed {
				continue
			}
			o := s.lm[k].to
			if o == n {
				o = s.lm[k].from
			}
			if !s.seen[o] {
				s.seen[o] = true
				q = append(q, o)
			}
		}
	}
	s.queue = q[:0]
	if len(q) == len(s.seen) {
		for k, st := range sol.State {
			s.connClosed[k] = st == Closed
		}
		s.connOK = true
		return nil
	}
	e := &DisconnectedError{}
	for i, ok := range s.seen {
		if !ok {
			e.Count++
			if len(e.Junctions) < 50 {
				e.Junctions = append(e.Junctions, s.net.Nodes[i].ID)
			}
		}
	}
	return fmt.Errorf("hydraulic: %w", e)
}

// initialVelocity (m/s) sets the cold-start flow of pipes and valves.
// Low flows start Newton below most solution flows; over generated towns
// and grids 0.03 m/s took fewer iterations than 0.3 m/s (our trials).
const initialVelocity = 0.03

// initialise sets the first iterate: warm flows, heads and states if
// given, otherwise initialVelocity in every pipe and valve, pumps at the middle of
// their curves, junction heads at the highest source head.
func (s *Solver) initialise(sol *Solution, warm *Solution) {
	nn, nl := len(s.net.Nodes), len(s.net.Links)
	if warm != nil && (len(warm.Head) != nn || len(warm.Flow) != nl || len(warm.State) != nl) {
		warm = nil
	}
	hmax := math.Inf(-1)
	for i := range s.net.Nodes {
		if s.jx[i] < 0 {
			hmax = max(hmax, sol.Head[i])
		}
	}
	for i := range s.net.Nodes {
		if s.jx[i] < 0 {
			continue
		}
		if warm != nil && !math.IsNaN(warm.Head[i]) && !math.IsInf(warm.Head[i], 0) {
			sol.Head[i] = warm.Head[i]
		} else {
			sol.Head[i] = hmax
		}
	}
	for k := range s.lm {
		m := &s.lm[k]
		s.changes[k], s.flips[k], s.frozen[k] = 0, 0, false
		if warm != nil && sol.State[k] != Closed && warm.State[k] != Closed {
			sol.State[k] = warm.State[k]
		}
		if warm != nil && !math.IsNaN(warm.Flow[k]) && !math.IsInf(warm.Flow[k], 0) {
			sol.Flow[k] = warm.Flow[k]
			continue
		}
		switch {
		case sol.State[k] == Closed:
			sol.Flow[k] = 0
		case m.kind == lkPump:
			sol.Flow[k] = 0.5 * m.curve.MaxFlow(sol.speed[k])
		case m.kind == lkValve && m.valve == network.FlowControl:
			sol.Flow[k] = sol.setting[k]
		default:
			sol.Flow[k] = initialVelocity * m.area * 1000
		}
	}
	s.initLeaks(sol)
}

// initLeaks lists the leaks solved in flow form and starts each at its
// law's outflow at the initial head (dry if the pressure is not
// positive). From there Newton's method on the convex law p = (q/c)^(1/n)
// approaches the solution from above instead of overshooting it.
func (s *Solver) initLeaks(sol *Solution) {
	s.leaks = s.leaks[:0]
	if !s.netLeak && !s.condLeak {
		return // no leak anywhere: the loop below would add none
	}
	for _, i := range s.node {
		n := &s.net.Nodes[i]
		if n.LeakCoeff == 0 && sol.leakC[i] == 0 {
			continue // flowForm is false for both
		}
		p := sol.Head[i] - n.Elevation
		for _, cn := range [2][2]float64{{n.LeakCoeff, n.LeakExponent}, {sol.leakC[i], sol.leakN[i]}} {
			if !flowForm(cn[0], cn[1]) {
				continue
			}
			q, _ := LeakFlow(cn[0], cn[1], p)
			s.leaks = append(s.leaks, leakTerm{node: i, c: cn[0], n: cn[1], q: q, dry: q <= 0})
		}
	}
}

// leakAt returns a node's leak outflow by the law and its derivative at
// head h: of all its leaks if all is set, otherwise only of those solved
// in head form.
func (s *Solver) leakAt(i int, h float64, sol *Solution, all bool) (q, dq float64) {
	n := &s.net.Nodes[i]
	// A leak of coefficient 0 lets out nothing (LeakFlow gives 0, 0):
	// skipping it adds no term, and adding +0 would change nothing.
	if n.LeakCoeff == 0 && sol.leakC[i] == 0 {
		return 0, 0
	}
	p := h - n.Elevation
	for _, cn := range [2][2]float64{{n.LeakCoeff, n.LeakExponent}, {sol.leakC[i], sol.leakN[i]}} {
		if !all && flowForm(cn[0], cn[1]) {
			continue
		}
		q1, d1 := LeakFlow(cn[0], cn[1], p)
		q, dq = q+q1, dq+d1
	}
	return q, dq
}

// residuals fills s.F with the continuity residual of every node
// (inflow − outflow − demand − leak; zero for fixed-head nodes) and
// s.leakD with dleak/dH of the leaks in head form, and returns the
// largest continuity residual over junctions with every leak at its law's
// outflow. In s.F the leaks of s.leaks count with their iterates (the
// Newton step needs those), unless all is set: then every leak is in
// head form at its law (at a solution, for sensitivities).
func (s *Solver) residuals(sol *Solution, all bool) float64 {
	for i := range s.F {
		s.leakGap[i] = 0
		if s.jx[i] < 0 {
			s.F[i], s.leakD[i] = 0, 0
			continue
		}
		q, dq := 0.0, 0.0
		if (s.netLeak && s.net.Nodes[i].LeakCoeff != 0) || sol.leakC[i] != 0 {
			q, dq = s.leakAt(i, sol.Head[i], sol, all)
		}
		s.F[i] = -sol.Demand[i] - q
		s.leakD[i] = dq
	}
	if !all {
		for t := range s.leaks {
			lt := &s.leaks[t]
			law, _ := LeakFlow(lt.c, lt.n, sol.Head[lt.node]-s.net.Nodes[lt.node].Elevation)
			s.F[lt.node] -= lt.q
			s.leakGap[lt.node] += lt.q - law
		}
	}
	for k := range s.hot {
		m := &s.hot[k]
		q := sol.Flow[k]
		if m.jf >= 0 {
			s.F[m.from] -= q
		}
		if m.jt >= 0 {
			s.F[m.to] += q
		}
	}
	worst := 0.0
	for i, f := range s.F {
		if s.jx[i] >= 0 {
			worst = max(worst, math.Abs(f+s.leakGap[i]))
		}
	}
	return worst
}

// coefficients fills p (conductance) and y (flow correction) of every
// link for its state: ΔQ = p·(ΔH_from − ΔH_to) − y. Active pressure
// valves get p = y = 0 and ctrl = controlled node.
func (s *Solver) coefficients(sol *Solution) {
	for k := range s.hot {
		m := &s.hot[k]
		q := sol.Flow[k]
		dh := sol.Head[m.from] - sol.Head[m.to]
		s.ctrl[k] = -1
		s.s[k] = 0
		switch sol.State[k] {
		case Closed, CheckShut:
			s.p[k] = 1 / gClosed
			s.y[k] = q - s.p[k]*dh
		case Active:
			if s.lm[k].valve == network.FlowControl {
				s.p[k] = 1 / gClosed
				s.y[k] = q - sol.setting[k]
				break
			}
			s.p[k], s.y[k] = 0, 0
			s.ctrl[k], _ = s.controlled(k, sol)
		default:
			var h, g, sc float64
			if m.hw {
				// lawOpen's Hazen-Williams case, inline: the same
				// operations in the same order, for the most common link.
				aq := math.Abs(q)
				t := m.hwR * hwPow(aq)
				h, g = t*q, hwFlowExp*t
				h += m.minor * q * aq
				g += 2 * m.minor * aq
				f := sol.factor[k]
				h, g, sc = f*h+gMin*q, f*g+gMin, f*h
			} else {
				h, g, sc = s.lawOpen(k, q, sol)
			}
			if s.near != nil {
				g = s.near.slope(k, g, s.dQ[k]) // SolveNear (near.go)
			}
			s.p[k] = 1 / g
			s.y[k] = (h - dh) / g
			s.s[k] = sc
		}
	}
	s.leakCoefficients(sol)
}

// leakCoefficients sets p and y of every flow-form leak, as for a link
// from its node to the open air (head = the node's elevation):
// Δq = p·ΔH − y with p = 1/(dp/dq), y = (p_law(q) − p)/(dp/dq), and sums
// them per node in s.leakP and s.leakY. As q falls to 0, dp/dq does too;
// it is kept at least gMin (the links' low-flow resistance), which caps
// the conductance at 1e6 L/s per m and alters the step, not the law that
// decides convergence. A dry leak adds nothing.
func (s *Solver) leakCoefficients(sol *Solution) {
	for _, i := range s.node {
		s.leakP[i], s.leakY[i] = 0, 0
	}
	for t := range s.leaks {
		lt := &s.leaks[t]
		if lt.dry {
			lt.p, lt.y = 0, 0
			continue
		}
		h, g := leakHead(lt.c, lt.n, lt.q)
		g = max(g, gMin)
		lt.p = 1 / g
		lt.y = (h - (sol.Head[lt.node] - s.net.Nodes[lt.node].Elevation)) / g
		s.leakP[lt.node] += lt.p
		s.leakY[lt.node] += lt.y
	}
}

// sign of link k at node n in the incidence matrix: +1 if k flows into n.
func (s *Solver) incidence(k, n int) float64 {
	if s.lm[k].to == n {
		return 1
	}
	return -1
}

// assemble builds the Schur complement matrix and right-hand side.
func (s *Solver) assemble(sol *Solution) {
	for j, n := range s.node {
		s.diag[j] = s.leakD[n] + s.leakP[n]
		s.rhs[j] = s.F[n] + s.leakY[n]
	}
	for k := range s.hot {
		m := &s.hot[k]
		p, y := s.p[k], s.y[k]
		if m.jf >= 0 {
			s.diag[m.jf] += p
			s.rhs[m.jf] += y
		}
		if m.jt >= 0 {
			s.diag[m.jt] += p
			s.rhs[m.jt] -= y
		}
		if m.entry >= 0 {
			s.off[m.entry] = -p
		}
	}
	// Active pressure valves: pin the controlled node, predict the
	// valve's flow change and pass it to the other end.
	for k := range s.lm {
		c := s.ctrl[k]
		if c < 0 {
			continue
		}
		m := &s.lm[k]
		_, hset := s.controlled(k, sol)
		jc := s.jx[c]
		delta := hset - sol.Head[c]
		s.diag[jc] += cBig
		s.rhs[jc] += cBig * delta
		o := m.from
		if c == m.from {
			o = m.to
		}
		jo := s.jx[o]
		if jo < 0 {
			continue
		}
		acK := s.incidence(k, c)
		sum := s.F[c] - (s.leakD[c]+s.leakP[c])*delta + s.leakY[c]
		for _, l := range s.incLink[s.incPtr[c]:s.incPtr[c+1]] {
			if l == k {
				continue
			}
			// The region behind c moves with it, so only the flow
			// corrections y of c's other links enter the prediction.
			sum -= s.incidence(l, c) * s.y[l]
		}
		pred := -sum / acK
		s.rhs[jo] += s.incidence(k, o) * pred
	}
}

// updateFlows applies ΔH to heads and ΔQ to flows and returns max |ΔQ|.
func (s *Solver) updateFlows(sol *Solution) float64 {
	for j, n := range s.node {
		sol.Head[n] += s.dH[j]
	}
	dh := func(j int) float64 {
		if j < 0 {
			return 0
		}
		return s.dH[j]
	}
	for k := range s.hot {
		m := &s.hot[k]
		if s.ctrl[k] >= 0 {
			s.dQ[k] = 0
			continue
		}
		s.dQ[k] = s.p[k]*(dh(int(m.jf))-dh(int(m.jt))) - s.y[k]
	}
	for k := range s.lm {
		c := s.ctrl[k]
		if c < 0 {
			continue
		}
		// continuity at c, linearised: F + Σ A ΔQ − L' ΔH = 0
		sum := s.F[c] - (s.leakD[c]+s.leakP[c])*s.dH[s.jx[c]] + s.leakY[c]
		for _, l := range s.incLink[s.incPtr[c]:s.incPtr[c+1]] {
			if l != k {
				sum += s.incidence(l, c) * s.dQ[l]
			}
		}
		s.dQ[k] = -sum / s.incidence(k, c)
	}
	worst := 0.0
	for k := range s.lm {
		sol.Flow[k] += s.dQ[k]
		worst = max(worst, math.Abs(s.dQ[k]))
	}
	return max(worst, s.updateLeaks(sol))
}

// updateLeaks applies the Newton step to the flow-form leaks (heads
// already updated) and returns the largest outflow change. A step that
// would make an outflow negative leaves the leak dry (zero outflow, the
// law at p ≤ 0); a leak dry at the start of the step takes its law's
// outflow again once its node's pressure is positive. A leak dried in
// this step waits one step, so that the heads first settle without it:
// restarted at the law's outflow at that pressure, it approaches the
// solution from above, where Newton's method on its convex law does not
// overshoot.
func (s *Solver) updateLeaks(sol *Solution) float64 {
	worst := 0.0
	for t := range s.leaks {
		lt := &s.leaks[t]
		if lt.dry {
			q, _ := LeakFlow(lt.c, lt.n, sol.Head[lt.node]-s.net.Nodes[lt.node].Elevation)
			if q > 0 {
				lt.q, lt.dry = q, false
				worst = max(worst, q)
			}
			continue
		}
		dq := lt.p*s.dH[s.jx[lt.node]] - lt.y
		if lt.q+dq <= 0 {
			dq = -lt.q
			lt.dry = true
		}
		lt.q += dq
		worst = max(worst, math.Abs(dq))
	}
	return worst
}

func (s *Solver) iterate(sol *Solution) (*Solution, error) {
	opt := &s.opt
	imb := s.residuals(sol, false)
	dqMax := math.Inf(1)
	it := 0
	converged := false
	for it < opt.MaxIterations {
		it++
		s.coefficients(sol)
		s.assemble(sol)
		if err := s.factorize(); err != nil {
			return nil, err
		}
		s.fac.Solve(s.dH, s.rhs)
		for _, v := range s.dH {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, errors.New("hydraulic: head correction is not finite (ill-conditioned network)")
			}
		}
		dqMax = s.updateFlows(sol)
		imb = s.residuals(sol, false)
		changed := false
		// Statuses are examined once the flows settle, and every tenth
		// iteration while they do not (a wrong status can keep them
		// from settling, e.g. active valves round a loop).
		if dqMax <= opt.StatusFlowChange || it%10 == 0 {
			changed = s.updateStatus(sol, true)
		}
		if dqMax <= opt.FlowTolerance && imb <= opt.ImbalanceTolerance && !changed {
			converged = true
			break
		}
	}
	sol.Iterations = it
	sol.MaxFlowChange = dqMax
	sol.MaxImbalance = imb
	s.finish(sol)
	if converged {
		// Links frozen for oscillating must agree with their final state.
		var osc []string
		for k := range s.lm {
			if s.frozen[k] && s.wouldChange(k, sol) {
				osc = append(osc, s.net.Links[k].ID)
			}
		}
		run := s.runaway(sol)
		if len(osc) == 0 && len(run) == 0 {
			sol.Converged = true
			return sol, nil
		}
		return sol, &NotConvergedError{Iterations: it, MaxFlowChange: dqMax, MaxImbalance: imb, Oscillating: osc, Runaway: run}
	}
	e := &NotConvergedError{Iterations: it, MaxFlowChange: dqMax, MaxImbalance: imb}
	for k := range s.lm {
		if s.changes[k] >= 3 {
			e.Oscillating = append(e.Oscillating, s.net.Links[k].ID)
		}
	}
	if len(e.Oscillating) == 0 {
		e.Oscillating = s.sortedByFlowChange(10)
	}
	e.Runaway = s.runaway(sol)
	return sol, e
}

// runawayPressure (m) marks a junction head that has left physics.
const runawayPressure = 1e4

// pivotShift (L/s per m) is added to every diagonal entry when a
// factorisation meets a non-positive pivot. Conductances span 1e-9 (closed
// links) to 1e6 (open links at zero flow), so a cluster joined to the rest
// only by closed links can lose its pivot to rounding; the shift ties
// every junction to its present head by a conductance far below any open
// link's. It only changes the Newton step, never the residuals that
// decide convergence.
const pivotShift = 1e-8

// factorize factors the assembled matrix, retrying once with the diagonal
// shifted by pivotShift if rounding made a pivot non-positive.
func (s *Solver) factorize() error {
	err := s.fac.Factorize(s.diag, s.off)
	if err == nil {
		return nil
	}
	var pe *pivotError
	if !errors.As(err, &pe) {
		return s.factorError(err)
	}
	for j := range s.diag {
		s.diag[j] += pivotShift
	}
	if err := s.fac.Factorize(s.diag, s.off); err != nil {
		return s.factorError(err)
	}
	return nil
}

// runaway returns up to 20 junctions whose pressure left ±runawayPressure.
func (s *Solver) runaway(sol *Solution) []string {
	var out []string
	for _, n := range s.node {
		if math.Abs(sol.Pressure[n]) > runawayPressure && len(out) < 20 {
			out = append(out, s.net.Nodes[n].ID)
		}
	}
	return out
}

func (s *Solver) factorError(err error) error {
	var pe *pivotError
	if errors.As(err, &pe) && pe.row >= 0 && pe.row < s.nj {
		return fmt.Errorf("hydraulic: junction %s: head equation singular (pivot %g): is it cut off, or joined only by links of zero resistance?", s.net.Nodes[s.node[pe.row]].ID, pe.pivot)
	}
	return fmt.Errorf("hydraulic: factorisation: %w", err)
}

// finish fills the derived per-node and per-link fields.
func (s *Solver) finish(sol *Solution) {
	for i := range s.jx {
		switch {
		case s.jx[i] >= 0:
			sol.Pressure[i] = sol.Head[i] - s.elev[i]
			q := 0.0
			if (s.netLeak && s.net.Nodes[i].LeakCoeff != 0) || sol.leakC[i] != 0 {
				q, _ = s.leakAt(i, sol.Head[i], sol, true)
			}
			sol.Leak[i] = q
		case s.tank[i]:
			sol.Pressure[i] = sol.Head[i] - s.elev[i]
			sol.Demand[i] = 0
		default:
			sol.Pressure[i] = 0
			sol.Demand[i] = 0
		}
	}
	for k := range s.hot {
		m := &s.hot[k]
		q := sol.Flow[k]
		if m.jf < 0 {
			sol.Demand[m.from] -= q
		}
		if m.jt < 0 {
			sol.Demand[m.to] += q
		}
		sol.Headloss[k] = sol.Head[m.from] - sol.Head[m.to]
		if a := s.area[k]; a > 0 {
			sol.Velocity[k] = q / 1000 / a
		}
	}
}
