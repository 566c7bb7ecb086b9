// Package pipeline is the one path readings take from arrival to
// findings, shared by the live service, replay, report and the demo:
// readings (canonical units) go into the time aligner (ingest/align),
// each step's snapshot into the detector (model/detect), and each step's
// results into the store as the result measurements of shared/CONTRACT.md.
// Live and retrospective runs differ only in where readings come from and
// in the `run` tag their result points carry.
//
// A Pipeline is not safe for concurrent use: one goroutine feeds it.
package pipeline

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strings"
	"time"

	"plumbline/daemon/config"
	"plumbline/ingest/align"
	"plumbline/ingest/lineproto"
	"plumbline/model/detect"
	"plumbline/model/finding"
	"plumbline/model/telemetry"
)

// PointSink takes result points: the embedded file store and the
// InfluxDB writer both are one.
type PointSink interface {
	Add(points ...lineproto.Point) error
}

// Options set up a Pipeline.
type Options struct {
	Config *config.Config
	// Run tags every result point (a replay's id); empty for live data.
	Run string
	// Store receives result points; nil writes none.
	Store PointSink
	// Start is the first step (truncated to the step); zero: the first
	// reading's step.
	Start time.Time
	// Lateness is how long after a step's end readings are still taken
	// (default: one step).
	Lateness time.Duration
	// OnStep, when set, is called with every step's results after they
	// were stored.
	OnStep func(snap telemetry.Snapshot, res *detect.StepResult) error
	// Detector overrides detector settings (zones and sensors come from
	// Config).
	Detector detect.Config
	// MaxGap is the furthest a reading may lie after the latest one seen
	// (default 31 days). One reading stamped decades ahead would otherwise
	// make the aligner close every step up to it.
	MaxGap time.Duration
	// Context, when set, stops the pipeline: steps after it is done are
	// not processed and Add returns its error.
	Context context.Context
	// SolveAhead solves the hydraulic model of the next steps on other
	// goroutines while the detector works on the current one
	// (detect.Ahead): for replay, where the next snapshots are at hand.
	// A step is then processed once aheadDepth later snapshots have
	// closed, or at Flush; the live service leaves it off, so that each
	// step is processed as soon as it closes. A pipeline with SolveAhead
	// must be closed (Close).
	SolveAhead bool
}

// aheadDepth is how many closed steps wait for their solves ahead of the
// one being processed: one per worker of detect.Ahead.
const aheadDepth = 2

// Pipeline aligns readings, detects, and stores results.
type Pipeline struct {
	opt     Options
	aligner *align.Aligner
	det     *detect.Detector
	sensors []telemetry.Sensor
	err     error
	steps   int
	buf     []lineproto.Point
	latest  time.Time
	// jumped counts readings left out for lying beyond MaxGap; jumpedEx
	// describes the first.
	jumped   int
	jumpedEx string
	// ahead solves queued steps ahead (Options.SolveAhead).
	ahead *detect.Ahead
}

// DetectorConfig maps a service configuration onto the detector's.
func DetectorConfig(c *config.Config, base detect.Config) detect.Config {
	base.Network = c.Network
	base.Sensors = c.Sensors
	base.Step = c.Step
	base.Zones = nil
	for _, z := range c.Zones {
		base.Zones = append(base.Zones, detect.Zone{
			ID: z.ID, Inlets: z.Inlets, Outlets: z.Outlets,
			NightStart: z.Night.Start, NightEnd: z.Night.End,
			Location: z.TimeZone, NightUseLPS: z.NightUseLPS,
		})
	}
	return base
}

// New builds the aligner and the detector for o.Config.
func New(o Options) (*Pipeline, error) {
	c := o.Config
	if c == nil || c.Network == nil {
		return nil, errors.New("pipeline: no configuration or network")
	}
	if o.Lateness == 0 {
		o.Lateness = c.Step
	}
	if o.MaxGap <= 0 {
		o.MaxGap = 31 * 24 * time.Hour
	}
	if o.Context == nil {
		o.Context = context.Background()
	}
	det, err := detect.New(DetectorConfig(c, o.Detector))
	if err != nil {
		return nil, err
	}
	p := &Pipeline{opt: o, det: det, sensors: c.Sensors}
	al, err := align.New(align.Config{
		Step: c.Step, Lateness: o.Lateness, Sensors: c.Sensors, Start: o.Start,
		// A logger repeating one value to the last digit for two hours has
		// stopped measuring (common practice, not from a source).
		StuckAfter: 2 * time.Hour,
	}, p.step)
	if err != nil {
		return nil, err
	}
	p.aligner = al
	if o.SolveAhead {
		if p.ahead, err = det.NewAhead(); err != nil {
			return nil, err
		}
	}
	return p, nil
}

// Close stops the solve-ahead's workers (Options.SolveAhead); steps still
// queued are dropped (Flush first to process them). It is a no-op
// without SolveAhead and may be called more than once.
func (p *Pipeline) Close() {
	if p.ahead != nil {
		p.ahead.Close()
	}
}

// Detector returns the pipeline's detector (for its state and findings).
func (p *Pipeline) Detector() *detect.Detector { return p.det }

// Aligner returns the pipeline's aligner (for its counters).
func (p *Pipeline) Aligner() *align.Aligner { return p.aligner }

// Steps returns the number of steps processed.
func (p *Pipeline) Steps() int { return p.steps }

// Add takes one reading (canonical units). It returns the first error
// the detector or the store met, after which the pipeline stops.
func (p *Pipeline) Add(r telemetry.Reading) error {
	if p.err != nil {
		return p.err
	}
	if !p.latest.IsZero() && r.Time.Sub(p.latest) > p.opt.MaxGap {
		if p.jumped == 0 {
			p.jumpedEx = fmt.Sprintf("sensor %s at %s, after readings up to %s", r.Sensor, r.Time.Format(time.RFC3339), p.latest.Format(time.RFC3339))
		}
		p.jumped++
		return nil
	}
	if r.Time.After(p.latest) {
		p.latest = r.Time
	}
	p.aligner.Add(r)
	return p.err
}

// Latest returns the time of the latest reading taken in.
func (p *Pipeline) Latest() time.Time { return p.latest }

// Jumped reports the readings left out for lying more than MaxGap after
// the latest reading before them, with a description of the first.
func (p *Pipeline) Jumped() (int, string) { return p.jumped, p.jumpedEx }

// Advance tells the pipeline that no reading older than t will come,
// closing the steps before it (a clock for quiet periods).
func (p *Pipeline) Advance(t time.Time) error {
	if p.err != nil {
		return p.err
	}
	p.aligner.Advance(t)
	return p.err
}

// Flush closes every step that ends at or before end.
func (p *Pipeline) Flush(end time.Time) error {
	if p.err != nil {
		return p.err
	}
	p.aligner.Flush(end)
	p.drain(0)
	return p.err
}

// Findings returns every finding so far, in the order raised, with their
// latest candidates.
func (p *Pipeline) Findings() []finding.Finding { return p.det.Findings() }

// step takes the aligner's next snapshot: processed now, or, with the
// solve-ahead, queued and processed aheadDepth snapshots later.
func (p *Pipeline) step(snap telemetry.Snapshot) {
	if p.ahead == nil {
		p.process(snap)
		return
	}
	if p.err != nil {
		return
	}
	if err := p.ahead.Queue(snap); err != nil {
		p.err = err
		return
	}
	p.drain(aheadDepth)
}

// drain processes queued snapshots until at most keep remain.
func (p *Pipeline) drain(keep int) {
	if p.ahead == nil {
		return
	}
	for p.ahead.Len() > keep && p.err == nil {
		p.process(p.ahead.Oldest())
	}
}

// process runs the detector on one snapshot and stores the results.
func (p *Pipeline) process(snap telemetry.Snapshot) {
	if p.err != nil {
		return
	}
	if err := p.opt.Context.Err(); err != nil {
		p.err = err
		return
	}
	var res *detect.StepResult
	var err error
	if p.ahead != nil {
		res, err = p.ahead.Step(snap)
	} else {
		res, err = p.det.Step(snap)
	}
	if err != nil {
		p.err = err
		return
	}
	p.steps++
	if p.opt.Store != nil {
		if err := p.opt.Store.Add(p.points(snap, res)...); err != nil {
			p.err = fmt.Errorf("store results at %s: %w", snap.Step.Format(time.RFC3339), err)
			return
		}
	}
	if p.opt.OnStep != nil {
		if err := p.opt.OnStep(snap, res); err != nil {
			p.err = err
		}
	}
}

// points returns the result points of one step.
func (p *Pipeline) points(snap telemetry.Snapshot, res *detect.StepResult) []lineproto.Point {
	out := p.buf[:0]
	add := func(pt lineproto.Point) {
		if p.opt.Run != "" {
			pt = lineproto.WithRun(pt, p.opt.Run)
		}
		out = append(out, pt)
	}
	t := snap.Step
	for i, s := range p.sensors {
		if e := res.Expected[i]; finite(e) {
			add(lineproto.Stamp(lineproto.MeasurementExpected, t, []lineproto.Field{{Key: "value", Value: e}},
				"sensor", s.ID, "quantity", s.Quantity.String(), "zone", s.Zone, "quality", snap.Values[i].Quality.String()))
		}
		if r := res.Residual[i]; finite(r) {
			add(lineproto.Stamp(lineproto.MeasurementResidual, t, []lineproto.Field{{Key: "value", Value: r}},
				"sensor", s.ID, "quantity", s.Quantity.String(), "zone", s.Zone))
		}
	}
	for _, z := range res.Zones {
		if !finite(z.InflowLPS) {
			continue
		}
		add(lineproto.Stamp(lineproto.MeasurementZoneBalance, t, []lineproto.Field{
			{Key: "inflow_lps", Value: z.InflowLPS}, {Key: "expected_lps", Value: z.ExpectedLPS},
			{Key: "imbalance_lps", Value: z.Imbalance}, {Key: "multiplier", Value: z.Multiplier},
			{Key: "night_cusum", Value: z.NightStat}, {Key: "night_threshold", Value: z.NightThreshold},
			{Key: "burst_cusum", Value: z.BurstStat}, {Key: "burst_threshold", Value: z.BurstThreshold},
		}, "zone", z.Zone))
	}
	for _, n := range res.Nights {
		fs := []lineproto.Field{{Key: "imbalance_lps", Value: n.Imbalance}, {Key: "allowance_lps", Value: n.AllowLPS},
			{Key: "statistic", Value: n.Statistic}, {Key: "threshold", Value: n.Threshold}, {Key: "nights", Value: int64(n.NightsUsed)}}
		if finite(n.MinLPS) {
			fs = append(fs, lineproto.Field{Key: "min_lps", Value: n.MinLPS}, lineproto.Field{Key: "excess_lps", Value: n.ExcessLPS})
		}
		if finite(n.MeanLPS) {
			fs = append(fs, lineproto.Field{Key: "mean_lps", Value: n.MeanLPS})
		}
		add(lineproto.Stamp(lineproto.MeasurementNightFlow, n.Night, fs, "zone", n.Zone))
	}
	for _, f := range append(append([]finding.Finding(nil), res.Findings...), res.Updated...) {
		add(FindingPoint(f))
	}
	p.buf = out
	return out
}

// FindingPoint is the `finding` measurement point of a finding: tags kind
// and zone, time = raised (so an update overwrites its own point), the
// candidates as JSON text.
func FindingPoint(f finding.Finding) lineproto.Point {
	cands, _ := json.Marshal(f.Candidates)
	best := ""
	if len(f.Candidates) > 0 {
		best = f.Candidates[0].ID
	}
	return lineproto.Stamp(lineproto.MeasurementFinding, f.Raised, []lineproto.Field{
		{Key: "size_lps", Value: f.SizeLPS}, {Key: "open_fraction", Value: f.OpenFrac},
		{Key: "onset", Value: f.Onset.UTC().Format(time.RFC3339)}, {Key: "best", Value: best},
		{Key: "candidates", Value: string(cands)}, {Key: "evidence", Value: oneLine(f.Evidence)},
	}, "kind", string(f.Kind), "zone", f.Zone)
}

func oneLine(s string) string { return strings.NewReplacer("\n", " ", "\r", " ", "\\", "/").Replace(s) }

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }
