package sim

import (
	"container/heap"
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"time"

	"plumbline/model/demand"
	"plumbline/model/finding"
	"plumbline/model/hydraulic"
	"plumbline/model/network"
	"plumbline/model/telemetry"
	"plumbline/model/units"
)

// Settings describe one simulation run. Zero values mean the documented
// defaults; Start, Duration and Step are required.
type Settings struct {
	Start    time.Time
	Duration time.Duration
	// Step is the hydraulic time step (default 5 minutes).
	Step time.Duration
	Seed uint64
	// Sensors are the instruments to simulate.
	Sensors []telemetry.Sensor
	// Noise is the standard deviation of instrument noise per quantity,
	// in canonical units; it overrides each sensor's accuracy.
	Noise map[telemetry.Quantity]float64
	// Resolution quantises readings per quantity, in canonical units
	// (0: no quantisation).
	Resolution map[telemetry.Quantity]float64
	// LoggingInterval is the time between two readings of one sensor
	// (default Step). Readings are taken at multiples of it from Start.
	LoggingInterval time.Duration
	// MissingFraction of readings are never delivered.
	MissingFraction float64
	// LateFraction of readings arrive late, by a delay uniform in
	// (0, MaxDelay]; they are emitted in arrival order.
	LateFraction float64
	MaxDelay     time.Duration
	// DemandNoise is the standard deviation of each junction's
	// multiplicative demand variation about the pattern (default 0.15);
	// it is correlated in time with a 30 minute time constant.
	DemandNoise float64
	// DailyVariation is the standard deviation of each zone's day factor
	// (default 0.05): one day is drier or busier than the next.
	DailyVariation float64
	// WeekendPattern, when set, replaces every junction's pattern on
	// Saturdays and Sundays (otherwise "<pattern>-weekend" is used where
	// the network has one).
	WeekendPattern string
	// NoDemandNoise switches both random demand terms off (for tests of
	// the physics).
	NoDemandNoise bool
	// Events are the leaks, blockages and sensor faults to inject.
	Events []Event
}

// Event is one injected event. At names a node (leak), a link (blockage)
// or a sensor (sensor fault).
type Event struct {
	Kind  finding.Kind
	At    string
	Start time.Time
	// End stops the event (zero: lasts to the end of the run).
	End time.Time
	// SizeLPS is a leak's outflow at the pressure the node had when the
	// leak started; Exponent its FAVAD N1 (default 0.5, a fixed-area
	// orifice, May 1994); Ramp the time it takes to grow to full size
	// (0: a sudden burst).
	SizeLPS  float64
	Exponent float64
	Ramp     time.Duration
	// OpenFraction is a blockage's remaining open area fraction, in (0, 1).
	OpenFraction float64
	// Mode (stuck, drift, spike, offset) and Amount describe a sensor
	// fault. Amount is in canonical units: the offset, the drift per day,
	// or the spike height; Every is the time between spikes (default 1h).
	Mode   string
	Amount float64
	Every  time.Duration
}

// growth is how far an event has grown at t, in [0, 1]: 0 before it
// starts or after it ends, then rising linearly over its ramp.
func growth(ev *Event, t time.Time) float64 {
	if t.Before(ev.Start) || (!ev.End.IsZero() && !t.Before(ev.End)) {
		return 0
	}
	if ev.Ramp <= 0 {
		return 1
	}
	return math.Min(1, float64(t.Sub(ev.Start))/float64(ev.Ramp))
}

// Reading is one simulated reading as a logger would deliver it: Value in
// the sensor's own unit, Time when it was measured, Arrival when it is
// delivered.
type Reading struct {
	telemetry.Reading
	Arrival time.Time
}

// Result summarises a run.
type Result struct {
	// Truth lists the injected events as ground truth.
	Truth []finding.Event
	// Steps is the number of hydraulic steps solved.
	Steps int
	// Readings is the number of readings emitted.
	Readings int
	// MaxBalanceError is the largest, over steps, of |source outflow −
	// (consumption + leakage)| in L/s: the run's mass-balance check.
	MaxBalanceError float64
}

// StepState is what a simulation step computed, for tests and plots.
type StepState struct {
	Time       time.Time
	Solution   *hydraulic.Solution
	TankLevel  map[string]float64
	Consumed   float64 // total junction consumption, L/s
	Leaked     float64 // total leak outflow, L/s
	SourceFlow float64 // total net outflow of reservoirs and tanks, L/s
}

// Options let a caller watch steps; nil means no callback.
type Options struct {
	OnStep func(*StepState) error
}

// Run simulates net under s and passes every reading to emit in arrival
// order. net is the network the water really flows in (the "true"
// network); a detector works from the operator's copy.
func Run(ctx context.Context, net *network.Network, s Settings, emit func(Reading) error, opt Options) (*Result, error) {
	r, err := newRunner(net, s)
	if err != nil {
		return nil, err
	}
	return r.run(ctx, emit, opt)
}

type leakState struct {
	ev    Event
	node  int
	coeff float64 // full-size FAVAD coefficient, set at onset
	on    bool
}

type sensorState struct {
	s        telemetry.Sensor
	idx      int // node or link index
	sigma    float64
	res      float64
	fault    *Event
	stuckVal float64
	stuck    bool
}

type runner struct {
	net     *network.Network
	s       Settings
	solver  *hydraulic.Solver
	rng     *rand.Rand
	zoneOf  []int // junction → zone index, -1 none
	nZones  int
	leaks   []*leakState
	blocks  []Event
	blockAt []int
	sensors []*sensorState
	tankA   []float64 // plan area per node, 0 for non-tanks or unknown
	level   []float64 // current tank level per node
	pumpTo  []int     // pump link → tank node it fills, -1 none
	pumpOn  []bool
	dnoise  []float64 // AR(1) state per node
	dayF    []float64 // per zone factor of the current day (at its noon)
	dayNext []float64 // and of the next day
	day     int
	dayInit bool
}

func newRunner(net *network.Network, s Settings) (*runner, error) {
	if s.Duration <= 0 {
		return nil, errors.New("simulation: duration must be positive")
	}
	if s.Step <= 0 {
		s.Step = 5 * time.Minute
	}
	if s.LoggingInterval <= 0 {
		s.LoggingInterval = s.Step
	}
	if s.DemandNoise == 0 {
		s.DemandNoise = 0.15
	}
	if s.DailyVariation == 0 {
		s.DailyVariation = 0.05
	}
	if s.NoDemandNoise {
		s.DemandNoise, s.DailyVariation = 0, 0
	}
	solver, err := hydraulic.NewSolver(net, hydraulic.Options{})
	if err != nil {
		return nil, fmt.Errorf("simulation: %w", err)
	}
	r := &runner{
		net: net, s: s, solver: solver,
		rng:    rand.New(rand.NewPCG(s.Seed, s.Seed^0x9e3779b97f4a7c15)),
		zoneOf: make([]int, len(net.Nodes)),
		tankA:  make([]float64, len(net.Nodes)),
		level:  make([]float64, len(net.Nodes)),
		dnoise: make([]float64, len(net.Nodes)),
	}
	zones := map[string]int{}
	for _, z := range net.Zones() {
		zones[z] = len(zones)
	}
	r.nZones = len(zones)
	r.dayF = make([]float64, r.nZones)
	r.dayNext = make([]float64, r.nZones)
	for i := range net.Nodes {
		n := &net.Nodes[i]
		r.zoneOf[i] = -1
		if zi, ok := zones[n.Zone]; ok {
			r.zoneOf[i] = zi
		}
		if n.Kind == network.Tank {
			r.level[i] = n.Level
			if n.TankDiameter > 0 {
				r.tankA[i] = math.Pi * n.TankDiameter * n.TankDiameter / 4
			}
		}
	}
	r.findPumpTanks()
	var errs []error
	for i, ev := range s.Events {
		if err := r.addEvent(ev); err != nil {
			errs = append(errs, fmt.Errorf("event %d (%s at %s): %w", i+1, ev.Kind, ev.At, err))
		}
	}
	for _, sen := range s.Sensors {
		st, err := r.sensor(sen)
		if err != nil {
			errs = append(errs, err)
			continue
		}
		r.sensors = append(r.sensors, st)
	}
	for _, ev := range s.Events {
		if ev.Kind != finding.SensorFault {
			continue
		}
		for _, st := range r.sensors {
			if st.s.ID == ev.At {
				e := ev
				st.fault = &e
			}
		}
	}
	if len(errs) > 0 {
		return nil, errors.Join(errs...)
	}
	return r, nil
}

func (r *runner) addEvent(ev Event) error {
	switch ev.Kind {
	case finding.Leak:
		i, ok := r.net.NodeIndex(ev.At)
		if !ok || r.net.Nodes[i].Kind != network.Junction {
			return errors.New("no junction of that id")
		}
		if ev.SizeLPS <= 0 {
			return errors.New("size_lps must be positive")
		}
		if ev.Exponent == 0 {
			ev.Exponent = 1
		}
		r.leaks = append(r.leaks, &leakState{ev: ev, node: i})
	case finding.Blockage:
		l, ok := r.net.LinkIndex(ev.At)
		if !ok {
			return errors.New("no link of that id")
		}
		if ev.OpenFraction <= 0 || ev.OpenFraction >= 1 {
			return errors.New("open_fraction must lie in (0, 1)")
		}
		r.blocks = append(r.blocks, ev)
		r.blockAt = append(r.blockAt, l)
	case finding.SensorFault:
		found := false
		for _, s := range r.s.Sensors {
			found = found || s.ID == ev.At
		}
		if !found {
			return errors.New("no sensor of that id")
		}
		switch ev.Mode {
		case "stuck", "drift", "spike", "offset":
		default:
			return fmt.Errorf("unknown sensor-fault mode %q", ev.Mode)
		}
	default:
		return fmt.Errorf("unknown event kind %q", ev.Kind)
	}
	return nil
}

func (r *runner) sensor(sen telemetry.Sensor) (*sensorState, error) {
	st := &sensorState{s: sen}
	var ok bool
	switch sen.Quantity {
	case telemetry.Flow:
		st.idx, ok = r.net.LinkIndex(sen.At)
	default:
		st.idx, ok = r.net.NodeIndex(sen.At)
	}
	if !ok {
		return nil, fmt.Errorf("sensor %s: %s %q not in the network", sen.ID, sen.Quantity, sen.At)
	}
	if sen.Quantity == telemetry.Level && r.net.Nodes[st.idx].Kind != network.Tank {
		return nil, fmt.Errorf("sensor %s: level sensor at %q, which is not a tank", sen.ID, sen.At)
	}
	unit := sen.Unit
	if unit == "" {
		unit = sen.Quantity.CanonicalUnit()
	}
	if sigma, ok := r.s.Noise[sen.Quantity]; ok {
		st.sigma = sigma
	} else if sen.Accuracy > 0 {
		// Accuracy is in the sensor's unit; one unit of it in canonical units.
		zero, err := units.ToCanonical(sen.Quantity, unit, 0)
		if err != nil {
			return nil, fmt.Errorf("sensor %s: %w", sen.ID, err)
		}
		one, err := units.ToCanonical(sen.Quantity, unit, sen.Accuracy)
		if err != nil {
			return nil, fmt.Errorf("sensor %s: %w", sen.ID, err)
		}
		st.sigma = math.Abs(one - zero)
	}
	if _, err := units.FromCanonical(sen.Quantity, unit, 0); err != nil {
		return nil, fmt.Errorf("sensor %s: %w", sen.ID, err)
	}
	st.s.Unit = unit
	st.res = r.s.Resolution[sen.Quantity]
	return st, nil
}

// findPumpTanks finds, for every pump, the tank its delivery side reaches
// through pipes alone: the tank whose level switches it.
func (r *runner) findPumpTanks() {
	adj := make([][]int, len(r.net.Nodes))
	for li, l := range r.net.Links {
		if l.Kind == network.Pipe {
			adj[l.From] = append(adj[l.From], li)
			adj[l.To] = append(adj[l.To], li)
		}
	}
	r.pumpTo = make([]int, len(r.net.Links))
	r.pumpOn = make([]bool, len(r.net.Links))
	for li, l := range r.net.Links {
		r.pumpTo[li] = -1
		if l.Kind != network.Pump {
			continue
		}
		r.pumpOn[li] = l.Status == network.Open
		seen := map[int]bool{l.To: true}
		queue := []int{l.To}
		for len(queue) > 0 && r.pumpTo[li] < 0 {
			n := queue[0]
			queue = queue[1:]
			if r.net.Nodes[n].Kind == network.Tank {
				r.pumpTo[li] = n
				break
			}
			for _, e := range adj[n] {
				m := r.net.Links[e].From
				if m == n {
					m = r.net.Links[e].To
				}
				if !seen[m] {
					seen[m] = true
					queue = append(queue, m)
				}
			}
		}
	}
}

func (r *runner) run(ctx context.Context, emit func(Reading) error, opt Options) (*Result, error) {
	res := &Result{}
	for _, ev := range r.s.Events {
		te := finding.Event{Kind: ev.Kind, At: ev.At, Start: ev.Start, SizeLPS: ev.SizeLPS, OpenFrac: ev.OpenFraction, Mode: ev.Mode, Amount: ev.Amount}
		te.Zone = r.eventZone(ev)
		if ev.Kind != finding.Leak {
			te.SizeLPS = 0
		}
		res.Truth = append(res.Truth, te)
	}
	nn, nl := len(r.net.Nodes), len(r.net.Links)
	c := &hydraulic.Conditions{
		Demand:           make([]float64, nn),
		FixedHead:        make([]float64, nn),
		LeakCoeff:        make([]float64, nn),
		LeakExponent:     make([]float64, nn),
		Status:           make([]network.Status, nl),
		ResistanceFactor: make([]float64, nl),
	}
	pending := &readingHeap{}
	var prev *hydraulic.Solution
	end := r.s.Start.Add(r.s.Duration)
	nextLog := r.s.Start
	for t := r.s.Start; t.Before(end); t = t.Add(r.s.Step) {
		if err := ctx.Err(); err != nil {
			return res, err
		}
		r.setDemand(c, t)
		r.setLeaks(c, t, prev)
		r.setLinks(c, t)
		for i := range r.net.Nodes {
			c.FixedHead[i] = math.NaN()
			if r.net.Nodes[i].Kind == network.Tank {
				c.FixedHead[i] = r.net.Nodes[i].Elevation + r.level[i]
			}
		}
		sol, err := r.solver.Solve(c, prev)
		if err != nil && prev != nil {
			// A warm start far from a new state (a pump switched, a burst)
			// can stall Newton's method; start cold once.
			sol, err = r.solver.Solve(c, nil)
		}
		if err != nil {
			return res, fmt.Errorf("simulation at %s: %w", t.Format(time.RFC3339), err)
		}
		prev = sol
		res.Steps++
		st := r.account(t, sol)
		if e := math.Abs(st.SourceFlow - st.Consumed - st.Leaked); e > res.MaxBalanceError {
			res.MaxBalanceError = e
		}
		if opt.OnStep != nil {
			if err := opt.OnStep(st); err != nil {
				return res, err
			}
		}
		stepEnd := t.Add(r.s.Step)
		for ; nextLog.Before(stepEnd); nextLog = nextLog.Add(r.s.LoggingInterval) {
			if nextLog.Before(t) {
				continue
			}
			if err := r.sample(nextLog, sol, pending); err != nil {
				return res, err
			}
		}
		// Deliver everything that has arrived by the end of this step.
		for pending.Len() > 0 && !(*pending)[0].Arrival.After(stepEnd) {
			rd := heap.Pop(pending).(Reading)
			res.Readings++
			if err := emit(rd); err != nil {
				return res, err
			}
		}
		r.carryTanks(sol)
	}
	for pending.Len() > 0 {
		rd := heap.Pop(pending).(Reading)
		res.Readings++
		if err := emit(rd); err != nil {
			return res, err
		}
	}
	return res, nil
}

func (r *runner) eventZone(ev Event) string {
	switch ev.Kind {
	case finding.Leak:
		if i, ok := r.net.NodeIndex(ev.At); ok {
			return r.net.Nodes[i].Zone
		}
	case finding.Blockage:
		if l, ok := r.net.LinkIndex(ev.At); ok {
			lk := r.net.Links[l]
			if z := r.net.Nodes[lk.To].Zone; z != "" {
				return z
			}
			return r.net.Nodes[lk.From].Zone
		}
	case finding.SensorFault:
		for _, st := range r.sensors {
			if st.s.ID == ev.At {
				if st.s.Zone != "" {
					return st.s.Zone
				}
				if st.s.Quantity == telemetry.Flow {
					return r.net.Nodes[r.net.Links[st.idx].To].Zone
				}
				return r.net.Nodes[st.idx].Zone
			}
		}
	}
	return ""
}

func (r *runner) drawDay() float64 {
	return math.Max(0.5, 1+r.s.DailyVariation*r.rng.NormFloat64())
}

func (r *runner) setDemand(c *hydraulic.Conditions, t time.Time) {
	// Each zone draws a factor per day, anchored at noon; between two
	// noons it changes linearly, as weather and habit move demand from one
	// day to the next without a jump at midnight.
	hours := t.Sub(time.Unix(0, 0)).Hours() - 12
	day := int(math.Floor(hours / 24))
	if !r.dayInit {
		r.dayInit = true
		r.day = day
		for z := range r.dayF {
			r.dayF[z] = r.drawDay()
			r.dayNext[z] = r.drawDay()
		}
	}
	for ; r.day < day; r.day++ {
		copy(r.dayF, r.dayNext)
		for z := range r.dayNext {
			r.dayNext[z] = r.drawDay()
		}
	}
	frac := hours/24 - float64(day)
	rho := math.Exp(-r.s.Step.Minutes() / 30)
	innov := math.Sqrt(1 - rho*rho)
	for i := range r.net.Nodes {
		n := &r.net.Nodes[i]
		if n.Kind != network.Junction || n.Demand == 0 {
			c.Demand[i] = 0
			continue
		}
		pat := n.Pattern
		if wd := t.Weekday(); r.s.WeekendPattern != "" && (wd == time.Saturday || wd == time.Sunday) {
			pat = r.s.WeekendPattern
		}
		f := demand.PatternAt(r.net, pat, t, nil)
		if z := r.zoneOf[i]; z >= 0 {
			f *= r.dayF[z] + (r.dayNext[z]-r.dayF[z])*frac
		}
		if r.s.DemandNoise > 0 {
			r.dnoise[i] = rho*r.dnoise[i] + innov*r.s.DemandNoise*r.rng.NormFloat64()
			f *= math.Max(0, 1+r.dnoise[i])
		}
		c.Demand[i] = n.Demand * f
	}
}

func (r *runner) setLeaks(c *hydraulic.Conditions, t time.Time, prev *hydraulic.Solution) {
	for i := range c.LeakCoeff {
		c.LeakCoeff[i], c.LeakExponent[i] = 0, 0
	}
	for _, lk := range r.leaks {
		f := growth(&lk.ev, t)
		if f == 0 {
			continue
		}
		if !lk.on {
			// The leak's size is its outflow at the pressure the node has
			// when it starts: C = q / p^N1.
			p := 30.0 // m, when no solution exists yet (first step)
			if prev != nil && prev.Pressure[lk.node] > 0.1 {
				p = prev.Pressure[lk.node]
			}
			lk.coeff = lk.ev.SizeLPS / math.Pow(p, lk.ev.Exponent)
			lk.on = true
		}
		// Leaks at one node add as orifices of one exponent; a second
		// leak of another exponent at the same node keeps the larger.
		c.LeakCoeff[lk.node] += lk.coeff * f
		c.LeakExponent[lk.node] = math.Max(c.LeakExponent[lk.node], lk.ev.Exponent)
	}
}

func (r *runner) setLinks(c *hydraulic.Conditions, t time.Time) {
	for l := range r.net.Links {
		c.Status[l] = r.net.Links[l].Status
		c.ResistanceFactor[l] = 1
		if r.net.Links[l].Kind == network.Pump && r.pumpTo[l] >= 0 && r.net.Links[l].Status == network.Open && !r.pumpOn[l] {
			c.Status[l] = network.Closed
		}
	}
	for k := range r.blocks {
		g := growth(&r.blocks[k], t)
		if g == 0 {
			continue
		}
		// Head loss through a constriction of open area fraction f grows
		// with the velocity squared, so by 1/f² at the same flow; while it
		// ramps, f falls linearly from 1.
		f := 1 - g*(1-r.blocks[k].OpenFraction)
		c.ResistanceFactor[r.blockAt[k]] *= 1 / (f * f)
	}
}

// account sums consumption, leakage and source outflow of a solution.
func (r *runner) account(t time.Time, sol *hydraulic.Solution) *StepState {
	st := &StepState{Time: t, Solution: sol, TankLevel: map[string]float64{}}
	for i := range r.net.Nodes {
		if r.net.Nodes[i].Kind == network.Junction {
			st.Consumed += sol.Demand[i]
			st.Leaked += sol.Leak[i]
		} else if r.net.Nodes[i].Kind == network.Tank {
			st.TankLevel[r.net.Nodes[i].ID] = r.level[i]
		}
	}
	for l, lk := range r.net.Links {
		if r.net.Nodes[lk.From].IsFixedHead() {
			st.SourceFlow += sol.Flow[l]
		}
		if r.net.Nodes[lk.To].IsFixedHead() {
			st.SourceFlow -= sol.Flow[l]
		}
	}
	return st
}

// carryTanks moves each tank's level by its net inflow over one step and
// switches the pumps that fill it: off near the top, on again below half
// (a common control band, not from a source).
func (r *runner) carryTanks(sol *hydraulic.Solution) {
	dt := r.s.Step.Seconds()
	inflow := make(map[int]float64)
	for l, lk := range r.net.Links {
		if r.net.Nodes[lk.To].Kind == network.Tank {
			inflow[lk.To] += sol.Flow[l]
		}
		if r.net.Nodes[lk.From].Kind == network.Tank {
			inflow[lk.From] -= sol.Flow[l]
		}
	}
	for i, q := range inflow {
		if r.tankA[i] == 0 {
			continue
		}
		n := &r.net.Nodes[i]
		lv := r.level[i] + q/1000*dt/r.tankA[i]
		if n.MaxLevel > n.MinLevel {
			lv = math.Min(math.Max(lv, n.MinLevel), n.MaxLevel)
		}
		r.level[i] = lv
	}
	for l := range r.net.Links {
		tk := r.pumpTo[l]
		if tk < 0 {
			continue
		}
		n := &r.net.Nodes[tk]
		if n.MaxLevel <= n.MinLevel {
			continue
		}
		span := n.MaxLevel - n.MinLevel
		switch {
		case r.level[tk] >= n.MaxLevel-0.05*span:
			r.pumpOn[l] = false
		case r.level[tk] <= n.MinLevel+0.5*span:
			r.pumpOn[l] = true
		}
	}
}

// trueValue is the sensor's quantity in the solution, canonical units.
func (r *runner) trueValue(st *sensorState, sol *hydraulic.Solution) float64 {
	switch st.s.Quantity {
	case telemetry.Flow:
		return sol.Flow[st.idx]
	case telemetry.Level:
		return r.level[st.idx]
	case telemetry.Head:
		return sol.Head[st.idx]
	default:
		return sol.Pressure[st.idx]
	}
}

func (r *runner) sample(t time.Time, sol *hydraulic.Solution, pending *readingHeap) error {
	for _, st := range r.sensors {
		v := r.trueValue(st, sol) + st.sigma*r.rng.NormFloat64()
		if f := st.fault; f != nil && !t.Before(f.Start) && (f.End.IsZero() || t.Before(f.End)) {
			switch f.Mode {
			case "offset":
				v += f.Amount
			case "drift":
				v += f.Amount * t.Sub(f.Start).Hours() / 24
			case "spike":
				every := f.Every
				if every <= 0 {
					every = time.Hour
				}
				if t.Sub(f.Start)%every < r.s.LoggingInterval {
					if r.rng.Float64() < 0.5 {
						v += f.Amount
					} else {
						v -= f.Amount
					}
				}
			case "stuck":
				if !st.stuck {
					st.stuck, st.stuckVal = true, v
				}
				v = st.stuckVal
			}
		}
		if st.res > 0 {
			v = math.Round(v/st.res) * st.res
		}
		missing := r.rng.Float64() < r.s.MissingFraction
		late := r.rng.Float64() < r.s.LateFraction
		if missing {
			continue
		}
		out, err := units.FromCanonical(st.s.Quantity, st.s.Unit, v)
		if err != nil {
			return fmt.Errorf("sensor %s: %w", st.s.ID, err)
		}
		rd := Reading{Reading: telemetry.Reading{Sensor: st.s.ID, Time: t, Value: out, Unit: st.s.Unit}, Arrival: t}
		if late && r.s.MaxDelay > 0 {
			rd.Arrival = t.Add(time.Duration((1 - r.rng.Float64()) * float64(r.s.MaxDelay)))
		}
		heap.Push(pending, rd)
	}
	return nil
}

// readingHeap orders pending readings by arrival, then measurement time,
// then sensor, so that delivery order is deterministic.
type readingHeap []Reading

func (h readingHeap) Len() int { return len(h) }
func (h readingHeap) Less(i, j int) bool {
	if !h[i].Arrival.Equal(h[j].Arrival) {
		return h[i].Arrival.Before(h[j].Arrival)
	}
	if !h[i].Time.Equal(h[j].Time) {
		return h[i].Time.Before(h[j].Time)
	}
	return h[i].Sensor < h[j].Sensor
}
func (h readingHeap) Swap(i, j int) { h[i], h[j] = h[j], h[i] }
func (h *readingHeap) Push(x any)   { *h = append(*h, x.(Reading)) }
func (h *readingHeap) Pop() any {
	old := *h
	x := old[len(old)-1]
	*h = old[:len(old)-1]
	return x
}
