package detect

import (
	"errors"
	"math"
	"slices"
	"sync"
	"time"

	"plumbline/model/demand"
	"plumbline/model/hydraulic"
	"plumbline/model/telemetry"
)

// Ahead solves the hydraulic model of coming steps while the detector
// works through the steps before them, for a replay, which knows its
// next snapshots. The solves are most of a step's work (three quarters
// on the 5,000-junction town); two workers, each with its own Solver,
// take alternate steps, so that on two cores a year of 15-minute steps
// goes about twice as fast.
//
// A worker builds a step's conditions as Step does, from the snapshot,
// the three before it (a flow meter's last good value) and the sensors
// the detector had excluded when the step was queued, by the same code
// (bounds, zoneInflow, multiplier, matchDemand). Step then uses the
// worker's solution only if its own conditions turn out the same to the
// last bit, and solves itself otherwise (a sensor excluded in between,
// a meter's fallback value seen differently): the findings cannot
// depend on the guess.
//
// The one difference from Step alone is the warm start: each worker
// starts from its own previous solve, two steps back, not from the step
// before. A solution is the same to the solver's tolerances (a flow
// change below 0.001 L/s in the last iteration), not to the last bit.
//
// An Ahead belongs to one goroutine, which calls Queue and Step in step
// order and Close at the end; its workers stop at Close.
type Ahead struct {
	d       *Detector
	workers [2]*aheadWorker
	recent  []telemetry.Snapshot // the last three snapshots queued
	queued  []*presolve          // queued, not yet stepped, in order
	free    []*presolve
	n       int
	wg      sync.WaitGroup
	closed  bool
}

type aheadWorker struct {
	solver   *hydraulic.Solver
	exp, mat *hydraulic.Solution // the worker's own last solves (warm starts)
	jobs     chan *presolve
}

// presolve is one step's conditions and solutions made by a worker.
type presolve struct {
	snap     telemetry.Snapshot
	recent   []telemetry.Snapshot // up to three snapshots before snap
	excluded []bool
	cfgStep  time.Duration
	done     chan struct{}

	cond     hydraulic.Conditions // bounds; Demand is base × mult after the run
	base     []float64
	mult     []float64
	exp, mat *hydraulic.Solution // copies the detector may keep
	ok       bool
}

// NewAhead starts the two workers of a solve-ahead for d.
func (d *Detector) NewAhead() (*Ahead, error) {
	a := &Ahead{d: d}
	for i := range a.workers {
		s, err := hydraulic.NewSolver(d.net, hydraulic.Options{})
		if err != nil {
			return nil, err
		}
		w := &aheadWorker{solver: s, jobs: make(chan *presolve, 4)}
		a.workers[i] = w
		a.wg.Add(1)
		go func() {
			defer a.wg.Done()
			for p := range w.jobs {
				d.presolve(w, p)
				close(p.done)
			}
		}()
	}
	return a, nil
}

// Queue starts the solves of a coming step. Snapshots must be queued in
// step order, each before it is stepped.
func (a *Ahead) Queue(snap telemetry.Snapshot) error {
	if a.closed {
		return errors.New("detector: solve-ahead already closed")
	}
	var p *presolve
	if k := len(a.free); k > 0 {
		p, a.free = a.free[k-1], a.free[:k-1]
	} else {
		p = &presolve{mult: make([]float64, len(a.d.zones))}
	}
	p.snap, p.ok, p.cfgStep = snap, false, a.d.cfg.Step
	p.recent = append(p.recent[:0], a.recent...)
	p.excluded = p.excluded[:0]
	for si := range a.d.st.Sensors {
		p.excluded = append(p.excluded, a.d.st.Sensors[si].Excluded)
	}
	p.done = make(chan struct{})
	a.recent = append(a.recent, snap)
	if len(a.recent) > 3 {
		a.recent = a.recent[1:]
	}
	a.queued = append(a.queued, p)
	a.workers[a.n%2].jobs <- p
	a.n++
	return nil
}

// Step is the detector's Step for the oldest queued snapshot, which must
// be snap (by its time), with that step's solves taken from its worker
// where the conditions agree. A snapshot that was not queued is stepped
// as Step alone would.
func (a *Ahead) Step(snap telemetry.Snapshot) (*StepResult, error) {
	var p *presolve
	if len(a.queued) > 0 && a.queued[0].snap.Step.Equal(snap.Step) {
		p = a.queued[0]
		a.queued = a.queued[1:]
		<-p.done
	}
	res, err := a.d.step(snap, p)
	if p != nil {
		p.snap, p.recent = telemetry.Snapshot{}, p.recent[:0]
		a.free = append(a.free, p)
	}
	return res, err
}

// Len returns how many queued snapshots are not yet stepped.
func (a *Ahead) Len() int { return len(a.queued) }

// Oldest returns the oldest queued snapshot not yet stepped (Len > 0),
// the one Step takes next.
func (a *Ahead) Oldest() telemetry.Snapshot { return a.queued[0].snap }

// Close stops the workers after the solves in flight and waits for them.
func (a *Ahead) Close() {
	if a.closed {
		return
	}
	a.closed = true
	for _, w := range a.workers {
		close(w.jobs)
	}
	a.wg.Wait()
}

// presolve builds p's conditions and solves them on w. A failed solve
// leaves p.ok false (Step then solves itself and reports the error) and
// the worker's next solve starts cold.
func (d *Detector) presolve(w *aheadWorker, p *presolve) {
	d.bounds(&p.cond, p.snap, func(si int) bool { return p.excluded[si] })
	p.base = demand.Base(d.net, p.snap.Step, d.zoneLoc, p.base)
	copy(p.cond.Demand, p.base)
	var modelLeak []float64
	if d.leaky {
		exp, err := chainSolve(w.solver, &p.cond, &w.exp)
		if err != nil {
			return
		}
		p.exp = exp.CopyInto(p.exp)
		modelLeak = p.exp.Leak
	}
	for zi := range d.zones {
		p.mult[zi] = 1
		if inflow, ok := d.zoneInflow(zi, p.meterValue); ok {
			dem, leak := d.zoneDemand(zi, p.base, modelLeak)
			p.mult[zi] = multiplier(inflow, dem, leak)
		}
	}
	d.matchDemand(p.cond.Demand, p.base, p.mult)
	mat, err := chainSolve(w.solver, &p.cond, &w.mat)
	if err != nil {
		return
	}
	p.mat = mat.CopyInto(p.mat)
	p.ok = true
}

// meterValue is the detector's meterValue as far as the snapshots at hand
// tell: this step's usable value, else the latest usable one at most
// three steps old; none for a sensor excluded when the step was queued.
func (p *presolve) meterValue(si int) (float64, bool) {
	if p.excluded[si] {
		return 0, false
	}
	if a := p.snap.Values[si]; usable(a) {
		return a.Value, true
	}
	for k := len(p.recent) - 1; k >= 0; k-- {
		r := p.recent[k]
		if p.snap.Step.Sub(r.Step) > 3*p.cfgStep {
			break
		}
		if a := r.Values[si]; usable(a) {
			return a.Value, true
		}
	}
	return 0, false
}

// sameBounds reports whether two conditions have the same fixed heads
// and link statuses, bit for bit (NaN, "as in the network", equal to
// NaN).
func sameBounds(a, b *hydraulic.Conditions) bool {
	return sameBits(a.FixedHead, b.FixedHead) && slices.Equal(a.Status, b.Status)
}

func sameBits(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
			return false
		}
	}
	return true
}
