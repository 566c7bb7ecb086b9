package score

import (
	"fmt"
	"math"
	"sort"
	"time"

	"plumbline/model/finding"
	"plumbline/model/network"
)

// DefaultLocaliseWithin is the distance along pipes within which a best
// candidate counts as localising its event: 300 m, the rule of the
// BattLeDIM 2020 leakage detection and isolation competition (Vrachimis et
// al. 2020).
const DefaultLocaliseWithin = 300.0

// SmallLeakLPS splits leaks into size bands: below it, and at or above it.
const SmallLeakLPS = 2.0

// ObservedDays is the period false findings are counted per: 30 days.
const ObservedDays = 30.0

// Options are the settings of Score. The zero value means: the observed
// period from the truth and findings, the zone count from the network,
// matching restricted to the same zone, no limit on the delay, 300 m.
type Options struct {
	// Start and End bound the observed period for the false-finding rate
	// (normally the scenario's span). A zero Start is the earliest event
	// start or finding raised time; a zero End the latest.
	Start, End time.Time
	// Zones is the number of zones the rate is normalised by; 0 means the
	// network's zones, else the distinct zones of truth and findings, and
	// at least 1.
	Zones int
	// AnyZone lets a finding match an event in another zone. By default a
	// finding and an event whose zones are both known must agree.
	AnyZone bool
	// MaxDelay, when positive, is the latest a finding may be raised after
	// an event's start and still detect it.
	MaxDelay time.Duration
	// LocaliseWithin is the distance (m) within which a best candidate
	// localises its event; 0 means DefaultLocaliseWithin.
	LocaliseWithin float64
	// SensorZones gives the zone of each sensor, for sensor-fault events
	// without a zone of their own.
	SensorZones map[string]string
}

// Report is the result of Score, in the JSON form `plumbline score --json`
// prints.
type Report struct {
	Observed Observed `json:"observed"`
	// Overall sums every kind.
	Overall Summary `json:"overall"`
	// ByKind breaks the counts down by event kind.
	ByKind ByKind `json:"by_kind"`
	// LeakBands breaks leaks down by true size: below SmallLeakLPS and at
	// or above it. False findings are not banded (they have no true size).
	LeakBands []Summary `json:"leak_bands"`
	// Events has one row per truth event, in truth order.
	Events []EventResult `json:"events"`
	// FalseFindings lists every finding that detected nothing.
	FalseFindings []FalseFinding `json:"false_findings"`
	// FalseByZone counts false findings per zone ("" for none given).
	FalseByZone []ZoneRate `json:"false_by_zone"`
}

// Observed is the period and zone count the false-finding rate is taken
// over.
type Observed struct {
	Start time.Time `json:"start"`
	End   time.Time `json:"end"`
	Days  float64   `json:"days"`
	Zones int       `json:"zones"`
	// ZonesFrom says where Zones came from: "options", "network" or
	// "truth and findings".
	ZonesFrom string `json:"zones_from"`
	// WithinM is the localisation distance used (m).
	WithinM float64 `json:"within_m"`
	// Network tells whether distances could be measured.
	Network bool `json:"network"`
}

// ByKind holds one summary per event kind.
type ByKind struct {
	Leak        Summary `json:"leak"`
	Blockage    Summary `json:"blockage"`
	SensorFault Summary `json:"sensor_fault"`
}

// Summary is the detection quality of one group of events and findings.
// Pointers are null in JSON when there is nothing to measure.
type Summary struct {
	Label    string `json:"label"`
	Events   int    `json:"events"`
	Detected int    `json:"detected"`
	Missed   int    `json:"missed"`
	// DetectionRate is Detected / Events.
	DetectionRate *float64 `json:"detection_rate"`
	// FalseFindings counts findings that detected nothing; nil for leak
	// size bands.
	FalseFindings *int `json:"false_findings,omitempty"`
	// FalsePerZonePer30d is FalseFindings / (zones × days / 30).
	FalsePerZonePer30d *float64     `json:"false_per_zone_per_30d,omitempty"`
	TimeToDetect       Spread       `json:"time_to_detect"`
	Localisation       Localisation `json:"localisation"`
}

// Spread is the median and maximum of the times to detect (raised − start)
// of the detected events, in seconds and as Go durations.
type Spread struct {
	MedianS *float64 `json:"median_s"`
	MaxS    *float64 `json:"max_s"`
	Median  string   `json:"median,omitempty"`
	Max     string   `json:"max,omitempty"`
}

// Localisation is how well the detected events were located.
type Localisation struct {
	// Ranked counts detected events whose true element is among the
	// finding's candidates; Top1 those where it is the best candidate.
	Ranked int `json:"ranked"`
	Top1   int `json:"top1"`
	// MedianRank is the median rank (1 = best) over the ranked events.
	MedianRank *float64 `json:"median_rank"`
	// Measured counts detected leaks and blockages whose distance could be
	// measured (network given, best candidate in it and connected).
	Measured        int      `json:"measured"`
	MedianDistanceM *float64 `json:"median_distance_m"`
	MaxDistanceM    *float64 `json:"max_distance_m"`
	// Within counts detected leaks and blockages whose best candidate lies
	// within Observed.WithinM of the true element; WithinFraction is Within
	// over all detected leaks and blockages (an unmeasured one counts as
	// not localised). Null without a network.
	Within         int      `json:"within"`
	WithinFraction *float64 `json:"within_fraction"`
}

// EventResult is the outcome for one truth event.
type EventResult struct {
	Index   int          `json:"index"`
	Kind    finding.Kind `json:"kind"`
	At      string       `json:"at"`
	Zone    string       `json:"zone"`
	Start   time.Time    `json:"start"`
	SizeLPS float64      `json:"size_lps,omitempty"`
	// Detected tells whether a finding matched; Finding is its index in the
	// findings list, Raised its raised time.
	Detected      bool       `json:"detected"`
	Finding       *int       `json:"finding"`
	Raised        *time.Time `json:"raised"`
	TimeToDetectS *float64   `json:"time_to_detect_s"`
	// Rank is the 1-based position of the true element among the matched
	// finding's candidates, 0 when absent (or not detected).
	Rank int `json:"rank"`
	// BestCandidate is the matched finding's first candidate.
	BestCandidate string `json:"best_candidate,omitempty"`
	// DistanceM is the distance along pipes from the best candidate to the
	// true element; null for sensor faults, without a network, or when it
	// cannot be measured.
	DistanceM *float64 `json:"distance_m"`
	// Localised tells whether DistanceM ≤ Observed.WithinM; null when the
	// distance does not apply.
	Localised *bool `json:"localised"`
}

// FalseFinding is a finding that detected no event, and why.
type FalseFinding struct {
	Index         int          `json:"index"`
	Kind          finding.Kind `json:"kind"`
	Zone          string       `json:"zone"`
	Raised        time.Time    `json:"raised"`
	BestCandidate string       `json:"best_candidate,omitempty"`
	Reason        string       `json:"reason"`
}

// ZoneRate is the false findings of one zone.
type ZoneRate struct {
	Zone  string `json:"zone"`
	Count int    `json:"count"`
	// Per30d is Count / (days / 30): the rate for this one zone.
	Per30d *float64 `json:"per_30d"`
}

// kinds lists the event kinds in report order.
var kinds = []finding.Kind{finding.Leak, finding.Blockage, finding.SensorFault}

// located reports whether events of the kind have a network position.
func located(k finding.Kind) bool { return k == finding.Leak || k == finding.Blockage }

// Score judges findings against the ground truth. The rules, stated as a
// utility engineer would expect them (shared/CONTRACT.md leaves them open):
//
//  1. A finding can detect only an event of its own kind that started at
//     or before the finding was raised (and, with Options.MaxDelay, not
//     longer than that before), in the same zone when both zones are known
//     (unless Options.AnyZone).
//  2. Findings are taken in order of raised time (ties in input order);
//     each detects at most one event, and each event is detected by at
//     most one finding: the first that can. When a finding could detect
//     several undetected events, it goes to the one whose start is nearest
//     before it, then to the one whose true element ranks best among its
//     candidates, then to the first in truth order. So every event is
//     matched to the earliest finding of its kind raised after its start
//     that no later-starting event claimed.
//  3. A finding that detects nothing is false: raised before every event
//     of its kind started, in a zone with no such event, of a kind with no
//     event at all, or a repeat of an already detected event. A finding of
//     the wrong kind is false for its own kind and detects nothing.
//  4. Time to detect is raised − start of each detected event; the median
//     (mean of the middle two for an even count) and the maximum.
//  5. Localisation: the rank of the true element among the candidates (1 =
//     best, 0 = absent), for every kind; for leaks and blockages with a
//     network, the distance along pipes from the best candidate to the true
//     element (see Paths) and whether it is within Options.LocaliseWithin.
//  6. False findings per zone per 30 days = false count / (zones × observed
//     days / 30), over the period of Options.Start/End or, when unset, from
//     the earliest to the latest event start or finding raised time (give
//     the scenario span for a fair rate).
//
// Zones: an event's zone is its own Zone, else that of its node or link in
// the network (a link's To node, else its From node, as model/sim does), else for a sensor
// fault Options.SensorZones; a finding's zone is its own Zone, else that
// of its best candidate. net may be nil: no distances, zones as given.
func Score(truth []finding.Event, findings []finding.Finding, net *network.Network, opts Options) Report {
	within := opts.LocaliseWithin
	if within <= 0 {
		within = DefaultLocaliseWithin
	}
	r := Report{
		Observed:      Observed{WithinM: within, Network: net != nil},
		Events:        make([]EventResult, len(truth)),
		FalseFindings: []FalseFinding{},
		FalseByZone:   []ZoneRate{},
	}

	// Zones of events and findings.
	evZone := make([]string, len(truth))
	for i := range truth {
		e := &truth[i]
		z := e.Zone
		if z == "" && e.Kind != finding.SensorFault {
			z = elementZone(net, e.At)
		}
		if z == "" && e.Kind == finding.SensorFault {
			z = opts.SensorZones[e.At]
		}
		evZone[i] = z
	}
	fZone := make([]string, len(findings))
	for j := range findings {
		f := &findings[j]
		z := f.Zone
		if z == "" && len(f.Candidates) > 0 {
			if f.Kind == finding.SensorFault {
				z = opts.SensorZones[f.Candidates[0].ID]
			} else {
				z = elementZone(net, f.Candidates[0].ID)
			}
		}
		fZone[j] = z
	}
	zoneOK := func(i, j int) bool {
		return opts.AnyZone || evZone[i] == "" || fZone[j] == "" || evZone[i] == fZone[j]
	}
	canDetect := func(i, j int) bool {
		e, f := &truth[i], &findings[j]
		if e.Kind != f.Kind || f.Raised.Before(e.Start) || !zoneOK(i, j) {
			return false
		}
		return opts.MaxDelay <= 0 || f.Raised.Sub(e.Start) <= opts.MaxDelay
	}

	// Matching (rules 1 and 2).
	order := make([]int, len(findings))
	for j := range order {
		order[j] = j
	}
	sort.SliceStable(order, func(a, b int) bool { return findings[order[a]].Raised.Before(findings[order[b]].Raised) })
	matchOf := make([]int, len(truth)) // finding index per event, -1 none
	for i := range matchOf {
		matchOf[i] = -1
	}
	matched := make([]bool, len(findings))
	for _, j := range order {
		best := -1
		for i := range truth {
			if matchOf[i] >= 0 || !canDetect(i, j) {
				continue
			}
			if best < 0 || better(&truth[i], &truth[best], &findings[j]) {
				best = i
			}
		}
		if best >= 0 {
			matchOf[best] = j
			matched[j] = true
		}
	}

	// Per-event results.
	var paths *Paths
	if net != nil {
		paths = NewPaths(net)
	}
	for i := range truth {
		e := &truth[i]
		er := EventResult{Index: i, Kind: e.Kind, At: e.At, Zone: evZone[i], Start: e.Start, SizeLPS: e.SizeLPS}
		if j := matchOf[i]; j >= 0 {
			f := &findings[j]
			jj, raised := j, f.Raised
			ttd := f.Raised.Sub(e.Start).Seconds()
			er.Detected, er.Finding, er.Raised, er.TimeToDetectS = true, &jj, &raised, &ttd
			er.Rank = rank(f, e.At)
			if len(f.Candidates) > 0 {
				er.BestCandidate = f.Candidates[0].ID
			}
			if located(e.Kind) && paths != nil {
				loc := false
				if er.BestCandidate != "" {
					if d, ok := paths.Distance(e.At, er.BestCandidate); ok {
						er.DistanceM = &d
						loc = d <= within
					}
				}
				er.Localised = &loc
			}
		}
		r.Events[i] = er
	}

	// False findings (rule 3).
	for _, j := range order {
		if matched[j] {
			continue
		}
		f := &findings[j]
		ff := FalseFinding{Index: j, Kind: f.Kind, Zone: fZone[j], Raised: f.Raised, Reason: falseReason(truth, j, f, fZone[j], zoneOK, canDetect)}
		if len(f.Candidates) > 0 {
			ff.BestCandidate = f.Candidates[0].ID
		}
		r.FalseFindings = append(r.FalseFindings, ff)
	}

	// Observed period and zones (rule 6).
	r.Observed.Start, r.Observed.End = observedSpan(truth, findings, opts)
	r.Observed.Days = r.Observed.End.Sub(r.Observed.Start).Hours() / 24
	r.Observed.Zones, r.Observed.ZonesFrom = zoneCount(net, evZone, fZone, opts)

	// Summaries.
	r.Overall = r.summarise("all", func(e *EventResult) bool { return true }, func(k finding.Kind) bool { return true })
	r.ByKind.Leak = r.summarise(string(finding.Leak), func(e *EventResult) bool { return e.Kind == finding.Leak }, is(finding.Leak))
	r.ByKind.Blockage = r.summarise(string(finding.Blockage), func(e *EventResult) bool { return e.Kind == finding.Blockage }, is(finding.Blockage))
	r.ByKind.SensorFault = r.summarise(string(finding.SensorFault), func(e *EventResult) bool { return e.Kind == finding.SensorFault }, is(finding.SensorFault))
	small := r.summarise(fmt.Sprintf("leak <%g L/s", SmallLeakLPS), func(e *EventResult) bool { return e.Kind == finding.Leak && e.SizeLPS < SmallLeakLPS }, nil)
	large := r.summarise(fmt.Sprintf("leak ≥%g L/s", SmallLeakLPS), func(e *EventResult) bool { return e.Kind == finding.Leak && e.SizeLPS >= SmallLeakLPS }, nil)
	r.LeakBands = []Summary{small, large}

	// False findings by zone.
	byZone := map[string]int{}
	for _, ff := range r.FalseFindings {
		byZone[ff.Zone]++
	}
	zones := make([]string, 0, len(byZone))
	for z := range byZone {
		zones = append(zones, z)
	}
	sort.Strings(zones)
	for _, z := range zones {
		zr := ZoneRate{Zone: z, Count: byZone[z]}
		if r.Observed.Days > 0 {
			v := float64(zr.Count) / (r.Observed.Days / ObservedDays)
			zr.Per30d = &v
		}
		r.FalseByZone = append(r.FalseByZone, zr)
	}
	return r
}

// is returns a kind filter.
func is(k finding.Kind) func(finding.Kind) bool { return func(x finding.Kind) bool { return x == k } }

// better reports whether event a is a better match than b for finding f:
// a later start (nearer before the finding), then a better rank of the
// true element among the candidates. Equal: false (the first stays).
func better(a, b *finding.Event, f *finding.Finding) bool {
	if !a.Start.Equal(b.Start) {
		return a.Start.After(b.Start)
	}
	ra, rb := rank(f, a.At), rank(f, b.At)
	if ra == 0 {
		ra = math.MaxInt
	}
	if rb == 0 {
		rb = math.MaxInt
	}
	return ra < rb
}

// rank returns the 1-based position of id among f's candidates, 0 if
// absent.
func rank(f *finding.Finding, id string) int {
	for k, c := range f.Candidates {
		if c.ID == id {
			return k + 1
		}
	}
	return 0
}

// falseReason says why finding j detected nothing.
func falseReason(truth []finding.Event, j int, f *finding.Finding, zone string, zoneOK func(i, j int) bool, canDetect func(i, j int) bool) string {
	var sameKind, inZone, started, inDelay int
	for i := range truth {
		if truth[i].Kind != f.Kind {
			continue
		}
		sameKind++
		if !zoneOK(i, j) {
			continue
		}
		inZone++
		if f.Raised.Before(truth[i].Start) {
			continue
		}
		started++
		if canDetect(i, j) {
			inDelay++
		}
	}
	switch {
	case sameKind == 0:
		return fmt.Sprintf("no %s event in the truth", f.Kind)
	case inZone == 0:
		return fmt.Sprintf("no %s event in zone %s", f.Kind, zone)
	case started == 0:
		return fmt.Sprintf("raised before any %s event it could detect had started", f.Kind)
	case inDelay == 0:
		return "raised later than the maximum delay after every event it could detect"
	}
	return "every event it could detect was detected by an earlier finding"
}

// observedSpan returns the observed period (rule 6).
func observedSpan(truth []finding.Event, findings []finding.Finding, opts Options) (time.Time, time.Time) {
	var lo, hi time.Time
	see := func(t time.Time) {
		if t.IsZero() {
			return
		}
		if lo.IsZero() || t.Before(lo) {
			lo = t
		}
		if hi.IsZero() || t.After(hi) {
			hi = t
		}
	}
	for i := range truth {
		see(truth[i].Start)
	}
	for j := range findings {
		see(findings[j].Raised)
	}
	if !opts.Start.IsZero() {
		lo = opts.Start
	}
	if !opts.End.IsZero() {
		hi = opts.End
	}
	if hi.Before(lo) {
		hi = lo
	}
	return lo.UTC(), hi.UTC()
}

// zoneCount returns the number of zones for the rate and where it came
// from.
func zoneCount(net *network.Network, evZone, fZone []string, opts Options) (int, string) {
	if opts.Zones > 0 {
		return opts.Zones, "options"
	}
	if net != nil {
		if n := len(net.Zones()); n > 0 {
			return n, "network"
		}
	}
	seen := map[string]bool{}
	for _, z := range append(append([]string(nil), evZone...), fZone...) {
		if z != "" {
			seen[z] = true
		}
	}
	return max(1, len(seen)), "truth and findings"
}

// summarise builds the summary of the events accepted by ev and the false
// findings of the kinds accepted by fk (nil: no false-finding figures).
func (r *Report) summarise(label string, ev func(*EventResult) bool, fk func(finding.Kind) bool) Summary {
	s := Summary{Label: label}
	var ttd, ranks, dists []float64
	locatedDetected := 0
	for i := range r.Events {
		e := &r.Events[i]
		if !ev(e) {
			continue
		}
		s.Events++
		if !e.Detected {
			s.Missed++
			continue
		}
		s.Detected++
		ttd = append(ttd, *e.TimeToDetectS)
		if e.Rank > 0 {
			s.Localisation.Ranked++
			ranks = append(ranks, float64(e.Rank))
			if e.Rank == 1 {
				s.Localisation.Top1++
			}
		}
		if located(e.Kind) {
			locatedDetected++
			if e.DistanceM != nil {
				dists = append(dists, *e.DistanceM)
			}
			if e.Localised != nil && *e.Localised {
				s.Localisation.Within++
			}
		}
	}
	if s.Events > 0 {
		s.DetectionRate = ptr(float64(s.Detected) / float64(s.Events))
	}
	if fk != nil {
		n := 0
		for _, ff := range r.FalseFindings {
			if fk(ff.Kind) {
				n++
			}
		}
		s.FalseFindings = &n
		if r.Observed.Days > 0 {
			s.FalsePerZonePer30d = ptr(float64(n) / (float64(r.Observed.Zones) * r.Observed.Days / ObservedDays))
		}
	}
	if len(ttd) > 0 {
		med, mx := median(ttd), maxOf(ttd)
		s.TimeToDetect = Spread{MedianS: &med, MaxS: &mx, Median: seconds(med).String(), Max: seconds(mx).String()}
	}
	if len(ranks) > 0 {
		s.Localisation.MedianRank = ptr(median(ranks))
	}
	s.Localisation.Measured = len(dists)
	if len(dists) > 0 {
		s.Localisation.MedianDistanceM = ptr(median(dists))
		s.Localisation.MaxDistanceM = ptr(maxOf(dists))
	}
	if r.Observed.Network && locatedDetected > 0 {
		s.Localisation.WithinFraction = ptr(float64(s.Localisation.Within) / float64(locatedDetected))
	}
	return s
}

func ptr[T any](v T) *T { return &v }

// seconds turns seconds into a duration rounded to the second.
func seconds(s float64) time.Duration {
	return (time.Duration(s * float64(time.Second))).Round(time.Second)
}

// median returns the median of v (the mean of the middle two for an even
// count). v is sorted in place.
func median(v []float64) float64 {
	sort.Float64s(v)
	n := len(v)
	if n%2 == 1 {
		return v[n/2]
	}
	return (v[n/2-1] + v[n/2]) / 2
}

func maxOf(v []float64) float64 {
	m := math.Inf(-1)
	for _, x := range v {
		m = math.Max(m, x)
	}
	return m
}
