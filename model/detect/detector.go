package detect

import (
	"bytes"
	"encoding/gob"
	"errors"
	"fmt"
	"math"
	"slices"
	"sort"
	"time"

	"plumbline/model/demand"
	"plumbline/model/finding"
	"plumbline/model/hydraulic"
	"plumbline/model/network"
	"plumbline/model/telemetry"
	"plumbline/model/units"
)

// ringHours is how many hours of hourly evidence each series keeps: a
// week, enough to look back over a change found on the third night.
const ringHours = 7 * 24

// Detector turns one snapshot per model step into zone balances, sensor
// residuals and findings. It is a plain sequential state machine: Step
// must be called with snapshots in time order, from one goroutine. Its
// state can be saved with State and restored with Restore, so that a
// restart resumes where it stopped.
type Detector struct {
	cfg    Config
	net    *network.Network
	solver *hydraulic.Solver

	sens     []sensorInfo
	bySensor map[string]int
	zones    []zoneInfo
	nodeZone []int
	zoneLoc  map[string]*time.Location

	base    []float64 // base × pattern per node, this step
	leaky   bool      // some junction of the network has a leak coefficient
	cond    hydraulic.Conditions
	prevExp *hydraulic.Solution
	prevMat *hydraulic.Solution
	// sensBuf and trial are scratch of the localisation: the rows of the
	// last signatures (valid until the next signatures call, which every
	// hypothesis finishes with before another starts) and the solution of
	// the last trial solve.
	sensBuf *hydraulic.Sensitivity
	trial   *hydraulic.Solution
	// near keeps the trial solves' Newton matrix from one to the next
	// (hydraulic.SolveNear), made by the first; path keeps one
	// candidate's trial solutions to start its later solves from.
	near *hydraulic.Near
	path trialPath
	// graph is the network's incidence for passiveBridge, made by its
	// first call.
	graph linkGraph

	designNight, designBurst, designResid CUSUM

	// raised and updated collect this step's new and revised findings.
	raised, updated []finding.Finding

	st state
}

type sensorInfo struct {
	s     telemetry.Sensor
	node  int // node index (pressure, head, level) or -1
	link  int // link index (flow) or -1
	zone  int // zone index or -1
	floor float64
	// evidence: a pressure or head sensor whose residual is tested
	evidence bool
	// accuracy is the instrument's stated σ in canonical units (at least
	// 5 cm of water or 0.05 L/s when none is given: common practice).
	accuracy float64
	// pumpOff is the flow (L/s) below which a meter on a pump says the
	// pump is stopped.
	pumpOff float64
}

type zoneInfo struct {
	z          Zone
	inlets     []meter
	outlets    []meter
	boundary   []meter // inlets then outlets
	junctions  []int
	evidence   []int   // sensor indices of the zone's pressure/head sensors
	nightSteps int     // steps in one night window
	nominal    float64 // sum of the zone's base demands, L/s
}

type meter struct {
	sensor int
	sign   float64 // +1: reading positive into the zone
}

// state is everything Step changes; it is what State saves.
type state struct {
	Steps int
	// Last is the start of the last step processed.
	Last      time.Time
	Hour      time.Time
	SensorAcc []acc
	ZoneAcc   []acc
	ZoneExp   []acc
	ZoneScale []acc
	Sensors   []sensorState
	Zones     []zoneState
	Findings  []finding.Finding
	// Resolved marks findings whose evidence has gone (a leak repaired:
	// the night flow fell back), by index into Findings.
	Resolved []bool
	// Watch holds the findings whose location is still being refined.
	Watch []watch
	// MeanMult is each zone's moving mean inflow-matched multiplier, for
	// the average operating point at which signatures are computed.
	MeanMult []float64
}

type acc struct {
	Sum float64
	N   int
}

type sensorState struct {
	Base     Baseline
	Up, Down CUSUM
	// Serial whitens the residual tests' hourly values (Serial).
	Serial   Serial
	Ring     ring
	Excluded bool
	// Unchanged is how long the sensor's value has not moved, for the
	// stuck test; Last the last value; BadSteps counts consecutive
	// steps flagged by ingest (stuck, spike, out of range).
	Unchanged time.Duration
	Last      float64
	BadSteps  int
	Spikes    []time.Time
	Quiet     int // consecutive quiet hours while excluded
	// OKAt is the last step with a reading ingest found in order.
	OKAt time.Time
	// Good and GoodAt are a flow meter's last usable value and its step.
	Good   float64
	GoodAt time.Time
}

type zoneState struct {
	Base Baseline
	// Level follows the zone's hourly deviation with a six-hour time
	// constant; Jump learns the scatter of the deviation about it. A burst
	// is a jump above the recent level; a dry or busy day moves every hour
	// of the day alike and does not jump.
	Level        float64
	LevelN       int
	Jump         Baseline
	Burst, Night CUSUM
	// JumpSerial whitens the burst test's hourly jumps (Serial).
	JumpSerial Serial
	// Repair watches the night imbalance falling back: a leak mended.
	Repair     CUSUM
	Ring       ring
	Nights     []float64 // adjusted mean night imbalance of quiet nights
	NightSum   float64
	NightN     int
	NightMin   float64
	NightInSum float64
	InNight    bool
	NightStart time.Time
	Offset     float64 // shift accepted into the night baseline by earlier findings
	// Rebase makes the next night set Offset from what it measures: the
	// night after a finding shows the new normal (a leak's night size
	// differs from its day size under FAVAD).
	Rebase       bool
	LeakQuiet    time.Time
	ResidQuiet   time.Time
	NightLearned int
	// MeterErr is the error (L/s, reading minus truth) of the zone's flow
	// metering that a meter-fault finding fitted, while its meters are
	// out of the balance; OutSum and OutN add up the imbalance the left
	// out meters would show against the zone's normal meanwhile, so that
	// they come back only once their error is gone (meterBack).
	MeterErr float64
	OutSum   float64
	OutN     int
	// Storm counts the consecutive steps in which most of the zone's
	// loggers read out of range together (pressureLoss); StormAt is when
	// the last such event was raised.
	Storm      int
	StormAt    time.Time
	StormStart time.Time
	// Scale is the hourly mean of the zone's inflow-matched demand over
	// its base demand: the operating point of each hour of evidence.
	Scale ring
}

// ring is a fixed-length hourly series: Vals[i] belongs to hour
// End − (len−1−i) h; NaN marks a missing hour.
type ring struct {
	End  time.Time
	Vals []float64
}

func (r *ring) push(t time.Time, v float64) {
	r.End = t
	r.Vals = append(r.Vals, v)
	if len(r.Vals) > ringHours {
		r.Vals = r.Vals[len(r.Vals)-ringHours:]
	}
}

// since returns the mean and count of the values at or after t.
func (r *ring) since(t time.Time) (mean float64, n int) {
	sum := 0.0
	for i, v := range r.Vals {
		at := r.End.Add(-time.Duration(len(r.Vals)-1-i) * time.Hour)
		if at.Before(t) || math.IsNaN(v) {
			continue
		}
		sum += v
		n++
	}
	if n == 0 {
		return 0, 0
	}
	return sum / float64(n), n
}

// StepResult is what one step computed: for the store, the operator page
// and the report.
type StepResult struct {
	Time time.Time
	// Expected is each sensor's model value (inflow-matched solve) and
	// Residual measured minus expected, canonical units; NaN where the
	// sensor had no usable reading.
	Expected, Residual []float64
	Zones              []ZoneBalance
	// Nights holds the night-flow figures of zones whose night window
	// ended at this step.
	Nights []NightFlow
	// Findings raised at this step, and earlier findings whose
	// candidates, size or evidence this step revised.
	Findings, Updated []finding.Finding
	// Iterations of the two solves.
	Iterations int
	// Presolved says the inflow-matched solve came from a solve-ahead
	// (Ahead) rather than from the step itself.
	Presolved bool
	// Elapsed is the wall time the step took.
	Elapsed time.Duration
}

// ZoneBalance is one zone's water balance at one step, L/s.
type ZoneBalance struct {
	Zone        string
	InflowLPS   float64 // measured net inflow
	ExpectedLPS float64 // expected consumption (patterns) plus modelled leakage
	Imbalance   float64 // inflow minus expected
	Multiplier  float64 // inflow-matched demand multiplier
	// CUSUM statistics of the night and burst tests, and their thresholds.
	NightStat, NightThreshold, BurstStat, BurstThreshold float64
}

// NightFlow is one zone's night: the minimum inflow in the night window,
// the legitimate-use allowance, and the excess, L/s.
type NightFlow struct {
	Zone       string
	Night      time.Time // start of the window
	MinLPS     float64
	MeanLPS    float64
	AllowLPS   float64
	ExcessLPS  float64
	Imbalance  float64 // mean imbalance in the window
	Statistic  float64 // night CUSUM after this night
	Threshold  float64
	NightsUsed int // nights in the baseline
}

// New builds a detector for cfg: the solver, the zone and sensor tables
// and the tests' thresholds from the wanted false-alarm rate.
func New(cfg Config) (*Detector, error) {
	cfg.defaults()
	if err := cfg.validate(); err != nil {
		return nil, err
	}
	solver, err := hydraulic.NewSolver(cfg.Network, hydraulic.Options{})
	if err != nil {
		return nil, fmt.Errorf("detector: %w", err)
	}
	d := &Detector{cfg: cfg, net: cfg.Network, solver: solver, bySensor: map[string]int{}, zoneLoc: map[string]*time.Location{}}
	d.nodeZone = make([]int, len(d.net.Nodes))
	for i := range d.net.Nodes {
		d.leaky = d.leaky || d.net.Nodes[i].LeakCoeff > 0
	}
	zoneIdx := map[string]int{}
	for i, z := range cfg.Zones {
		zoneIdx[z.ID] = i
		d.zoneLoc[z.ID] = z.Location
	}
	for i := range d.net.Nodes {
		d.nodeZone[i] = -1
		if zi, ok := zoneIdx[d.net.Nodes[i].Zone]; ok {
			d.nodeZone[i] = zi
		}
	}
	d.zones = make([]zoneInfo, len(cfg.Zones))
	for i, z := range cfg.Zones {
		d.zones[i].z = z
		span := z.NightEnd - z.NightStart
		if span <= 0 {
			span += 24 * time.Hour
		}
		d.zones[i].nightSteps = int(span / cfg.Step)
	}
	for i := range d.net.Nodes {
		if zi := d.nodeZone[i]; zi >= 0 && d.net.Nodes[i].Kind == network.Junction {
			d.zones[zi].junctions = append(d.zones[zi].junctions, i)
			d.zones[zi].nominal += d.net.Nodes[i].Demand
		}
	}
	stepsPerHour := math.Max(1, float64(time.Hour/cfg.Step))
	for si, s := range cfg.Sensors {
		info := sensorInfo{s: s, node: -1, link: -1, zone: -1}
		if s.Quantity == telemetry.Flow {
			info.link, _ = d.net.LinkIndex(s.At)
		} else {
			info.node, _ = d.net.NodeIndex(s.At)
			info.zone = d.nodeZone[info.node]
			info.evidence = (s.Quantity == telemetry.Pressure || s.Quantity == telemetry.Head) && d.net.Nodes[info.node].Kind == network.Junction
		}
		// Noise floor of an hourly mean: the instrument's σ over √(readings
		// per hour), at least 1 cm of water or 0.01 L/s (common practice
		// for logger resolution, not from a source).
		sigma := 0.0
		if s.Accuracy > 0 && s.Unit != "" {
			if u, err := units.Lookup(s.Quantity, s.Unit); err == nil {
				sigma = u.ToCanonical(s.Accuracy)
			}
		}
		if n, ok := cfg.Noise[s.ID]; ok && n > sigma {
			sigma = n
		}
		info.floor = math.Max(0.01, sigma/math.Sqrt(stepsPerHour))
		info.accuracy = math.Max(0.05, sigma)
		if info.link >= 0 && d.net.Links[info.link].Kind == network.Pump {
			duty := 0.0
			if c := d.net.Links[info.link].Curve; len(c) > 0 {
				duty = c[len(c)/2][0]
			}
			info.pumpOff = math.Max(math.Max(0.05, 3*sigma), 0.1*duty)
		}
		d.sens = append(d.sens, info)
		d.bySensor[s.ID] = si
	}
	for zi, z := range cfg.Zones {
		for _, id := range z.Inlets {
			d.zones[zi].inlets = append(d.zones[zi].inlets, d.meterFor(zi, d.bySensor[id], false))
		}
		for _, id := range z.Outlets {
			d.zones[zi].outlets = append(d.zones[zi].outlets, d.meterFor(zi, d.bySensor[id], true))
		}
		d.zones[zi].boundary = append(append([]meter{}, d.zones[zi].inlets...), d.zones[zi].outlets...)
	}
	for si := range d.sens {
		if d.sens[si].evidence && d.sens[si].zone >= 0 {
			zi := d.sens[si].zone
			d.zones[zi].evidence = append(d.zones[zi].evidence, si)
		}
	}
	if err := d.design(); err != nil {
		return nil, err
	}
	d.reset()
	return d, nil
}

// meterFor orients a boundary flow meter from the topology: flow along
// its link towards a node of the zone is inflow. A meter whose link does
// not cross the boundary (one in series with a boundary link, such as a
// pump's meter on its rising main) takes the side it is listed on: an
// inlet counts its flow as inflow, an outlet as outflow.
func (d *Detector) meterFor(zi, si int, outlet bool) meter {
	l := d.net.Links[d.sens[si].link]
	from, to := d.nodeZone[l.From] == zi, d.nodeZone[l.To] == zi
	switch {
	case to && !from:
		return meter{sensor: si, sign: 1}
	case from && !to:
		return meter{sensor: si, sign: -1}
	case outlet:
		return meter{sensor: si, sign: -1}
	}
	return meter{sensor: si, sign: 1}
}

// design derives every test's k and h from the wanted false-alarm rate.
// Each zone has three kinds of test sharing the rate: the night test (one
// value a night), the burst test (hourly imbalance) and the residual
// tests (hourly, two-sided, one pair per logger); each kind is given a
// third of the budget, the residual pairs split theirs.
func (d *Detector) design() error {
	fa := d.cfg.FalseAlarmDays * 3
	night, err := DesignCUSUM(1, fa) // a 1σ shift of the night mean; nights
	if err != nil {
		return err
	}
	burst, err := DesignCUSUM(5, fa*24) // a 5σ jump of the hourly imbalance
	if err != nil {
		return err
	}
	maxLoggers := 1
	for _, z := range d.zones {
		maxLoggers = max(maxLoggers, len(z.evidence))
	}
	resid, err := DesignCUSUM(2, fa*24*float64(2*maxLoggers))
	if err != nil {
		return err
	}
	d.designNight, d.designBurst, d.designResid = *night, *burst, *resid
	return nil
}

func (d *Detector) reset() {
	d.st = state{
		SensorAcc: make([]acc, len(d.sens)),
		ZoneAcc:   make([]acc, len(d.zones)),
		ZoneExp:   make([]acc, len(d.zones)),
		ZoneScale: make([]acc, len(d.zones)),
		Sensors:   make([]sensorState, len(d.sens)),
		Zones:     make([]zoneState, len(d.zones)),
		MeanMult:  make([]float64, len(d.zones)),
	}
	for i := range d.st.Sensors {
		s := &d.st.Sensors[i]
		s.Base = Baseline{Memory: 14, Floor: d.sens[i].floor}
		s.Up, s.Down = d.designResid, d.designResid
		s.Last = math.NaN()
	}
	for i := range d.st.Zones {
		z := &d.st.Zones[i]
		z.Base = Baseline{Memory: 14, Floor: 0.05}
		z.Jump = Baseline{Memory: 14, Floor: 0.002}
		z.Burst, z.Night, z.Repair = d.designBurst, d.designNight, d.designNight
		d.st.MeanMult[i] = 1
	}
}

// Findings returns every finding raised so far, in the order raised.
func (d *Detector) Findings() []finding.Finding {
	return append([]finding.Finding(nil), d.st.Findings...)
}

// LastStep returns the start of the last step processed (zero before the
// first): after a restart, readings from the step after it on are the
// ones the detector has not seen.
func (d *Detector) LastStep() time.Time { return d.st.Last }

// Active returns the findings whose evidence still holds: leaks not yet
// seen to be mended, blockages, and sensor faults whose sensor is still
// left out of the evidence.
func (d *Detector) Active() []finding.Finding {
	var out []finding.Finding
	for i, f := range d.st.Findings {
		if i < len(d.st.Resolved) && d.st.Resolved[i] {
			continue
		}
		if f.Kind == finding.SensorFault && len(f.Candidates) > 0 {
			if si, ok := d.bySensor[f.Candidates[0].ID]; ok && !d.st.Sensors[si].Excluded {
				continue
			}
		}
		out = append(out, f)
	}
	return out
}

// repaired resolves the zone's most recent open leak when the night
// imbalance has fallen back by at least half its size, and takes the fall
// into the night baseline.
func (d *Detector) repaired(zi int, drop float64, now time.Time) {
	zone := d.zones[zi].z.ID
	for len(d.st.Resolved) < len(d.st.Findings) {
		d.st.Resolved = append(d.st.Resolved, false)
	}
	for i := len(d.st.Findings) - 1; i >= 0; i-- {
		f := &d.st.Findings[i]
		if f.Kind != finding.Leak || f.Zone != zone || d.st.Resolved[i] || f.Raised.After(now) {
			continue
		}
		if drop >= f.SizeLPS/2 {
			d.st.Resolved[i] = true
			zs := &d.st.Zones[zi]
			zs.Offset -= drop
			zs.Night.Reset()
			zs.Base.Relearn = 24
			zs.ResidQuiet = now.Add(24 * time.Hour)
			for _, si := range d.zones[zi].evidence {
				ss := &d.st.Sensors[si]
				ss.Base.Relearn = 24
				ss.Up.Reset()
				ss.Down.Reset()
			}
		}
		return
	}
}

// State returns the detector's state (gob-encoded: it holds NaN for
// missing hours, which JSON cannot), to be saved and given to Restore
// after a restart.
func (d *Detector) State() ([]byte, error) {
	var buf bytes.Buffer
	if err := gob.NewEncoder(&buf).Encode(&d.st); err != nil {
		return nil, fmt.Errorf("detector state: %w", err)
	}
	return buf.Bytes(), nil
}

// Restore replaces the detector's state with one saved by State for the
// same configuration.
func (d *Detector) Restore(b []byte) error {
	var st state
	if err := gob.NewDecoder(bytes.NewReader(b)).Decode(&st); err != nil {
		return fmt.Errorf("detector state: %w", err)
	}
	if len(st.Sensors) != len(d.sens) || len(st.Zones) != len(d.zones) {
		return errors.New("detector state: saved for another configuration (sensor or zone count differs)")
	}
	d.st = st
	d.prevExp, d.prevMat = nil, nil
	return nil
}

// Step processes one snapshot. Its values must be in the order of
// Config.Sensors (as the aligner produces them).
func (d *Detector) Step(snap telemetry.Snapshot) (*StepResult, error) { return d.step(snap, nil) }

// step is Step, taking the solves from pre (a solve-ahead of this step)
// where pre's conditions are this step's.
func (d *Detector) step(snap telemetry.Snapshot, pre *presolve) (*StepResult, error) {
	if len(snap.Values) != len(d.sens) {
		return nil, fmt.Errorf("detector: snapshot at %s has %d values for %d sensors", snap.Step.Format(time.RFC3339), len(snap.Values), len(d.sens))
	}
	began := time.Now()
	t := snap.Step
	hour := t.Truncate(time.Hour)
	res := &StepResult{Time: t}
	if !d.st.Hour.IsZero() && hour.After(d.st.Hour) {
		d.closeHour(d.st.Hour)
	}
	d.st.Hour = hour
	d.qualityFaults(snap)

	// Boundary conditions from telemetry: tank levels, source heads.
	d.bounds(&d.cond, snap, d.excluded)

	// Expected-consumption solve: demand from the patterns alone. Its one
	// use is the leakage the model itself carries (junction leak
	// coefficients of the network file, FAVAD); without any, expected
	// consumption is the patterns' demand and the solve is skipped.
	if pre != nil {
		d.base = append(d.base[:0], pre.base...) // demand.Base at t, made ahead
	} else {
		d.base = demand.Base(d.net, t, d.zoneLoc, d.base)
	}
	copy(d.cond.Demand, d.base)
	var modelLeak []float64
	if d.leaky {
		exp, err := d.expSolve(pre)
		if err != nil {
			return nil, fmt.Errorf("detector at %s: expected-consumption solve: %w", t.Format(time.RFC3339), err)
		}
		res.Iterations += exp.Iterations
		modelLeak = exp.Leak
	}

	// Zone balances and the inflow-matched multipliers.
	mult := make([]float64, len(d.zones))
	res.Zones = make([]ZoneBalance, len(d.zones))
	for zi := range d.zones {
		zb := ZoneBalance{Zone: d.zones[zi].z.ID, Multiplier: 1}
		inflow, ok := d.zoneInflow(zi, func(si int) (float64, bool) { return d.meterValue(si, snap) })
		dem, leak := d.zoneDemand(zi, d.base, modelLeak)
		zb.ExpectedLPS = dem + leak
		mult[zi] = 1
		if ok {
			zb.InflowLPS = inflow
			zb.Imbalance = inflow - zb.ExpectedLPS
			mult[zi] = multiplier(inflow, dem, leak)
			d.st.ZoneAcc[zi].Sum += zb.Imbalance
			d.st.ZoneAcc[zi].N++
			d.st.ZoneExp[zi].Sum += zb.ExpectedLPS
			d.st.ZoneExp[zi].N++
			if nom := d.zones[zi].nominal; nom > 0 {
				d.st.ZoneScale[zi].Sum += dem * mult[zi] / nom
				d.st.ZoneScale[zi].N++
			}
			d.nightStep(zi, t, zb.Imbalance, inflow)
			d.st.MeanMult[zi] += (mult[zi] - d.st.MeanMult[zi]) / float64(min(d.st.Steps+1, 2016))
		} else {
			zb.InflowLPS, zb.Imbalance = math.NaN(), math.NaN()
			d.watchMeters(zi, t, snap, zb.ExpectedLPS)
		}
		zb.Multiplier = mult[zi]
		zs := &d.st.Zones[zi]
		zb.NightStat, zb.NightThreshold = zs.Night.S, zs.Night.H
		zb.BurstStat, zb.BurstThreshold = zs.Burst.S, zs.Burst.H
		res.Zones[zi] = zb
	}
	res.Nights = d.closeNights(t)

	// Inflow-matched solve: each zone's demand scaled to its measured inflow.
	d.matchDemand(d.cond.Demand, d.base, mult)
	mat, presolved, err := d.matSolve(pre, mult)
	res.Presolved = presolved
	if err != nil {
		return nil, fmt.Errorf("detector at %s: inflow-matched solve: %w", t.Format(time.RFC3339), err)
	}
	res.Iterations += mat.Iterations

	res.Expected = make([]float64, len(d.sens))
	res.Residual = make([]float64, len(d.sens))
	for si, info := range d.sens {
		var e float64
		switch {
		case info.link >= 0:
			e = mat.Flow[info.link]
		case info.s.Quantity == telemetry.Head:
			e = mat.Head[info.node]
		default:
			e = mat.Pressure[info.node]
		}
		res.Expected[si] = e
		res.Residual[si] = math.NaN()
		if a := snap.Values[si]; usable(a) {
			res.Residual[si] = a.Value - e
			// Without the zone's balance the inflow-matched solve falls
			// back to the patterns, and residuals carry the day's demand
			// noise: they are not evidence then.
			if info.evidence && (info.zone < 0 || len(d.zones[info.zone].inlets) == 0 || !math.IsNaN(res.Zones[info.zone].Imbalance)) {
				d.st.SensorAcc[si].Sum += res.Residual[si]
				d.st.SensorAcc[si].N++
			}
		}
	}
	d.st.Steps++
	d.st.Last = t
	res.Findings, d.raised = d.raised, nil
	res.Updated, d.updated = d.updated, nil
	res.Elapsed = time.Since(began)
	return res, nil
}

func usable(a telemetry.Aggregate) bool {
	return a.Quality.Usable() && a.Count > 0 && !math.IsNaN(a.Value) && !math.IsInf(a.Value, 0)
}

// zoneInflow is the zone's net metered inflow, each meter's value from
// value (the detector's meterValue, or the solve-ahead's copy of it); not
// ok if a meter has none.
func (d *Detector) zoneInflow(zi int, value func(si int) (float64, bool)) (float64, bool) {
	q := 0.0
	for _, list := range [][]meter{d.zones[zi].inlets, d.zones[zi].outlets} {
		for _, m := range list {
			v, ok := value(m.sensor)
			if !ok {
				return 0, false
			}
			q += m.sign * v
		}
	}
	return q, true
}

// watchMeters follows, while a meter-fault finding keeps zone zi's flow
// meters out of the balance, the imbalance they would show against the
// zone's normal for the hour (their usable readings, as they come).
func (d *Detector) watchMeters(zi int, t time.Time, snap telemetry.Snapshot, expected float64) {
	zs := &d.st.Zones[zi]
	if zs.MeterErr == 0 {
		return
	}
	raw, ok := d.zoneInflow(zi, func(si int) (float64, bool) {
		a := snap.Values[si]
		return a.Value, usable(a)
	})
	if ok {
		zs.OutSum += raw - expected - zs.Base.Mean[d.localHour(zi, t)]
		zs.OutN++
	}
}

// meterBack reports whether flow meter si may return to the balance after
// its day of plausible readings: not while a zone it balances shows, by
// the meters left out, more than half the error its meter-fault finding
// fitted, on the same side. Ingest cannot see a meter's offset; the
// balance can. Each judgement starts a new day of evidence; when the
// meter comes back, its zones forget the error.
func (d *Detector) meterBack(si int) bool {
	var judged []*zoneState
	back := true
	for zi := range d.zones {
		zs := &d.st.Zones[zi]
		if zs.MeterErr == 0 || !slices.ContainsFunc(d.zones[zi].boundary, func(m meter) bool { return m.sensor == si }) {
			continue
		}
		if m := zs.OutSum / float64(max(zs.OutN, 1)); m*zs.MeterErr > 0 && math.Abs(m) > math.Abs(zs.MeterErr)/2 {
			back = false
		}
		zs.OutSum, zs.OutN = 0, 0
		judged = append(judged, zs)
	}
	if back {
		for _, zs := range judged {
			zs.MeterErr = 0
		}
	}
	return back
}

// meterValue is a flow meter's value for the balance: this step's, or,
// when ingest flagged this one (a spike, a gap), the last usable value if
// it is at most three steps old. One doubtful reading among a zone's many
// meters must not blank the whole balance.
func (d *Detector) meterValue(si int, snap telemetry.Snapshot) (float64, bool) {
	ss := &d.st.Sensors[si]
	if ss.Excluded {
		return 0, false
	}
	if a := snap.Values[si]; usable(a) {
		ss.Good, ss.GoodAt = a.Value, snap.Step
		return a.Value, true
	}
	if !ss.GoodAt.IsZero() && snap.Step.Sub(ss.GoodAt) <= 3*d.cfg.Step {
		return ss.Good, true
	}
	return 0, false
}

// localHour is the hour of day of t on the zone's clock.
func (d *Detector) localHour(zi int, t time.Time) int {
	loc := time.UTC
	if zi >= 0 && d.zones[zi].z.Location != nil {
		loc = d.zones[zi].z.Location
	}
	return t.In(loc).Hour()
}

// inNight reports whether t lies in the zone's night window, read on the
// zone's wall clock (so a daylight-saving change leaves "02:00-04:00" at
// 02:00-04:00), and when that night's window began.
func (d *Detector) inNight(zi int, t time.Time) (bool, time.Time) {
	z := d.zones[zi].z
	loc := time.UTC
	if z.Location != nil {
		loc = z.Location
	}
	lt := t.In(loc)
	y, m, dd := lt.Date()
	off := time.Duration(lt.Hour())*time.Hour + time.Duration(lt.Minute())*time.Minute + time.Duration(lt.Second())*time.Second
	at := func(day int, clock time.Duration) time.Time {
		return time.Date(y, m, dd+day, 0, 0, 0, 0, loc).Add(clock)
	}
	if z.NightEnd > z.NightStart {
		return off >= z.NightStart && off < z.NightEnd, at(0, z.NightStart)
	}
	if off >= z.NightStart {
		return true, at(0, z.NightStart)
	}
	if off < z.NightEnd {
		return true, at(-1, z.NightStart)
	}
	return false, time.Time{}
}

func (d *Detector) nightStep(zi int, t time.Time, imbalance, inflow float64) {
	in, start := d.inNight(zi, t)
	zs := &d.st.Zones[zi]
	if !in {
		return
	}
	if !zs.InNight || !start.Equal(zs.NightStart) {
		zs.InNight, zs.NightStart = true, start
		zs.NightSum, zs.NightN, zs.NightMin, zs.NightInSum = 0, 0, math.Inf(1), 0
	}
	zs.NightSum += imbalance
	zs.NightN++
	zs.NightMin = math.Min(zs.NightMin, inflow)
	zs.NightInSum += inflow
}

// closeNights runs the night test for every zone whose window has ended.
func (d *Detector) closeNights(t time.Time) []NightFlow {
	var out []NightFlow
	for zi := range d.zones {
		zs := &d.st.Zones[zi]
		if !zs.InNight {
			continue
		}
		if in, start := d.inNight(zi, t); in && start.Equal(zs.NightStart) {
			continue
		}
		zs.InNight = false
		if zs.NightN < max(1, d.zones[zi].nightSteps/2) {
			continue // too little of the night was measured
		}
		x := zs.NightSum / float64(zs.NightN)
		nf := NightFlow{Zone: d.zones[zi].z.ID, Night: zs.NightStart, MinLPS: zs.NightMin, AllowLPS: d.zones[zi].z.NightUseLPS, Imbalance: x}
		nf.MeanLPS = zs.NightInSum / float64(zs.NightN)
		nf.ExcessLPS = nf.MinLPS - nf.AllowLPS
		adj := x - zs.Offset
		if zs.Rebase && len(zs.Nights) > 0 {
			med, _ := nightBaseline(zs.Nights)
			zs.Offset, zs.Rebase = x-med, false
			zs.Repair.Reset()
			nf.Statistic, nf.Threshold, nf.NightsUsed = zs.Night.S, zs.Night.H, len(zs.Nights)
			out = append(out, nf)
			continue
		}
		zs.Rebase = false
		if len(zs.Nights) >= d.cfg.LearnNights {
			// The night against its prediction from past quiet nights
			// (predictNight), σ at least 0.05 L/s or 1% of the night flow
			// (common practice for meter resolution, not from a source).
			p := predictNight(zs.Nights)
			sigma := math.Max(p.sigma, math.Max(0.05, 0.01*math.Abs(zs.NightMin)))
			z := (adj - p.mean) / sigma
			d.tracef("%s zone %s night: imbalance %+.2f L/s, normal %+.2f ± %.2f (%d nights), z %+.2f, CUSUM %.2f of %.2f",
				zs.NightStart.UTC().Format(time.RFC3339), d.zones[zi].z.ID, adj, p.mean, sigma, len(zs.Nights), z, zs.Night.S, zs.Night.H)
			if zs.Repair.Update(zs.NightStart, -z) {
				d.repaired(zi, zs.Repair.Shift()*sigma, t)
				zs.Repair.Reset()
			}
			alarm := zs.Night.Update(zs.NightStart, z)
			if alarm {
				size := zs.Night.Shift() * sigma
				d.zoneHypothesis(zi, zs.Night.Onset, t, size, fmt.Sprintf("night imbalance %+.2f L/s above the mean of the last %d quiet nights (%.1fσ)", size, len(zs.Nights), size/sigma))
			}
			if zs.Night.S < zs.Night.H/2 {
				zs.Nights = appendCapped(zs.Nights, adj, 28)
			}
		} else {
			zs.Nights = appendCapped(zs.Nights, adj, 28)
		}
		nf.Statistic, nf.Threshold, nf.NightsUsed = zs.Night.S, zs.Night.H, len(zs.Nights)
		out = append(out, nf)
	}
	return out
}

func appendCapped(xs []float64, x float64, n int) []float64 {
	xs = append(xs, x)
	if len(xs) > n {
		xs = xs[len(xs)-n:]
	}
	return xs
}

// closeHour finishes the hour starting at h: hourly means into the
// rings and baselines, then the burst and residual tests. Every series is
// brought up to date before any hypothesis is weighed, so each sees the
// same hour of evidence.
func (d *Detector) closeHour(h time.Time) {
	learned := d.st.Steps >= d.cfg.LearnNights*int(24*time.Hour/d.cfg.Step)
	minPerHour := max(1, int(time.Hour/d.cfg.Step)/2)
	type alarm struct {
		zone, sensor int
		onset        time.Time
		size, sigma  float64
	}
	var alarms []alarm
	hourly := make([]float64, len(d.sens))
	for i := range hourly {
		hourly[i] = math.NaN()
	}
	zoneHourly := make([]float64, len(d.zones))
	for i := range zoneHourly {
		zoneHourly[i] = math.NaN()
	}
	for zi := range d.zones {
		zs := &d.st.Zones[zi]
		a := d.st.ZoneAcc[zi]
		e := d.st.ZoneExp[zi]
		if sc := d.st.ZoneScale[zi]; sc.N > 0 {
			zs.Scale.push(h, sc.Sum/float64(sc.N))
		} else {
			zs.Scale.push(h, math.NaN())
		}
		d.st.ZoneAcc[zi], d.st.ZoneExp[zi], d.st.ZoneScale[zi] = acc{}, acc{}, acc{}
		hr := d.localHour(zi, h)
		if a.N < minPerHour {
			zs.Ring.push(h, math.NaN())
			continue
		}
		x := a.Sum / float64(a.N)
		zoneHourly[zi] = x
		dev := zs.Base.Deviation(hr, x)
		// Demand noise is multiplicative: a busy day raises every hour by
		// the same fraction. The burst test therefore follows the imbalance
		// as a fraction of expected consumption.
		scale := math.Max(e.Sum/float64(max(e.N, 1)), 0.1)
		rel := dev / scale
		if learned && zs.Base.Learned(hr, d.cfg.LearnNights) && !zs.Base.Relearning() {
			zs.Ring.push(h, dev)
			jump := rel - zs.Level
			if zs.LevelN >= 6 && zs.Jump.NVar >= 24 {
				sigma := zs.Jump.SigmaAt(hr)
				z := jump / sigma
				e := zs.JumpSerial.Innovation(h, z)
				if zs.Burst.Update(h, e) {
					alarms = append(alarms, alarm{zone: zi, sensor: -1, onset: zs.Burst.Onset, sigma: sigma * scale, size: zs.Level * scale})
				}
				zs.JumpSerial.Learn(h, z, zs.Burst.S < zs.Burst.H/2)
			}
			if zs.Burst.S < zs.Burst.H/2 && zs.LevelN > 0 {
				zs.Jump.Update(hr, jump)
			}
			zs.LevelN++
			zs.Level += (rel - zs.Level) / float64(min(zs.LevelN, 6))
		} else {
			zs.Ring.push(h, math.NaN())
		}
		if relearning := zs.Base.Relearning(); zs.Burst.S < zs.Burst.H/2 || relearning {
			zs.Base.Update(hr, x)
			if relearning && !zs.Base.Relearning() {
				// The baseline has moved to its new level: the burst test's
				// recent level starts again from it.
				zs.Level, zs.LevelN = 0, 0
			}
		}
	}
	for si, info := range d.sens {
		if !info.evidence {
			continue
		}
		ss := &d.st.Sensors[si]
		a := d.st.SensorAcc[si]
		d.st.SensorAcc[si] = acc{}
		hr := d.localHour(info.zone, h)
		if a.N < minPerHour {
			ss.Ring.push(h, math.NaN())
			continue
		}
		x := a.Sum / float64(a.N)
		hourly[si] = x
		dev := ss.Base.Deviation(hr, x)
		if ss.Excluded {
			// A faulty logger comes back into the evidence after a day of
			// hourly residuals within 1.5σ of its old normal.
			ss.Ring.push(h, math.NaN())
			if math.Abs(dev) < 1.5*ss.Base.SigmaAt(hr) {
				ss.Quiet++
			} else {
				ss.Quiet = 0
			}
			if ss.Quiet >= 24 {
				ss.Excluded, ss.Quiet, ss.BadSteps, ss.Spikes, ss.Unchanged = false, 0, 0, nil, 0
				ss.Up.Reset()
				ss.Down.Reset()
			}
			continue
		}
		if !learned || !ss.Base.Learned(hr, d.cfg.LearnNights) || ss.Base.Relearning() {
			ss.Ring.push(h, math.NaN())
			ss.Base.Update(hr, x)
			continue
		}
		ss.Ring.push(h, dev)
		z := dev / ss.Base.SigmaAt(hr)
		e := ss.Serial.Innovation(h, z)
		up := ss.Up.Update(h, e)
		down := ss.Down.Update(h, -e)
		ss.Serial.Learn(h, z, ss.Up.S < ss.Up.H/2 && ss.Down.S < ss.Down.H/2)
		if (up || down) && info.zone >= 0 {
			onset := ss.Up.Onset
			if down {
				onset = ss.Down.Onset
			}
			alarms = append(alarms, alarm{zone: info.zone, sensor: si, onset: onset})
		}
		if ss.Up.S < ss.Up.H/2 && ss.Down.S < ss.Down.H/2 {
			ss.Base.Update(hr, x)
		}
	}
	end := h.Add(time.Hour)
	d.refine(h, hourly, zoneHourly)
	for _, al := range alarms {
		if al.sensor < 0 {
			zs := &d.st.Zones[al.zone]
			if zs.Burst.S <= zs.Burst.H {
				continue // already taken by an earlier hypothesis this hour
			}
			size, _ := zs.Ring.since(al.onset)
			size -= al.size
			why := fmt.Sprintf("zone imbalance jumped %+.2f L/s above its level of the hours before (%.1fσ of the hourly scatter)", size, size/al.sigma)
			if d.zoneHypothesis(al.zone, al.onset, end, size, why) {
				zs.Level = 0
				zs.LevelN = 0
			}
			continue
		}
		ss := &d.st.Sensors[al.sensor]
		if ss.Up.S <= ss.Up.H && ss.Down.S <= ss.Down.H {
			continue
		}
		d.residualHypothesis(al.sensor, al.onset, end)
	}
}

// qualityFaults raises sensor faults that ingest's quality flags and the
// stuck test show directly: a value that has not moved for three hours,
// three spikes within a day, or an hour out of range.
func (d *Detector) qualityFaults(snap telemetry.Snapshot) {
	day := int(24 * time.Hour / d.cfg.Step)
	storm := d.pressureLoss(snap)
	for si := range d.sens {
		ss := &d.st.Sensors[si]
		a := snap.Values[si]
		if zi := d.sens[si].zone; zi >= 0 && storm[zi] && a.Quality == telemetry.OutOfRange && d.sens[si].evidence {
			continue // the zone lost pressure: the instrument is telling the truth
		}
		if ss.Excluded {
			// A flow meter or level sensor (no residual of its own) comes
			// back after a day of readings that ingest finds plausible,
			// unless the balance still shows the error a meter-fault
			// finding saw (meterBack): then a new day starts.
			if !d.sens[si].evidence {
				if usable(a) {
					ss.Quiet++
				} else {
					ss.Quiet = 0
				}
				if ss.Quiet >= day {
					if d.meterBack(si) {
						ss.Excluded, ss.Quiet, ss.BadSteps, ss.Spikes, ss.Unchanged = false, 0, 0, nil, 0
					} else {
						ss.Quiet = 0
					}
				}
			}
			continue
		}
		if usable(a) {
			ss.OKAt = snap.Step
		}
		reason := ""
		switch a.Quality {
		case telemetry.Stuck, telemetry.OutOfRange:
			ss.BadSteps++
			if time.Duration(ss.BadSteps)*d.cfg.Step >= time.Hour {
				reason = fmt.Sprintf("flagged %s by ingest for %v", a.Quality, time.Duration(ss.BadSteps)*d.cfg.Step)
			}
		case telemetry.Spike:
			ss.Spikes = append(ss.Spikes, snap.Step)
			cut := snap.Step.Add(-24 * time.Hour)
			for len(ss.Spikes) > 0 && ss.Spikes[0].Before(cut) {
				ss.Spikes = ss.Spikes[1:]
			}
			// Demand itself jumps now and then (a hydrant, a filling
			// tanker); a logger is called faulty when it spikes several
			// times a day (8 in 24 h, our choice).
			if len(ss.Spikes) >= 8 {
				reason = fmt.Sprintf("%d spikes within 24 h", len(ss.Spikes))
			}
		default:
			ss.BadSteps = 0
		}
		if a.Count > 0 && a.Quality != telemetry.Missing {
			if a.Min == a.Max && a.Value == ss.Last {
				ss.Unchanged += snap.Length
			} else {
				ss.Unchanged = 0
			}
			ss.Last = a.Value
			if ss.Unchanged >= 3*time.Hour && reason == "" {
				reason = fmt.Sprintf("value %.4g unchanged for %v", a.Value, ss.Unchanged)
			}
		}
		if reason == "" {
			continue
		}
		d.faultFinding(si, snap.Step.Add(-max(ss.Unchanged, time.Duration(ss.BadSteps)*d.cfg.Step)), snap.Step, reason)
	}
}

// pressureLoss finds the zones in which most loggers read out of range
// at once — at least three, and at least half of those in use. One
// instrument failing is a sensor fault; a whole zone's failing together
// is the water telling the truth: pressure was lost (a main shut or
// collapsed, or a burst too large for the supply). It returns which
// zones are in that state this step and, after an hour of it, raises
// one finding per event for the zone that is not merely downstream of
// another zone in the same state: a leak when the zone balance shows
// the water going (the inflow far above expected), otherwise a blockage
// on the zone's supply, the links that carried most of its water in the
// last inflow-matched solve ranked first.
func (d *Detector) pressureLoss(snap telemetry.Snapshot) []bool {
	storm := make([]bool, len(d.zones))
	for zi := range d.zones {
		zs := &d.st.Zones[zi]
		start := snap.Step
		if zs.Storm > 0 {
			start = zs.StormStart
		}
		out, inUse := 0, 0
		for _, si := range d.zones[zi].evidence {
			ss := &d.st.Sensors[si]
			if ss.Excluded {
				continue
			}
			inUse++
			// Only a logger that read in range within the day before counts:
			// loggers out of range from the start are misconfigured, each a
			// sensor fault of its own.
			if snap.Values[si].Quality == telemetry.OutOfRange && !ss.OKAt.IsZero() && start.Sub(ss.OKAt) < 24*time.Hour {
				out++
			}
		}
		storm[zi] = out >= 3 && 2*out >= inUse
		if !storm[zi] {
			zs.Storm = 0
			continue
		}
		if zs.Storm == 0 {
			zs.StormStart = snap.Step
		}
		zs.Storm++
	}
	for zi := range d.zones {
		zs := &d.st.Zones[zi]
		if !storm[zi] || time.Duration(zs.Storm)*d.cfg.Step != time.Hour {
			continue
		}
		if !zs.StormAt.IsZero() && snap.Step.Sub(zs.StormAt) < 24*time.Hour {
			continue
		}
		if up := d.upstreamZone(zi); up >= 0 && storm[up] {
			continue // the zone feeding this one lost pressure too: its finding covers both
		}
		zs.StormAt = snap.Step
		d.lossFinding(zi, snap)
	}
	return storm
}

// upstreamZone returns a zone one of whose outlet meters is an inlet of
// zone zi (the zone that feeds it), or -1.
func (d *Detector) upstreamZone(zi int) int {
	for _, in := range d.zones[zi].inlets {
		for zj := range d.zones {
			for _, out := range d.zones[zj].outlets {
				if zj != zi && out.sensor == in.sensor {
					return zj
				}
			}
		}
	}
	return -1
}

// lossFinding raises the finding of a zone-wide loss of pressure.
func (d *Detector) lossFinding(zi int, snap telemetry.Snapshot) {
	zone := d.zones[zi].z.ID
	onset := snap.Step.Add(-time.Hour + d.cfg.Step)
	n, lowest := 0, math.Inf(1)
	for _, si := range d.zones[zi].evidence {
		if a := snap.Values[si]; a.Quality == telemetry.OutOfRange {
			n++
			if a.Count > 0 && !math.IsNaN(a.Value) {
				lowest = math.Min(lowest, a.Value)
			}
		}
	}
	inflow, ok := d.zoneInflow(zi, func(si int) (float64, bool) { return d.meterValue(si, snap) })
	expected := 0.0
	for _, j := range d.zones[zi].junctions {
		if d.base != nil {
			expected += d.base[j]
		}
	}
	sigma := d.st.Zones[zi].Base.Sigma()
	what := fmt.Sprintf("pressure at %d of %d loggers in zone %s left the instruments' range together for an hour", n, len(d.zones[zi].evidence), zone)
	if !math.IsInf(lowest, 1) {
		what += fmt.Sprintf(" (lowest %.1f m)", lowest)
	}
	if ok && inflow-expected > 3*sigma && inflow-expected > 0 {
		f := finding.Finding{Kind: finding.Leak, Zone: zone, Onset: onset, Raised: snap.Step, SizeLPS: round2(inflow - expected),
			Evidence: fmt.Sprintf("%s while zone inflow read %.1f L/s against %.1f expected: a burst too large for the supply; the loggers are not faulty", what, inflow, expected)}
		d.raise(f)
		return
	}
	// The supply's links: those touching the zone, by the flow they
	// carried before the event.
	type carried struct {
		link int
		q    float64
	}
	var links []carried
	total := 0.0
	for l, lk := range d.net.Links {
		if d.nodeZone[lk.From] != zi && d.nodeZone[lk.To] != zi {
			continue
		}
		q := 0.0
		if d.prevMat != nil {
			q = math.Abs(d.prevMat.Flow[l])
		}
		links = append(links, carried{l, q})
		total = math.Max(total, q)
	}
	sort.SliceStable(links, func(a, b int) bool { return links[a].q > links[b].q })
	f := finding.Finding{Kind: finding.Blockage, Zone: zone, Onset: onset, Raised: snap.Step, Candidates: []finding.Candidate{}}
	for _, c := range links[:min(d.cfg.Candidates, len(links))] {
		score := 0.0
		if total > 0 {
			score = c.q / total
		}
		f.Candidates = append(f.Candidates, finding.Candidate{ID: d.net.Links[c.link].ID, Score: round2(score)})
	}
	in := "unmetered"
	if ok {
		in = fmt.Sprintf("%.1f L/s against %.1f expected", inflow, expected)
	}
	best := "-"
	if len(f.Candidates) > 0 {
		best = f.Candidates[0].ID
	}
	f.Evidence = fmt.Sprintf("%s while zone inflow read %s: the zone's supply is constricted (a valve shut or a main collapsed) and the loggers are not faulty; check first the links that carried most of its water, %s", what, in, best)
	d.raise(f)
}

func (d *Detector) faultFinding(si int, onset, now time.Time, why string) {
	ss := &d.st.Sensors[si]
	ss.Excluded, ss.Quiet = true, 0
	zone := ""
	if zi := d.sens[si].zone; zi >= 0 {
		zone = d.zones[zi].z.ID
	} else if d.sens[si].link >= 0 {
		l := d.net.Links[d.sens[si].link]
		zone = d.net.Nodes[l.To].Zone
	}
	d.raise(finding.Finding{
		Kind: finding.SensorFault, Zone: zone, Onset: onset, Raised: now,
		Candidates: []finding.Candidate{{ID: d.sens[si].s.ID, Score: 1}},
		Evidence:   fmt.Sprintf("sensor %s: %s; left out of leak and blockage evidence", d.sens[si].s.ID, why),
	})
}
