package hydraulic

import (
	"fmt"
	"strings"

	"plumbline/model/network"
)

// Options are the settings of a Solver. The zero value selects the
// documented defaults.
type Options struct {
	// MaxIterations caps the Newton iterations of one Solve; default 200.
	MaxIterations int
	// FlowTolerance is the largest link flow change (L/s) of the last
	// iteration for convergence; default 1e-3 L/s (Newton converges
	// quadratically, so the flows returned are far closer than that).
	FlowTolerance float64
	// ImbalanceTolerance is the largest junction continuity residual
	// (L/s) of the solution for convergence; default 1e-6 L/s.
	ImbalanceTolerance float64
	// StatusFlowChange is the largest flow change (L/s) below which the
	// link statuses (check valves, pumps, control valves) are re-examined;
	// default 0.1 L/s (or FlowTolerance, whichever is larger). Checking
	// only once the flows have settled keeps status logic from chasing the
	// large early Newton steps.
	StatusFlowChange float64
	// HeadHysteresis is the head margin (m) a status test must clear
	// before a link changes status; default 1e-4 m.
	HeadHysteresis float64
	// MaxStatusChanges is how often one link may change status in one
	// Solve before it is frozen and reported as oscillating; default 8.
	MaxStatusChanges int

	// dense selects the dense gonum Cholesky (tests only).
	dense bool
}

func (o Options) withDefaults() Options {
	if o.MaxIterations <= 0 {
		o.MaxIterations = 200
	}
	if o.FlowTolerance <= 0 {
		o.FlowTolerance = 1e-3
	}
	if o.ImbalanceTolerance <= 0 {
		o.ImbalanceTolerance = 1e-6
	}
	if o.StatusFlowChange <= 0 {
		o.StatusFlowChange = 0.1
	}
	if o.StatusFlowChange < o.FlowTolerance {
		o.StatusFlowChange = o.FlowTolerance
	}
	if o.HeadHysteresis <= 0 {
		o.HeadHysteresis = 1e-4
	}
	if o.MaxStatusChanges <= 0 {
		o.MaxStatusChanges = 8
	}
	return o
}

// Conditions are the boundary conditions of one Solve. A nil slice means
// "as in the network"; a non-nil slice must have one entry per node (or
// per link) of the network.
type Conditions struct {
	// Demand is each junction's consumption, L/s (already base × pattern ×
	// multiplier). Nil: the network's base demands. Entries of fixed-head
	// nodes are ignored.
	Demand []float64
	// FixedHead is the head (m) of each reservoir or tank; NaN keeps the
	// network's (Node.FixedHead). Entries of junctions are ignored.
	FixedHead []float64
	// LeakCoeff and LeakExponent add a FAVAD leak q = C·p^N (L/s, m) at
	// each junction, on top of the network's own leak; C = 0 means none.
	// Both or neither must be given.
	LeakCoeff, LeakExponent []float64
	// Status opens or closes each link. For control valves Open means
	// "controlling by its type".
	Status []network.Status
	// PumpSpeed is each pump's relative speed; NaN keeps the network's,
	// 0 stops the pump. Entries of other links are ignored.
	PumpSpeed []float64
	// ValveSetting is each valve's setting in its type's unit (m, L/s or
	// loss coefficient); NaN keeps the network's.
	ValveSetting []float64
	// ResistanceFactor multiplies each pipe's or valve's head loss
	// (a blockage leaving open fraction a is 1/a²); 1 is as built,
	// pumps ignore it. Must be positive.
	ResistanceFactor []float64
}

// LinkState is the state of a link in a solution.
type LinkState uint8

const (
	// Open is a link carrying flow by its law (a control valve fully
	// open, a pump running on its curve).
	Open LinkState = iota
	// Closed is a link closed by the network or the conditions (status
	// closed, pump stopped).
	Closed
	// Active is a control valve that is controlling: a pressure-reducing
	// valve holding its outlet pressure, a pressure-sustaining valve its
	// inlet pressure, a flow-control valve its flow.
	Active
	// CheckShut is a link shut by the solver to stop reverse flow: a pipe
	// with a check valve, a pump against a head above its shutoff head, or
	// a pressure valve whose flow would reverse.
	CheckShut
)

// String returns the state's word.
func (s LinkState) String() string {
	switch s {
	case Open:
		return "open"
	case Closed:
		return "closed"
	case Active:
		return "active"
	case CheckShut:
		return "check-shut"
	}
	return fmt.Sprintf("LinkState(%d)", uint8(s))
}

// Solution is the result of one Solve. All slices are freshly allocated
// and owned by the caller.
type Solution struct {
	// Head (m), Pressure (m above ground; a tank's level; 0 for a
	// reservoir), Demand (L/s: a junction's consumption; for a fixed-head
	// node its net outflow into the node, negative when it supplies) and
	// Leak (L/s, FAVAD outflow) per node.
	Head, Pressure, Demand, Leak []float64
	// Flow (L/s, positive From→To), Velocity (m/s, 0 for pumps) and
	// Headloss (m, head at From minus head at To; negative across a pump
	// lifting water) per link.
	Flow, Velocity, Headloss []float64
	// State is each link's state.
	State []LinkState
	// Iterations is the number of Newton iterations taken.
	Iterations int
	// MaxFlowChange is the largest link flow change (L/s) of the last
	// iteration; MaxImbalance the largest junction continuity residual
	// (L/s) of the solution.
	MaxFlowChange, MaxImbalance float64
	// Converged says both tolerances were met with statuses settled.
	Converged bool

	// Effective conditions, kept for Sensitivities.
	leakC, leakN []float64 // extra (conditions) leak per node
	speed        []float64 // per link
	setting      []float64 // per link
	factor       []float64 // per link
	solver       *Solver
}

// NotConvergedError reports a Solve that did not meet its tolerances
// within Options.MaxIterations, or ended with a link whose status kept
// changing. The Solution returned beside it holds the last iterate.
type NotConvergedError struct {
	Iterations                  int
	MaxFlowChange, MaxImbalance float64
	// Oscillating names the links whose status kept changing, or, failing
	// those, the links with the largest flow changes in the last iteration.
	Oscillating []string
	// Runaway names junctions whose pressure ran beyond ±10 km of water:
	// they hang on links that cannot carry their demand (a flow-control
	// valve set too low, shut check valves), so no steady state exists.
	Runaway []string
}

// Error says how far the solve got and names the links and junctions.
func (e *NotConvergedError) Error() string {
	run := ""
	if len(e.Runaway) > 0 {
		run = "; junctions without a feasible supply " + strings.Join(e.Runaway, ", ")
	}
	links := ""
	if len(e.Oscillating) > 0 {
		links = "; links " + strings.Join(e.Oscillating, ", ")
	}
	return fmt.Sprintf("hydraulic solve did not converge in %d iterations (largest flow change %.3g L/s, largest imbalance %.3g L/s%s%s)",
		e.Iterations, e.MaxFlowChange, e.MaxImbalance, links, run)
}

// DisconnectedError reports junctions that no open path links to a
// reservoir or tank: their heads are undefined.
type DisconnectedError struct {
	// Junctions are the ids of the cut-off junctions (at most 50).
	Junctions []string
	// Count is the number of cut-off junctions.
	Count int
}

// Error names the cut-off junctions.
func (e *DisconnectedError) Error() string {
	more := ""
	if e.Count > len(e.Junctions) {
		more = fmt.Sprintf(" and %d more", e.Count-len(e.Junctions))
	}
	return fmt.Sprintf("%d junction(s) cut off from every reservoir and tank: %s%s", e.Count, strings.Join(e.Junctions, ", "), more)
}
