package calib

import (
	"context"
	"fmt"
	"math"
	"sync"
	"time"

	"gonum.org/v1/gonum/mat"

	"plumbline/model/hydraulic"
	"plumbline/model/network"
	"plumbline/model/telemetry"
)

// hwExp is the flow exponent of Hazen-Williams: head loss ∝ C^-1.852
// (Williams & Hazen 1905), so d ln h / d ln C = −1.852.
const hwExp = 1.852

// param is one fitted quantity. Its internal value is the
// log-multiplier of the group's roughness (Roughness) or the zone's
// multiplier for one hour knot (DemandMultiplier).
type param struct {
	kind   Kind
	group  int // Roughness and pipeEffect: index into model.groups
	link   int // pipeEffect: the pipe
	zone   int // DemandMultiplier: index into model.zones
	day    int // 0 weekday (or every day), 1 weekend
	hour   int
	lo, hi float64
	prior  float64
	// sd is the prior's standard deviation; 0 means priorSD.
	sd   float64
	name string
}

// pipeEffect is the kind of a pipe's own log-multiplier of roughness
// about its group's (Settings.PipeSpread): internal, never reported as a
// Parameter.
const pipeEffect Kind = 100

// priorSD returns the standard deviation of the parameter's prior.
func (p *param) priorSD() float64 {
	if p.sd > 0 {
		return p.sd
	}
	return priorSD
}

// precision returns 1/priorSD².
func (p *param) precision() float64 {
	s := p.priorSD()
	return 1 / (s * s)
}

// snapData is one snapshot prepared for the model.
type snapData struct {
	t     time.Time
	day   int       // calendar day index in the window
	y     []float64 // per sensor, NaN when unusable
	head  []float64 // boundary head per node, NaN keeps the network's; nil: none
	off   []int     // pumps stopped by their meters
	pd    []float64 // base × pattern per node (0 for fixed-head nodes)
	za    []int     // per zone: parameter of the knot before t (−1 none)
	zb    []int     // per zone: parameter of the knot after t
	zf    []float64 // per zone: weight of the knot after t
	zs    []float64 // per zone: the inflow-matched scale of its demand (NaN: not matched)
	obs   []int     // observed sensors (indices), in row order
	level float64   // demand level, for selection
}

// batch is a list of snapshots with their rows.
type batch struct {
	snaps []*snapData
	first []int // per snapshot: its first row
	rows  int
	w     []float64 // per row: the fit's weight, 1/(σ² v) (v: the sensor's variance factor)
	aw    []float64 // per row: 1/σ², by accuracy alone (reported misfits)
	sen   []int     // per row: sensor index
	y     []float64 // per row: measured value
	snap  []int     // per row: snapshot index in the batch
}

func newBatch(snaps []*snapData, sens []sensorInfo) *batch {
	b := &batch{snaps: snaps}
	b.first = make([]int, len(snaps))
	for si, s := range snaps {
		b.first[si] = b.rows
		for _, k := range s.obs {
			a := 1 / (sens[k].sigma * sens[k].sigma)
			b.aw = append(b.aw, a)
			b.w = append(b.w, a/sens[k].weightFactor())
			b.sen = append(b.sen, k)
			b.y = append(b.y, s.y[k])
			b.snap = append(b.snap, si)
		}
		b.rows += len(s.obs)
	}
	return b
}

// model holds everything a fit evaluates.
type model struct {
	net      *network.Network
	set      Settings
	sens     []sensorInfo
	groups   []group
	params   []param
	zones    []string
	zoneOf   []int // node → zone index or −1
	rough0   []float64
	gparam   []int // group → parameter index or −1
	linkPar  []int // link → roughness parameter index or −1
	linkDev  []int // link → its own pipeEffect parameter index or −1 (nil: none)
	devLinks []int // the links with a pipeEffect, in link order
	// Zones with a water balance (Problem.Balances): their meters, whether
	// matched, the snapshots' counts, and the knots estimated from the
	// matched demand (estimateKnots).
	bal                  [][]balanceMeter
	matched              []bool
	matchedN, unmatchedN int
	knots                [][]knotEstimate
	locs                 []*time.Location // each zone's clock
}

// state is the model evaluated at one parameter vector: the solvers
// built for its roughness and one solution per snapshot of a batch.
type state struct {
	theta   []float64
	nets    []*network.Network
	solvers []*hydraulic.Solver
	sols    []*hydraulic.Solution
	fails   []error   // per snapshot: the solve's error, nil when solved
	r       []float64 // per row: measured − modelled
}

// trial modifies the evaluation for the closed-valve check.
type trial struct {
	link   int     // link index, −1 none
	factor float64 // resistance factor; +Inf closes the link
}

var noTrial = trial{link: -1}

// netFor returns a copy of the network with the roughness of theta.
func (m *model) netFor(theta []float64) *network.Network {
	n := m.net.Clone()
	for l, p := range m.linkPar {
		if p >= 0 {
			n.Links[l].Roughness = m.rough0[l] * math.Exp(theta[p]+m.devOf(theta, l))
		}
	}
	return n
}

// devOf returns pipe l's own log-multiplier of roughness in theta (0
// without one).
func (m *model) devOf(theta []float64, l int) float64 {
	if m.linkDev == nil || m.linkDev[l] < 0 {
		return 0
	}
	return theta[m.linkDev[l]]
}

// knot returns a multiplier parameter's value, 1 when idx < 0.
func knot(theta []float64, idx int) float64 {
	if idx < 0 {
		return 1
	}
	return theta[idx]
}

// evaluate solves every snapshot of b at theta, warm-started from warm
// (a state of the same batch, or nil), and returns the state with its
// residuals. Workers goroutines each own a solver and a network copy;
// all have returned when evaluate does.
func (m *model) evaluate(ctx context.Context, b *batch, theta []float64, warm *state, tr trial) (*state, error) {
	st, err := m.evaluateAll(ctx, b, theta, warm, tr)
	if err != nil {
		return nil, err
	}
	for _, e := range st.fails {
		if e != nil {
			return nil, e
		}
	}
	return st, nil
}

// evaluateAll is evaluate that goes on past snapshots that fail to
// solve, recording their errors in the state's fails.
func (m *model) evaluateAll(ctx context.Context, b *batch, theta []float64, warm *state, tr trial) (*state, error) {
	W := max(1, min(m.set.Workers, len(b.snaps)))
	st := &state{
		theta:   append([]float64(nil), theta...),
		nets:    make([]*network.Network, W),
		solvers: make([]*hydraulic.Solver, W),
		sols:    make([]*hydraulic.Solution, len(b.snaps)),
		fails:   make([]error, len(b.snaps)),
		r:       make([]float64, b.rows),
	}
	errs := make([]error, W)
	var wg sync.WaitGroup
	for w := range W {
		wg.Add(1)
		go func() {
			defer wg.Done()
			errs[w] = m.evalWorker(ctx, b, st, warm, tr, w, W)
		}()
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return nil, err
		}
	}
	return st, nil
}

func (m *model) evalWorker(ctx context.Context, b *batch, st *state, warm *state, tr trial, w, W int) error {
	net := m.netFor(st.theta)
	solver, err := hydraulic.NewSolver(net, hydraulic.Options{})
	if err != nil {
		return fmt.Errorf("calibration: %w", err)
	}
	st.nets[w], st.solvers[w] = net, solver
	nn, nl := len(net.Nodes), len(net.Links)
	c := &hydraulic.Conditions{
		Demand:    make([]float64, nn),
		FixedHead: make([]float64, nn),
		Status:    make([]network.Status, nl),
	}
	if tr.link >= 0 && !math.IsInf(tr.factor, 1) {
		c.ResistanceFactor = make([]float64, nl)
		for l := range c.ResistanceFactor {
			c.ResistanceFactor[l] = 1
		}
		c.ResistanceFactor[tr.link] = tr.factor
	}
	mult := make([]float64, len(m.zones))
	for i := w; i < len(b.snaps); i += W {
		if err := ctx.Err(); err != nil {
			return err
		}
		s := b.snaps[i]
		for z := range mult {
			mult[z] = (1-s.zf[z])*knot(st.theta, s.za[z]) + s.zf[z]*knot(st.theta, s.zb[z])
		}
		for j := range c.Demand {
			c.Demand[j] = s.pd[j]
			if z := m.zoneOf[j]; z >= 0 {
				c.Demand[j] *= mult[z]
			}
			c.FixedHead[j] = math.NaN()
			if s.head != nil {
				c.FixedHead[j] = s.head[j]
			}
		}
		for l := range c.Status {
			c.Status[l] = net.Links[l].Status
		}
		for _, l := range s.off {
			c.Status[l] = network.Closed
		}
		if tr.link >= 0 && math.IsInf(tr.factor, 1) {
			c.Status[tr.link] = network.Closed
		}
		var prev *hydraulic.Solution
		if warm != nil {
			prev = warm.sols[i]
		}
		sol, err := solver.Solve(c, prev)
		if err != nil {
			st.fails[i] = fmt.Errorf("calibration: snapshot %s: %w", s.t.Format(time.RFC3339), err)
			continue
		}
		st.sols[i] = sol
		for k, si := range s.obs {
			st.r[b.first[i]+k] = s.y[si] - m.modelled(si, sol)
		}
	}
	return nil
}

// modelled returns sensor si's quantity in a solution, canonical units.
func (m *model) modelled(si int, sol *hydraulic.Solution) float64 {
	s := &m.sens[si]
	if s.link >= 0 {
		return sol.Flow[s.link]
	}
	if s.s.Quantity == telemetry.Head {
		return sol.Head[s.node]
	}
	return sol.Pressure[s.node]
}

// linkScreen accumulates, per link, the score g = Σ w r ∂f/∂ln φ and the
// information h = Σ w (∂f/∂ln φ)² of a resistance factor φ on that link
// (w already divided by the sensor's variance factor).
type linkScreen struct {
	g, h []float64
}

// jacobian fills J (rows × parameters) at the state's solutions: one
// adjoint Sensitivities call per snapshot. scale (per sensor, or nil)
// divides the weights of screen, which is filled when not nil.
func (m *model) jacobian(ctx context.Context, b *batch, st *state, J *mat.Dense, scale []float64, screen *linkScreen) error {
	W := len(st.solvers)
	errs := make([]error, W)
	parts := make([]*linkScreen, W)
	var wg sync.WaitGroup
	for w := range W {
		if screen != nil {
			parts[w] = &linkScreen{g: make([]float64, len(m.net.Links)), h: make([]float64, len(m.net.Links))}
		}
		wg.Add(1)
		go func() {
			defer wg.Done()
			errs[w] = m.jacWorker(ctx, b, st, J, scale, parts[w], w, W)
		}()
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	if screen != nil {
		for _, p := range parts {
			for l := range p.g {
				screen.g[l] += p.g[l]
				screen.h[l] += p.h[l]
			}
		}
	}
	return nil
}

func (m *model) jacWorker(ctx context.Context, b *batch, st *state, J *mat.Dense, scale []float64, screen *linkScreen, w, W int) error {
	net, solver := st.nets[w], st.solvers[w]
	nl := len(net.Links)
	e := make([]float64, nl)
	zsum := make([]float64, len(m.zones))
	gsum := make([]float64, len(m.params))
	np := len(m.params)
	// The rows of one snapshot's derivatives serve the next (the worker's
	// snapshots are taken one at a time).
	var reuse *hydraulic.Sensitivity
	for i := w; i < len(b.snaps); i += W {
		if err := ctx.Err(); err != nil {
			return err
		}
		s := b.snaps[i]
		sol := st.sols[i]
		if len(s.obs) == 0 {
			continue
		}
		obs := make([]hydraulic.Observation, len(s.obs))
		for k, si := range s.obs {
			if l := m.sens[si].link; l >= 0 {
				obs[k] = hydraulic.LinkObservation(l)
			} else {
				obs[k] = hydraulic.NodeObservation(m.sens[si].node)
			}
		}
		sen, err := solver.SensitivitiesInto(sol, obs, reuse)
		if err != nil {
			return fmt.Errorf("calibration: snapshot %s: sensitivities: %w", s.t.Format(time.RFC3339), err)
		}
		reuse = sen
		for l := range e {
			e[l] = 0
			if m.linkPar[l] >= 0 {
				e[l] = roughnessElasticity(net, l, sol.Flow[l])
			}
		}
		for k := range s.obs {
			row := J.RawRowView(b.first[i] + k)
			for p := range row[:np] {
				row[p] = 0
			}
			res := sen.Resistance[k]
			for p := range gsum {
				gsum[p] = 0
			}
			for l, p := range m.linkPar {
				if p >= 0 {
					gsum[p] += res[l] * e[l]
				}
			}
			for p, v := range gsum {
				if m.params[p].kind == Roughness {
					row[p] = v
				}
			}
			for _, l := range m.devLinks {
				row[m.linkDev[l]] = res[l] * e[l]
			}
			for z := range zsum {
				zsum[z] = 0
			}
			out := sen.Outflow[k]
			for j, z := range m.zoneOf {
				if z >= 0 && s.pd[j] != 0 {
					zsum[z] += out[j] * s.pd[j]
				}
			}
			for z, v := range zsum {
				if a := s.za[z]; a >= 0 {
					row[a] += (1 - s.zf[z]) * v
				}
				if bb := s.zb[z]; bb >= 0 {
					row[bb] += s.zf[z] * v
				}
			}
			if screen != nil {
				rr := b.first[i] + k
				wt := b.w[rr]
				if scale != nil {
					wt /= scale[b.sen[rr]]
				}
				r := st.r[rr]
				for l, v := range res {
					if v != 0 {
						screen.g[l] += wt * r * v
						screen.h[l] += wt * v * v
					}
				}
			}
		}
	}
	return nil
}

// roughnessElasticity returns d ln h / d ln roughness of pipe l at flow
// q (L/s), holding q: h is the pipe's whole loss (friction and minor),
// so the friction share scales the friction law's elasticity. For
// Hazen-Williams the friction elasticity is −1.852; for Darcy-Weisbach
// it is d ln f / d ln ε of the friction factor at the pipe's Reynolds
// number, by a central difference of hydraulic.FrictionFactor (0 in
// laminar flow).
func roughnessElasticity(net *network.Network, l int, q float64) float64 {
	lk := &net.Links[l]
	d := lk.Diameter / 1000
	aq := math.Abs(q) / 1000
	hm := hydraulic.MinorLoss(aq, d, lk.MinorLoss)
	if net.Headloss == network.DarcyWeisbach {
		if lk.Roughness <= 0 || aq == 0 {
			return 0
		}
		nu := net.Viscosity
		if nu <= 0 {
			nu = network.DefaultViscosity
		}
		area := math.Pi * d * d / 4
		re := aq * d / (area * nu)
		if re <= 2000 {
			return 0
		}
		rel := lk.Roughness / lk.Diameter
		const dl = 1e-4
		el := (math.Log(hydraulic.FrictionFactor(re, rel*math.Exp(dl))) - math.Log(hydraulic.FrictionFactor(re, rel*math.Exp(-dl)))) / (2 * dl)
		hf := hydraulic.DarcyWeisbachLoss(aq, lk.Length, d, lk.Roughness/1000, nu)
		if hf+hm <= 0 {
			return el
		}
		return el * hf / (hf + hm)
	}
	if hm == 0 {
		return -hwExp
	}
	hf := hydraulic.HazenWilliamsLoss(aq, lk.Length, d, lk.Roughness)
	if hf+hm <= 0 {
		return -hwExp
	}
	return -hwExp * hf / (hf + hm)
}
