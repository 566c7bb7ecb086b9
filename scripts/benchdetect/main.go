// Command benchdetect aggregates the score reports of the detection
// benchmark (scripts/bench-detect.sh) into one table per condition, with
// the measuring-stick issue's targets beside the measured figures.
//
//	benchdetect -suite testdata/scenarios/suite.tsv -results DIR [-true DIR]
//
// DIR holds one folder per run, DIR/<net>/<condition>/<scenario name>/,
// with score.json (`plumbline score --json`) or, for a run that failed,
// a file named failed holding the error. The suite manifest (written by
// `go run ./testdata/scenarios/gen`) names each run's scenario, network,
// service configuration and observed period. Conditions are printed in
// the order exact, realistic, realistic-calibrated, aged, aged-calibrated
// (others after, by name).
//
// # Rows
//
// Events are classed from their scenario file: sudden leaks (steps and
// bursts) by true size, 0.5-2 L/s and 2 L/s or more; bursts alone; slow
// rises (a ramp of a day or more); blockages on a main by open fraction
// (at most 0.3, above); blockages on a valve; sensor faults on pressure
// loggers and on flow meters.
//
// # Figures
//
//   - detected: a finding of the event's kind matched it (model/score
//     rules), so a blockage detected is a blockage called a blockage and
//     a sensor fault detected is one called a sensor fault.
//   - nights to detect: the event's first night is the first night-flow
//     window (the zone's `night`, in its time zone) that opens at or after
//     the event's start; a detection raised by that window's end is "in
//     the first night", by the third window's end "within 3 nights".
//   - top-5: the true junction or link among the first five candidates,
//     over detected leaks and blockages in zones with at least 6 pressure
//     loggers; distance: along pipes from the best candidate.
//   - false findings per zone per 30 days: every finding that detected no
//     event, over zones × observed days (observed = the scenario after the
//     7-day learning period), for the quiet scenarios alone and for all.
//   - a blockage "found": detected, or any finding of another kind raised
//     in its zone after its start; a sensor fault "raised a leak or
//     blockage": its run has a leak or blockage finding in the sensor's
//     zone raised after the fault started.
//
// # Calibration
//
// A condition "<c>-calibrated" was replayed with the network that
// `plumbline calibrate` fitted on the learning period of condition <c>;
// its run folders hold calibration.json. Against the true network of
// <c> (the -true folder's true-<net>.geojson for realistic,
// true-<net>-<c>.geojson otherwise, as scripts/bench-detect.sh names them;
// else the scenario's true_network) the table says, per roughness group
// the fit identified, whether the group's true roughness (the
// length-weighted geometric mean over its pipes, as the fit reports it)
// lies within two standard errors of the estimate, and in particular for
// the group whose truth departs most from its record; and whether each
// link shut in truth but open in the records was named a suspected
// closed or throttled valve.
package main

import (
	"bufio"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"time"

	"plumbline/daemon/config"
	"plumbline/model/finding"
	"plumbline/model/network"
	"plumbline/model/scenario"
	"plumbline/model/score"
	"plumbline/model/telemetry"
)

func main() {
	suite := flag.String("suite", "testdata/scenarios/suite.tsv", "suite manifest")
	results := flag.String("results", "", "folder of run results (<net>/<condition>/<name>/score.json)")
	trueDir := flag.String("true", "", "folder of the true networks (true-<net>.geojson, true-<net>-<condition>.geojson)")
	flag.Parse()
	if *results == "" {
		fmt.Fprintln(os.Stderr, "benchdetect: -results is required")
		os.Exit(2)
	}
	if err := run(os.Stdout, *suite, *results, *trueDir); err != nil {
		fmt.Fprintln(os.Stderr, "benchdetect:", err)
		os.Exit(1)
	}
}

// run is one line of the manifest.
type runSpec struct {
	net, cond, scenario, network, config string
	from, to                             time.Time
	line                                 int
}

func (r runSpec) name() string { return strings.TrimSuffix(filepath.Base(r.scenario), ".yaml") }

func readSuite(path string) ([]runSpec, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	var out []runSpec
	sc := bufio.NewScanner(f)
	line := 0
	for sc.Scan() {
		line++
		t := sc.Text()
		if strings.HasPrefix(t, "#") || strings.TrimSpace(t) == "" {
			continue
		}
		c := strings.Split(t, "\t")
		if len(c) != 7 {
			return nil, fmt.Errorf("%s:%d: want 7 tab-separated columns, got %d", path, line, len(c))
		}
		from, err1 := time.Parse(time.RFC3339, c[5])
		to, err2 := time.Parse(time.RFC3339, c[6])
		if err := errors.Join(err1, err2); err != nil {
			return nil, fmt.Errorf("%s:%d: %w", path, line, err)
		}
		out = append(out, runSpec{net: c[0], cond: c[1], scenario: c[2], network: c[3], config: c[4], from: from, to: to, line: line})
	}
	return out, sc.Err()
}

// site is what the classes and figures need to know about one network
// and its configuration.
type site struct {
	net     *network.Network
	cfg     *config.Config
	loggers map[string]int // pressure loggers per zone
}

// outcome is one truth event with its class and its result.
type outcome struct {
	class string
	res   score.EventResult
	zone  string
	// nights is the night (1-based) by whose end the event was detected,
	// 0 when not detected.
	nights int
	// found: detected, or any other finding in its zone after its start.
	found bool
	// wrongKind: a sensor fault whose run raised a leak or blockage.
	wrongKind bool
	loggers   int
	burst     bool
	net       string
}

// tally is everything of one condition.
type tally struct {
	runs, failed []string
	outcomes     []outcome
	// false findings and zone-days, quiet runs and all runs.
	quietFalse, allFalse       int
	quietZoneDays, allZoneDays float64
	falseByKind                map[finding.Kind]int
	quietFalseByKind           map[finding.Kind]int
	// Per network: runs, false findings and zone-days over all runs.
	nets        []string
	netRuns     map[string]int
	netFalse    map[string]int
	netZoneDays map[string]float64
	// cals are the calibrations of a calibrated condition, one per run
	// that has its report.
	cals []calRun
}

func run(w io.Writer, suitePath, results, trueDir string) error {
	specs, err := readSuite(suitePath)
	if err != nil {
		return err
	}
	sites := map[string]*site{}
	truths := &trueNets{dir: trueDir, nets: map[string]*network.Network{}}
	tallies := map[string]*tally{}
	var conds []string
	for _, r := range specs {
		s, ok := sites[r.net]
		if !ok {
			cfg, err := config.LoadFile(r.config)
			if err != nil {
				return fmt.Errorf("%s: %w", r.config, err)
			}
			s = &site{net: cfg.Network, cfg: cfg, loggers: map[string]int{}}
			for _, sn := range cfg.Sensors {
				if sn.Quantity == telemetry.Pressure {
					s.loggers[sn.Zone]++
				}
			}
			sites[r.net] = s
		}
		t, ok := tallies[r.cond]
		if !ok {
			t = &tally{falseByKind: map[finding.Kind]int{}, quietFalseByKind: map[finding.Kind]int{},
				netRuns: map[string]int{}, netFalse: map[string]int{}, netZoneDays: map[string]float64{}}
			tallies[r.cond] = t
			conds = append(conds, r.cond)
		}
		if err := t.add(r, s, results, truths); err != nil {
			return err
		}
	}
	sort.Slice(conds, func(a, b int) bool {
		ra, rb := condRank(conds[a]), condRank(conds[b])
		if ra != rb {
			return ra < rb
		}
		return conds[a] < conds[b]
	})
	for i, c := range conds {
		if i > 0 {
			fmt.Fprintln(w)
		}
		tallies[c].print(w, c)
	}
	return nil
}

// condOrder is the order conditions are printed in; others follow.
var condOrder = []string{"exact", "realistic", "realistic-calibrated", "aged", "aged-calibrated"}

func condRank(c string) int {
	for i, o := range condOrder {
		if o == c {
			return i
		}
	}
	return len(condOrder)
}

// add reads one run's results into the tally.
func (t *tally) add(r runSpec, s *site, results string, truths *trueNets) error {
	dir := filepath.Join(results, r.net, r.cond, r.name())
	id := r.net + "/" + r.cond + "/" + r.name()
	t.runs = append(t.runs, id)
	if t.netRuns[r.net] == 0 {
		t.nets = append(t.nets, r.net)
	}
	t.netRuns[r.net]++
	data, err := os.ReadFile(filepath.Join(dir, "score.json"))
	if err != nil {
		why := "no score.json"
		if msg, err := os.ReadFile(filepath.Join(dir, "failed")); err == nil {
			why = lastLine(string(msg))
		}
		t.failed = append(t.failed, id+": "+why)
		return nil
	}
	var rep score.Report
	if err := json.Unmarshal(data, &rep); err != nil {
		return fmt.Errorf("%s: %w", filepath.Join(dir, "score.json"), err)
	}
	sc, err := scenario.LoadFile(r.scenario)
	if err != nil {
		return fmt.Errorf("%s: %w", r.scenario, err)
	}
	if base, ok := strings.CutSuffix(r.cond, "-calibrated"); ok {
		c, err := readCalibration(filepath.Join(dir, "calibration.json"), s.net, truths, r.net, base, sc)
		if err != nil {
			return fmt.Errorf("%s: %w", id, err)
		}
		if c != nil {
			t.cals = append(t.cals, *c)
		}
	}
	if len(sc.Events) != len(rep.Events) {
		return fmt.Errorf("%s: %d events in the scenario, %d in the score", id, len(sc.Events), len(rep.Events))
	}

	zoneDays := float64(rep.Observed.Zones) * rep.Observed.Days
	nFalse := len(rep.FalseFindings)
	t.allFalse += nFalse
	t.allZoneDays += zoneDays
	t.netFalse[r.net] += nFalse
	t.netZoneDays[r.net] += zoneDays
	for _, f := range rep.FalseFindings {
		t.falseByKind[f.Kind]++
	}
	if len(sc.Events) == 0 {
		t.quietFalse += nFalse
		t.quietZoneDays += zoneDays
		for _, f := range rep.FalseFindings {
			t.quietFalseByKind[f.Kind]++
		}
	}

	for i, e := range sc.Events {
		res := rep.Events[i]
		o := outcome{class: classOf(&e, s), res: res, zone: res.Zone, loggers: s.loggers[res.Zone], burst: e.Burst, net: r.net}
		if res.Detected && res.Raised != nil {
			o.nights = nightOf(s.cfg, res.Zone, res.Start, *res.Raised)
		}
		o.found = res.Detected
		for _, f := range rep.FalseFindings {
			if f.Raised.Before(res.Start) || (f.Zone != res.Zone && f.Zone != "") {
				continue
			}
			switch e.Kind {
			case finding.Blockage:
				o.found = true
			case finding.SensorFault:
				o.wrongKind = o.wrongKind || f.Kind == finding.Leak || f.Kind == finding.Blockage
			}
		}
		t.outcomes = append(t.outcomes, o)
	}
	return nil
}

func lastLine(s string) string {
	lines := strings.Split(strings.TrimSpace(s), "\n")
	return lines[len(lines)-1]
}

// Class names, in table order.
const (
	classSmall     = "leak 0.5-2 L/s"
	classLarge     = "leak >=2 L/s"
	classBurst     = "  of which bursts"
	classRise      = "slow rise (ramp >=24h)"
	classMainLow   = "blockage main open<=0.3"
	classMainHigh  = "blockage main open>0.3"
	classValve     = "blockage valve"
	classPressure  = "sensor fault pressure"
	classFlow      = "sensor fault flow"
	classOtherKind = "other"
)

var classOrder = []string{classSmall, classLarge, classBurst, classRise, classMainLow, classMainHigh, classValve, classPressure, classFlow, classOtherKind}

func classOf(e *scenario.Event, s *site) string {
	switch e.Kind {
	case finding.Leak:
		if e.Ramp >= 24*time.Hour {
			return classRise
		}
		if e.SizeLPS < score.SmallLeakLPS {
			return classSmall
		}
		return classLarge
	case finding.Blockage:
		if k, ok := s.net.LinkIndex(e.At); ok && s.net.Links[k].Kind == network.Valve {
			return classValve
		}
		if e.OpenFraction <= 0.3 {
			return classMainLow
		}
		return classMainHigh
	case finding.SensorFault:
		if sn, ok := s.cfg.Sensor(e.At); ok && sn.Quantity == telemetry.Flow {
			return classFlow
		}
		return classPressure
	}
	return classOtherKind
}

// nightOf returns n such that raised is by the end of the n-th night
// window of the zone opening at or after start (1 = the first night).
func nightOf(cfg *config.Config, zone string, start, raised time.Time) int {
	w := config.NightWindow{Start: 2 * time.Hour, End: 4 * time.Hour}
	loc := time.UTC
	if z, ok := cfg.Zone(zone); ok {
		w = z.Night
		if z.TimeZone != nil {
			loc = z.TimeZone
		}
	}
	st := start.In(loc)
	day := time.Date(st.Year(), st.Month(), st.Day(), 0, 0, 0, 0, loc)
	n := 0
	for d := 0; d < 400; d++ {
		midnight := day.AddDate(0, 0, d)
		open := midnight.Add(w.Start)
		end := midnight.Add(w.End)
		if w.End <= w.Start {
			end = midnight.AddDate(0, 0, 1).Add(w.End)
		}
		if open.Before(start) {
			continue
		}
		n++
		if !raised.After(end) {
			return n
		}
	}
	return n + 1
}

// row is the figures of one class.
type row struct {
	events, detected, found, rightKind, noWrong int
	ttd                                         []float64 // seconds
	nights                                      []int
	ranked, top5                                int
	dist                                        []float64
	within                                      int
}

func (t *tally) rows(filter func(outcome) bool) row {
	var r row
	for _, o := range t.outcomes {
		if !filter(o) {
			continue
		}
		r.events++
		if o.found {
			r.found++
		}
		if !o.wrongKind {
			r.noWrong++
		}
		if !o.res.Detected {
			continue
		}
		r.detected++
		if o.res.TimeToDetectS != nil {
			r.ttd = append(r.ttd, *o.res.TimeToDetectS)
		}
		r.nights = append(r.nights, o.nights)
		if o.res.Kind == finding.Leak || o.res.Kind == finding.Blockage {
			if o.loggers >= 6 {
				r.ranked++
				if o.res.Rank >= 1 && o.res.Rank <= 5 {
					r.top5++
				}
			}
			if o.res.DistanceM != nil {
				r.dist = append(r.dist, *o.res.DistanceM)
				if o.res.Localised != nil && *o.res.Localised {
					r.within++
				}
			}
		}
	}
	return r
}

func (t *tally) print(w io.Writer, cond string) {
	fmt.Fprintf(w, "condition: %s (%d runs", cond, len(t.runs))
	if len(t.failed) > 0 {
		fmt.Fprintf(w, ", %d FAILED", len(t.failed))
	}
	fmt.Fprintln(w, ")")
	tw := newTable("class", "events", "detected", "missed", "rate", "TTD median", "TTD max", "night median", "top-5", "dist median m", "<=300 m")
	for _, c := range classOrder {
		var r row
		if c == classBurst {
			r = t.rows(func(o outcome) bool { return o.class == classLarge && o.burst })
		} else {
			r = t.rows(func(o outcome) bool { return o.class == c })
		}
		if r.events == 0 {
			continue
		}
		tw.add(c, itoa(r.events), itoa(r.detected), itoa(r.events-r.detected), pct(r.detected, r.events),
			hoursOf(median(r.ttd)), hoursOf(maxOf(r.ttd)), nightsMedian(r.nights),
			locPct(r.top5, r.ranked), metres(median(r.dist)), locPct(r.within, len(r.dist)))
	}
	tw.write(w)

	fmt.Fprintln(w)
	fmt.Fprintf(w, "false findings: quiet runs %d in %.0f zone-days = %s per zone per 30 days (%s); all runs %d in %.0f zone-days = %s (%s)\n",
		t.quietFalse, t.quietZoneDays, rate(t.quietFalse, t.quietZoneDays), kinds(t.quietFalseByKind),
		t.allFalse, t.allZoneDays, rate(t.allFalse, t.allZoneDays), kinds(t.falseByKind))
	sort.Strings(t.nets)
	for _, n := range t.nets {
		r := t.rows(func(o outcome) bool { return o.net == n })
		lk := t.rows(func(o outcome) bool {
			return o.net == n && (o.class == classSmall || o.class == classLarge || o.class == classRise)
		})
		fmt.Fprintf(w, "network %s: %d runs, %d events, %d detected (%s), leaks %d of %d (%s), false findings %s per zone per 30 days (all runs)\n",
			n, t.netRuns[n], r.events, r.detected, pct(r.detected, r.events), lk.detected, lk.events, pct(lk.detected, lk.events),
			rate(t.netFalse[n], t.netZoneDays[n]))
	}
	blk := t.rows(func(o outcome) bool {
		return o.class == classMainLow || o.class == classMainHigh || o.class == classValve
	})
	if blk.events > 0 {
		fmt.Fprintf(w, "blockages: %d, found by any finding %d (%s), called blockage %d (%s)\n",
			blk.events, blk.found, pct(blk.found, blk.events), blk.detected, pct(blk.detected, blk.events))
	}
	sf := t.rows(func(o outcome) bool { return o.class == classPressure || o.class == classFlow })
	if sf.events > 0 {
		fmt.Fprintf(w, "sensor faults: %d, called sensor fault %d (%s), raised no leak or blockage %d (%s)\n",
			sf.events, sf.detected, pct(sf.detected, sf.events), sf.noWrong, pct(sf.noWrong, sf.events))
	}
	printCalibration(w, t.cals)

	// The targets.
	fmt.Fprintln(w)
	tt := newTable("target", "wanted", "measured", "met")
	large := t.rows(func(o outcome) bool { return o.class == classLarge })
	small := t.rows(func(o outcome) bool { return o.class == classSmall })
	inNights := func(r row, n int) int {
		c := 0
		for _, v := range r.nights {
			if v <= n {
				c++
			}
		}
		return c
	}
	tt.add("leaks >=2 L/s detected", ">= 95%", pct(large.detected, large.events), met(frac(large.detected, large.events), 0.95, true))
	tt.add("leaks >=2 L/s median night of detection", "first night", nightsMedian(large.nights), met(medianInt(large.nights), 1, false))
	tt.add("leaks >=2 L/s latest detection", "<= 48 h", hoursOf(maxOf(large.ttd)), met(maxOf(large.ttd)/3600, 48, false))
	tt.add("leaks 0.5-2 L/s detected within 3 nights", ">= 70%", pct(inNights(small, 3), small.events), met(frac(inNights(small, 3), small.events), 0.70, true))
	tt.add("false findings per zone per 30 d (quiet)", "<= 1", rate(t.quietFalse, t.quietZoneDays), met(ratef(t.quietFalse, t.quietZoneDays), 1, false))
	loc := t.rows(func(o outcome) bool { return (o.class == classSmall || o.class == classLarge) && o.loggers >= 6 })
	tt.add("leak true junction in top 5 (>=6 loggers)", ">= 80%", locPct(loc.top5, loc.ranked), met(frac(loc.top5, loc.ranked), 0.80, true))
	tt.add("leak median distance (>=6 loggers)", "<= 250 m", metres(median(loc.dist)), met(median(loc.dist), 250, false))
	main := t.rows(func(o outcome) bool { return o.class == classMainLow })
	tt.add("blockages open<=0.3 on a main called blockage", ">= 90%", pct(main.detected, main.events), met(frac(main.detected, main.events), 0.90, true))
	tt.add("sensor faults called sensor fault", ">= 90%", pct(sf.detected, sf.events), met(frac(sf.detected, sf.events), 0.90, true))
	tt.add("sensor faults raising a leak or blockage", "none", itoa(sf.events-sf.noWrong), met(float64(sf.events-sf.noWrong), 0, false))
	tt.write(w)

	if len(t.failed) > 0 {
		fmt.Fprintln(w, "\nfailed runs (their events are left out):")
		for _, f := range t.failed {
			fmt.Fprintln(w, "  "+f)
		}
	}
}

// kinds formats false findings by kind.
func kinds(m map[finding.Kind]int) string {
	if len(m) == 0 {
		return "none"
	}
	var ks []string
	for k := range m {
		ks = append(ks, string(k))
	}
	sort.Strings(ks)
	var parts []string
	for _, k := range ks {
		parts = append(parts, fmt.Sprintf("%s %d", k, m[finding.Kind(k)]))
	}
	return strings.Join(parts, ", ")
}

func itoa(n int) string { return fmt.Sprint(n) }

func frac(a, b int) float64 {
	if b == 0 {
		return math.NaN()
	}
	return float64(a) / float64(b)
}

func pct(a, b int) string {
	if b == 0 {
		return "-"
	}
	return fmt.Sprintf("%.0f%%", 100*float64(a)/float64(b))
}

func locPct(a, b int) string { return pct(a, b) }

func ratef(n int, zoneDays float64) float64 {
	if zoneDays <= 0 {
		return math.NaN()
	}
	return float64(n) / (zoneDays / score.ObservedDays)
}

func rate(n int, zoneDays float64) string {
	v := ratef(n, zoneDays)
	if math.IsNaN(v) {
		return "-"
	}
	return fmt.Sprintf("%.2f", v)
}

// met says whether v meets the target (at least when atLeast, else at
// most); "-" when there is nothing to judge.
func met(v, target float64, atLeast bool) string {
	switch {
	case math.IsNaN(v):
		return "-"
	case atLeast && v >= target, !atLeast && v <= target:
		return "yes"
	}
	return "NO"
}

func median(v []float64) float64 {
	if len(v) == 0 {
		return math.NaN()
	}
	s := append([]float64(nil), v...)
	sort.Float64s(s)
	n := len(s)
	if n%2 == 1 {
		return s[n/2]
	}
	return (s[n/2-1] + s[n/2]) / 2
}

func medianInt(v []int) float64 {
	f := make([]float64, len(v))
	for i, x := range v {
		f[i] = float64(x)
	}
	return median(f)
}

func maxOf(v []float64) float64 {
	if len(v) == 0 {
		return math.NaN()
	}
	m := v[0]
	for _, x := range v {
		m = max(m, x)
	}
	return m
}

func hoursOf(s float64) string {
	if math.IsNaN(s) {
		return "-"
	}
	return fmt.Sprintf("%.1f h", s/3600)
}

func metres(m float64) string {
	if math.IsNaN(m) {
		return "-"
	}
	return fmt.Sprintf("%.0f", m)
}

func nightsMedian(n []int) string {
	v := medianInt(n)
	if math.IsNaN(v) {
		return "-"
	}
	return fmt.Sprintf("%g", v)
}

// table is a plain text table with columns padded to their widest cell.
type table struct{ rows [][]string }

func newTable(head ...string) *table { return &table{rows: [][]string{head}} }

func (t *table) add(cells ...string) { t.rows = append(t.rows, cells) }

func (t *table) write(w io.Writer) {
	width := make([]int, len(t.rows[0]))
	for _, r := range t.rows {
		for i, c := range r {
			width[i] = max(width[i], len([]rune(c)))
		}
	}
	for _, r := range t.rows {
		var b strings.Builder
		for i, c := range r {
			pad := strings.Repeat(" ", width[i]-len([]rune(c)))
			if i == 0 {
				b.WriteString(c + pad)
			} else {
				b.WriteString("  " + pad + c)
			}
		}
		fmt.Fprintln(w, strings.TrimRight(b.String(), " "))
	}
}
