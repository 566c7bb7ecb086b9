package detect

import (
	"math"

	"plumbline/model/hydraulic"
	"plumbline/model/network"
	"plumbline/model/telemetry"
)

// The parts of a step that set the hydraulic model's conditions. Step
// and the solve-ahead (Ahead) both build conditions with them, so that a
// solve made ahead is a solve of exactly the conditions Step would set.

// bounds sets c's boundary conditions from the snapshot: tank levels and
// source heads from their sensors, pumps whose own flow meter shows them
// stopped as closed, the rest as in the network. excluded tells the
// sensors left out (faulty); c's slices are allocated on first use.
func (d *Detector) bounds(c *hydraulic.Conditions, snap telemetry.Snapshot, excluded func(si int) bool) {
	nn := len(d.net.Nodes)
	if c.FixedHead == nil {
		c.FixedHead = make([]float64, nn)
		c.Demand = make([]float64, nn)
	}
	for i := range c.FixedHead {
		c.FixedHead[i] = math.NaN()
	}
	if c.Status == nil {
		c.Status = make([]network.Status, len(d.net.Links))
	}
	for l := range d.net.Links {
		c.Status[l] = d.net.Links[l].Status
	}
	for si, info := range d.sens {
		a := snap.Values[si]
		if !usable(a) || excluded(si) {
			continue
		}
		if info.link >= 0 {
			// A pump whose own flow meter reads less than a tenth of its
			// duty flow, or within three σ of zero, is stopped.
			if d.net.Links[info.link].Kind == network.Pump && math.Abs(a.Value) < info.pumpOff {
				c.Status[info.link] = network.Closed
			}
			continue
		}
		n := &d.net.Nodes[info.node]
		switch {
		case info.s.Quantity == telemetry.Level && n.Kind == network.Tank:
			c.FixedHead[info.node] = n.Elevation + a.Value
		case info.s.Quantity == telemetry.Head && n.IsFixedHead():
			c.FixedHead[info.node] = a.Value
		}
	}
}

// excluded reports whether the detector has left sensor si out.
func (d *Detector) excluded(si int) bool { return d.st.Sensors[si].Excluded }

// zoneDemand is the zone's demand by the patterns (base) and the leakage
// the model carries (modelLeak, nil for none), L/s.
func (d *Detector) zoneDemand(zi int, base, modelLeak []float64) (dem, leak float64) {
	for _, j := range d.zones[zi].junctions {
		dem += base[j]
		if modelLeak != nil {
			leak += modelLeak[j]
		}
	}
	return dem, leak
}

// multiplier scales a zone's pattern demand so that demand and the
// model's leakage add up to the measured inflow, within [0, 5] (1 for a
// zone without pattern demand).
func multiplier(inflow, dem, leak float64) float64 {
	if dem > 0 {
		return math.Min(5, math.Max(0, (inflow-leak)/dem))
	}
	return 1
}

// matchDemand sets the inflow-matched demand: base × the zone's
// multiplier for junctions in a zone, base elsewhere (dst holds base on
// entry).
func (d *Detector) matchDemand(dst, base, mult []float64) {
	for i := range dst {
		if zi := d.nodeZone[i]; zi >= 0 {
			dst[i] = base[i] * mult[zi]
		}
	}
}

// expSolve is the expected-consumption solve of d.cond: pre's when pre
// solved the same conditions, otherwise the detector's own (chainSolve).
func (d *Detector) expSolve(pre *presolve) (*hydraulic.Solution, error) {
	if pre != nil && pre.ok && pre.exp != nil && sameBounds(&pre.cond, &d.cond) && sameBits(pre.base, d.cond.Demand) {
		d.prevExp, pre.exp = pre.exp, d.prevExp
		return d.prevExp, nil
	}
	return chainSolve(d.solver, &d.cond, &d.prevExp)
}

// matSolve is the inflow-matched solve of d.cond (multipliers mult), as
// expSolve is the expected-consumption one; presolved says it was pre's.
func (d *Detector) matSolve(pre *presolve, mult []float64) (sol *hydraulic.Solution, presolved bool, err error) {
	if pre != nil && pre.ok && sameBounds(&pre.cond, &d.cond) && sameBits(pre.base, d.base) && sameBits(pre.mult, mult) {
		d.prevMat, pre.mat = pre.mat, d.prevMat
		return d.prevMat, true, nil
	}
	sol, err = chainSolve(d.solver, &d.cond, &d.prevMat)
	return sol, false, err
}

// chainSolve solves c on s into the memory of *prev, warm from it (the
// previous step's solution: the same numbers as a fresh Solution, without
// 0.6 MB a step on 5,000 junctions to collect), and leaves the solution
// in *prev. After an error that memory holds no solution: *prev becomes
// nil and the next solve starts cold.
func chainSolve(s *hydraulic.Solver, c *hydraulic.Conditions, prev **hydraulic.Solution) (*hydraulic.Solution, error) {
	sol, err := s.SolveInto(c, *prev, *prev)
	if err != nil {
		*prev = nil
		return nil, err
	}
	*prev = sol
	return sol, nil
}
