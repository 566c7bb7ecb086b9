package hydraulic

import (
	"errors"
	"fmt"
	"math"
	"sort"

	"plumbline/model/network"
)

// Model constants of the link laws (our choices, documented in doc.go).
const (
	// gMin is a linear resistance (m per L/s) added to every open link so
	// that dh/dQ never vanishes at Q = 0.
	gMin = 1e-6
	// gClosed is the resistance (m per L/s) of a closed or shut link: it
	// stays in the matrix pattern with conductance 1e-9 L/s per m.
	gClosed = 1e9
	// cBig is the penalty (L/s per m) that pins the head of the node a
	// pressure valve controls.
	cBig = 1e12
	// pumpLowFlow is the fraction of a pump's zero-head flow below which
	// its curve is continued by its tangent (so the slope stays finite).
	pumpLowFlow = 1e-2
)

type linkKind uint8

const (
	lkPipe linkKind = iota
	lkPump
	lkValve
)

// linkModel is the precomputed law of one link, flows in L/s.
type linkModel struct {
	kind     linkKind
	valve    network.ValveType
	from, to int // node indices
	jf, jt   int // junction (matrix) indices, -1 for fixed-head nodes
	entry    int // off-diagonal pattern entry, -1 if none
	cv       bool

	dw                bool
	hwR               float64 // h = hwR·Q|Q|^0.852 (Q in L/s)
	length, diam, rel float64 // Darcy-Weisbach, SI
	minor             float64 // h = minor·Q|Q| (Q in L/s), from the link's K
	perK              float64 // minor loss per unit K: 1/(2gA²) per (L/s)²
	area              float64 // m²
	curve             PumpCurve
}

// linkHot is the part of a linkModel the Newton loop reads each
// iteration: the ends, the matrix entry, and the law of a plain
// Hazen-Williams pipe.
type linkHot struct {
	from, to, jf, jt, entry int32
	kind                    linkKind
	hw                      bool // a Hazen-Williams pipe: hwR and minor give its law
	plain                   bool // a pipe without check valve: open unless closed
	hwR, minor              float64
}

// Solver solves the steady state of one network topology for many sets of
// conditions. NewSolver does the topology work once: the junction
// numbering, the matrix pattern and its fill-reducing ordering and
// symbolic factorisation; each Solve then only refactors numerically.
// A Solver owns its workspace and is not safe for concurrent use; use one
// Solver per goroutine.
type Solver struct {
	net  *network.Network
	opt  Options
	nj   int   // number of junctions
	jx   []int // node -> junction index or -1
	node []int // junction index -> node
	lm   []linkModel
	// hot holds what the Newton loop reads of every link at every
	// iteration, packed (40 bytes a link against linkModel's 152): the
	// loops over links stream through it instead.
	hot []linkHot
	// Per link, what each solve reads of the network besides the laws:
	// the status, and the area (m², 0 for pumps) that gives the velocity.
	status []network.Status
	area   []float64
	// netLeak says some junction of the network has a leak coefficient;
	// leakBad is the first junction whose own leak data is not valid
	// (-1: none), so that each solve need not look again.
	netLeak bool
	leakBad int
	// condLeak says the conditions of the solve under way give leaks
	// (set by newSolution), so that initLeaks need not look for them.
	condLeak bool
	// Per node, what each solve reads of the network: elevation, base
	// demand, fixed head (reservoirs and tanks), and whether it is a tank.
	elev, baseDemand, fixedHead []float64
	tank                        []bool
	nu                          float64

	// incidence: links at each node, CSR
	incPtr, incLink []int

	fac factorizer

	// workspace
	diag, off, rhs, dH, dQ, p, y, s, F, leakD []float64
	flips                                     []int
	changes                                   []int
	frozen                                    []bool
	queue                                     []int
	seen                                      []bool
	ctrl                                      []int // link -> controlled node for active pressure valves, else -1

	// warm keeps a warm start that SolveInto is about to overwrite.
	warm Solution
	// near is set during SolveNear (near.go): the link slopes and the
	// factor it keeps from solve to solve.
	near *Near
	// connClosed is the closed-link pattern of the last successful
	// connectivity check (connOK): the check depends on nothing else.
	connClosed []bool
	connOK     bool

	// Leaks solved in flow form (exponent below 1): their outflow
	// iterates, and per node the sums of their Newton coefficients and
	// the gap between iterate and law (for the imbalance test).
	leaks                 []leakTerm
	leakP, leakY, leakGap []float64
}

// leakTerm is one FAVAD leak with exponent in (0, 1), solved in flow form:
// its outflow q is an unknown of Newton's method beside the heads, with
// the law p = (q/c)^(1/n), convex in q. A Newton step that would make q
// negative leaves the leak dry (q = 0: the law's p ≤ 0 branch) until the
// node's pressure is positive again.
type leakTerm struct {
	node int
	c, n float64
	q    float64 // outflow iterate, L/s
	p, y float64 // Newton coefficients: Δq = p·ΔH − y
	dry  bool
}

// flowForm reports whether a leak of coefficient c and exponent n is
// solved in flow form. Exponents of 1 and above are convex in the
// pressure and stay in head form; so does n = 0 (a constant outflow
// whenever the pressure is positive), whose inverse does not exist.
func flowForm(c, n float64) bool { return c > 0 && n > 0 && n < 1 }

// NewSolver checks the network's links for the data the laws need,
// numbers the junctions, fits the pump curves and analyses the matrix
// pattern. The network must not be changed while the Solver is in use
// (Conditions carry everything that varies between solves).
func NewSolver(net *network.Network, opt Options) (*Solver, error) {
	if net == nil {
		return nil, errors.New("hydraulic: nil network")
	}
	s := &Solver{net: net, opt: opt.withDefaults(), nu: net.Viscosity}
	if s.nu <= 0 {
		s.nu = network.DefaultViscosity
	}
	nn := len(net.Nodes)
	s.jx = make([]int, nn)
	fixed := 0
	for i := range net.Nodes {
		if net.Nodes[i].IsFixedHead() {
			s.jx[i] = -1
			fixed++
			continue
		}
		s.jx[i] = s.nj
		s.node = append(s.node, i)
		s.nj++
	}
	if fixed == 0 {
		return nil, errors.New("hydraulic: network has no reservoir or tank: heads are undefined")
	}
	var errs []error
	var rows, cols []int
	s.lm = make([]linkModel, len(net.Links))
	deg := make([]int, nn+1)
	for k := range net.Links {
		l := &net.Links[k]
		m, err := s.buildLink(l)
		if err != nil {
			errs = append(errs, fmt.Errorf("link %s: %w", l.ID, err))
			continue
		}
		m.entry = -1
		if m.jf >= 0 && m.jt >= 0 && m.jf != m.jt {
			m.entry = len(rows)
			rows = append(rows, max(m.jf, m.jt))
			cols = append(cols, min(m.jf, m.jt))
		}
		s.lm[k] = m
		deg[m.from+1]++
		if m.to != m.from {
			deg[m.to+1]++
		}
	}
	if len(errs) > 0 {
		return nil, fmt.Errorf("hydraulic: %w", errors.Join(errs...))
	}
	for i := 0; i < nn; i++ {
		deg[i+1] += deg[i]
	}
	s.incPtr = deg
	s.incLink = make([]int, deg[nn])
	fill := append([]int(nil), deg[:nn]...)
	for k, m := range s.lm {
		s.incLink[fill[m.from]] = k
		fill[m.from]++
		if m.to != m.from {
			s.incLink[fill[m.to]] = k
			fill[m.to]++
		}
	}
	fac, err := newFactorizer(s.nj, rows, cols, s.opt.dense)
	if err != nil {
		return nil, fmt.Errorf("hydraulic: matrix analysis: %w", err)
	}
	s.fac = fac
	nl := len(net.Links)
	s.diag = make([]float64, s.nj)
	s.off = make([]float64, len(rows))
	s.rhs = make([]float64, s.nj)
	s.dH = make([]float64, s.nj)
	s.dQ = make([]float64, nl)
	s.p = make([]float64, nl)
	s.y = make([]float64, nl)
	s.s = make([]float64, nl)
	s.F = make([]float64, nn)
	s.leakD = make([]float64, nn)
	s.flips = make([]int, nl)
	s.changes = make([]int, nl)
	s.frozen = make([]bool, nl)
	s.queue = make([]int, 0, nn)
	s.seen = make([]bool, nn)
	s.ctrl = make([]int, nl)
	s.leakP = make([]float64, nn)
	s.leakY = make([]float64, nn)
	s.leakGap = make([]float64, nn)
	s.connClosed = make([]bool, nl)
	s.hot = make([]linkHot, nl)
	for k := range s.lm {
		m := &s.lm[k]
		s.hot[k] = linkHot{from: int32(m.from), to: int32(m.to), jf: int32(m.jf), jt: int32(m.jt), entry: int32(m.entry),
			kind: m.kind, hw: m.kind == lkPipe && !m.dw, plain: m.kind == lkPipe && !m.cv, hwR: m.hwR, minor: m.minor}
	}
	s.status, s.area = make([]network.Status, nl), make([]float64, nl)
	for k := range s.lm {
		s.status[k], s.area[k] = net.Links[k].Status, s.lm[k].area
	}
	s.leakBad = -1
	s.elev, s.baseDemand, s.fixedHead, s.tank = make([]float64, nn), make([]float64, nn), make([]float64, nn), make([]bool, nn)
	for i := range net.Nodes {
		n := &net.Nodes[i]
		s.elev[i], s.baseDemand[i], s.tank[i] = n.Elevation, n.Demand, n.Kind == network.Tank
		if s.jx[i] < 0 {
			s.fixedHead[i] = n.FixedHead()
			continue
		}
		if n.LeakCoeff != 0 {
			s.netLeak = true
		}
		bad := func(v float64) bool { return math.IsNaN(v) || math.IsInf(v, 0) }
		if s.leakBad < 0 && (n.LeakCoeff < 0 || n.LeakExponent < 0 || bad(n.LeakCoeff) || bad(n.LeakExponent)) {
			s.leakBad = i
		}
	}
	return s, nil
}

func (s *Solver) buildLink(l *network.Link) (linkModel, error) {
	nn := len(s.net.Nodes)
	m := linkModel{kind: lkPipe, from: l.From, to: l.To, jf: -1, jt: -1, cv: l.CheckValve}
	if l.From < 0 || l.From >= nn || l.To < 0 || l.To >= nn {
		return m, fmt.Errorf("end node index out of range (%d, %d of %d nodes)", l.From, l.To, nn)
	}
	if l.From == l.To {
		return m, fmt.Errorf("starts and ends at node %s", s.net.Nodes[l.From].ID)
	}
	m.jf, m.jt = s.jx[l.From], s.jx[l.To]
	finite := func(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
	setArea := func() error {
		if !(l.Diameter > 0) || !finite(l.Diameter) {
			return fmt.Errorf("diameter must be positive, got %g mm", l.Diameter)
		}
		d := l.Diameter / 1000
		m.diam = d
		m.area = math.Pi * d * d / 4
		m.perK = 1 / (2 * Gravity * m.area * m.area) / 1e6
		if l.MinorLoss < 0 || !finite(l.MinorLoss) {
			return fmt.Errorf("minor loss must be ≥ 0, got %g", l.MinorLoss)
		}
		m.minor = l.MinorLoss * m.perK
		return nil
	}
	switch l.Kind {
	case network.Pipe:
		if err := setArea(); err != nil {
			return m, err
		}
		if !(l.Length > 0) || !finite(l.Length) {
			return m, fmt.Errorf("length must be positive, got %g m", l.Length)
		}
		m.length = l.Length
		if s.net.Headloss == network.DarcyWeisbach {
			if l.Roughness < 0 || !finite(l.Roughness) {
				return m, fmt.Errorf("Darcy-Weisbach roughness must be ≥ 0 mm, got %g", l.Roughness)
			}
			m.dw = true
			m.rel = l.Roughness / l.Diameter
		} else {
			if !(l.Roughness > 0) || !finite(l.Roughness) {
				return m, fmt.Errorf("Hazen-Williams C must be positive, got %g", l.Roughness)
			}
			m.hwR = hazenWilliamsResistance(l.Length, m.diam, l.Roughness) * math.Pow(1e-3, hwFlowExp)
		}
	case network.Pump:
		m.kind = lkPump
		m.cv = false
		c, err := FitPumpCurve(l.Curve)
		if err != nil {
			return m, err
		}
		m.curve = c
	case network.Valve:
		m.kind = lkValve
		m.valve = l.Valve
		if err := setArea(); err != nil {
			return m, err
		}
		switch l.Valve {
		case network.PressureReducing:
			if m.jt < 0 {
				return m, fmt.Errorf("pressure-reducing valve needs a junction downstream, node %s is fixed-head", s.net.Nodes[l.To].ID)
			}
		case network.PressureSustaining:
			if m.jf < 0 {
				return m, fmt.Errorf("pressure-sustaining valve needs a junction upstream, node %s is fixed-head", s.net.Nodes[l.From].ID)
			}
		case network.FlowControl, network.Throttle, network.Isolating:
		default:
			return m, fmt.Errorf("unknown valve type %v", l.Valve)
		}
	default:
		return m, fmt.Errorf("unknown link kind %v", l.Kind)
	}
	return m, nil
}

// Network returns the network the Solver was built for.
func (s *Solver) Network() *network.Network { return s.net }

// lawOpen returns the head loss h (m) and dh/dQ (m per L/s) of an open
// link at flow q (L/s), and the part of h that scales with the resistance
// factor (its derivative with respect to ln factor).
func (s *Solver) lawOpen(k int, q float64, sol *Solution) (h, g, scaled float64) {
	m := &s.lm[k]
	aq := math.Abs(q)
	switch m.kind {
	case lkPipe:
		if m.dw {
			hh, gg := darcyWeisbach(q/1000, m.length, m.diam, m.rel, s.nu)
			h, g = hh, gg/1000
		} else {
			t := m.hwR * hwPow(aq)
			h, g = t*q, hwFlowExp*t
		}
		h += m.minor * q * aq
		g += 2 * m.minor * aq
	case lkValve:
		k2 := m.minor
		if m.valve == network.Throttle {
			k2 = sol.setting[k] * m.perK
		}
		h, g = k2*q*aq, 2*k2*aq
	case lkPump:
		sp := sol.speed[k]
		q0 := pumpLowFlow * m.curve.MaxFlow(sp)
		if q >= q0 {
			h, g = -m.curve.Head(q, sp), -m.curve.Slope(q, sp)
		} else {
			g0 := -m.curve.Slope(q0, sp)
			h, g = -m.curve.Head(q0, sp)+g0*(q-q0), g0
		}
		return h + gMin*q, g + gMin, 0
	}
	f := sol.factor[k]
	return f*h + gMin*q, f*g + gMin, f * h
}

func isPressureValve(m *linkModel) bool {
	return m.kind == lkValve && (m.valve == network.PressureReducing || m.valve == network.PressureSustaining)
}

// controlled returns the node a pressure valve holds and its set head.
func (s *Solver) controlled(k int, sol *Solution) (node int, hset float64) {
	m := &s.lm[k]
	if m.valve == network.PressureReducing {
		return m.to, s.net.Nodes[m.to].Elevation + sol.setting[k]
	}
	return m.from, s.net.Nodes[m.from].Elevation + sol.setting[k]
}

// sortedByFlowChange returns up to n link ids with the largest |dQ|.
func (s *Solver) sortedByFlowChange(n int) []string {
	idx := make([]int, 0, len(s.dQ))
	for k := range s.dQ {
		if s.dQ[k] != 0 {
			idx = append(idx, k)
		}
	}
	sort.Slice(idx, func(a, b int) bool { return math.Abs(s.dQ[idx[a]]) > math.Abs(s.dQ[idx[b]]) })
	if len(idx) > n {
		idx = idx[:n]
	}
	out := make([]string, len(idx))
	for i, k := range idx {
		out[i] = s.net.Links[k].ID
	}
	return out
}
