package score

import (
	"bytes"
	"encoding/json"
	"math"
	"strings"
	"testing"
	"time"

	"plumbline/model/finding"
)

var t0 = time.Date(2026, 3, 1, 0, 0, 0, 0, time.UTC)

func at(h float64) time.Time { return t0.Add(time.Duration(h * float64(time.Hour))) }

func cands(ids ...string) []finding.Candidate {
	out := make([]finding.Candidate, len(ids))
	for i, id := range ids {
		out[i] = finding.Candidate{ID: id, Score: 1 - 0.1*float64(i)}
	}
	return out
}

func approx(t *testing.T, what string, got *float64, want, tol float64) {
	t.Helper()
	if got == nil {
		t.Errorf("%s: got null, want %g", what, want)
		return
	}
	if math.Abs(*got-want) > tol {
		t.Errorf("%s: got %g, want %g (difference %g, tolerance %g)", what, *got, want, *got-want, tol)
	}
}

// TestScoreMixed is a hand-scored case of every kind: an early finding, a
// detection, a finding of the wrong kind, a blockage found second-best, a
// sensor fault found first.
func TestScoreMixed(t *testing.T) {
	truth := []finding.Event{
		{Kind: finding.Leak, At: "E", Start: at(10), SizeLPS: 1.5},
		{Kind: finding.Blockage, At: "BC", Start: at(20), OpenFrac: 0.3},
		{Kind: finding.SensorFault, At: "P-1", Start: at(30), Mode: "drift", Amount: 0.5},
	}
	findings := []finding.Finding{
		{Kind: finding.Leak, Zone: "south", Raised: at(5), Candidates: cands("E")},             // 0: before the leak began: false
		{Kind: finding.Leak, Zone: "south", Raised: at(14), Candidates: cands("A", "E")},       // 1: detects the leak, rank 2, 400 m
		{Kind: finding.Blockage, Raised: at(19), Candidates: cands("BC")},                      // 2: before the blockage: false
		{Kind: finding.Leak, Zone: "south", Raised: at(22), Candidates: cands("C")},            // 3: wrong kind for the blockage, the leak already found: false
		{Kind: finding.Blockage, Zone: "south", Raised: at(26), Candidates: cands("CF", "BC")}, // 4: detects the blockage, rank 2, 150 m
		{Kind: finding.SensorFault, Zone: "north", Raised: at(31), Candidates: cands("P-1")},   // 5: detects the fault
	}
	r := Score(truth, findings, handNetwork(), Options{Start: t0, End: t0.Add(30 * 24 * time.Hour), SensorZones: map[string]string{"P-1": "north"}})

	if r.Observed.Days != 30 || r.Observed.Zones != 3 || r.Observed.ZonesFrom != "network" {
		t.Errorf("observed: got %+v, want 30 days, 3 zones from the network", r.Observed)
	}
	o := r.Overall
	if o.Events != 3 || o.Detected != 3 || o.Missed != 0 || *o.FalseFindings != 3 {
		t.Errorf("overall: got %d events %d detected %d missed %d false, want 3 3 0 3", o.Events, o.Detected, o.Missed, *o.FalseFindings)
	}
	// 3 false / (3 zones × 30 days / 30) = 1 per zone per 30 days.
	approx(t, "overall false per zone per 30 d", o.FalsePerZonePer30d, 1, 1e-12)
	approx(t, "leak false per zone per 30 d", r.ByKind.Leak.FalsePerZonePer30d, 2.0/3, 1e-12)
	approx(t, "blockage false per zone per 30 d", r.ByKind.Blockage.FalsePerZonePer30d, 1.0/3, 1e-12)
	approx(t, "sensor-fault false per zone per 30 d", r.ByKind.SensorFault.FalsePerZonePer30d, 0, 0)
	// Times to detect 4 h, 6 h, 1 h: median 4 h, max 6 h.
	approx(t, "TTD median", o.TimeToDetect.MedianS, 4*3600, 1e-9)
	approx(t, "TTD max", o.TimeToDetect.MaxS, 6*3600, 1e-9)
	if o.TimeToDetect.Median != "4h0m0s" || o.TimeToDetect.Max != "6h0m0s" {
		t.Errorf("TTD strings: got %q %q", o.TimeToDetect.Median, o.TimeToDetect.Max)
	}

	leak, block, fault := r.Events[0], r.Events[1], r.Events[2]
	if !leak.Detected || *leak.Finding != 1 || leak.Rank != 2 || leak.BestCandidate != "A" || leak.Zone != "south" {
		t.Errorf("leak: got %+v", leak)
	}
	approx(t, "leak distance A→E (by hand: A-B-E)", leak.DistanceM, 400, 1e-9)
	if leak.Localised == nil || *leak.Localised {
		t.Errorf("leak 400 m away is not localised within 300 m")
	}
	if !block.Detected || *block.Finding != 4 || block.Rank != 2 || block.Zone != "south" {
		t.Errorf("blockage: got %+v", block)
	}
	approx(t, "blockage distance CF→BC (by hand: 50 + 100)", block.DistanceM, 150, 1e-9)
	if block.Localised == nil || !*block.Localised {
		t.Errorf("blockage 150 m away is localised")
	}
	if !fault.Detected || fault.Rank != 1 || fault.DistanceM != nil || fault.Localised != nil || fault.Zone != "north" {
		t.Errorf("sensor fault: got %+v, want rank 1 and no distance", fault)
	}
	approx(t, "fault TTD", fault.TimeToDetectS, 3600, 1e-9)

	// Localisation summaries: 1 top-1 (the fault), 3 ranked, 2 leaks and
	// blockages measured, 1 of 2 within 300 m.
	l := o.Localisation
	if l.Top1 != 1 || l.Ranked != 3 || l.Measured != 2 || l.Within != 1 {
		t.Errorf("localisation: got %+v", l)
	}
	approx(t, "within fraction", l.WithinFraction, 0.5, 1e-12)
	approx(t, "median distance (150, 400)", l.MedianDistanceM, 275, 1e-9)
	approx(t, "max distance", l.MaxDistanceM, 400, 1e-9)
	approx(t, "median rank (2, 2, 1)", l.MedianRank, 2, 0)
	if r.ByKind.SensorFault.Localisation.WithinFraction != nil {
		t.Errorf("sensor faults have no distance figures")
	}

	wantFalse := map[int]string{
		0: "raised before any leak event it could detect had started",
		2: "raised before any blockage event it could detect had started",
		3: "every event it could detect was detected by an earlier finding",
	}
	if len(r.FalseFindings) != len(wantFalse) {
		t.Fatalf("false findings: got %+v, want indexes 0, 2, 3", r.FalseFindings)
	}
	for _, ff := range r.FalseFindings {
		if want, ok := wantFalse[ff.Index]; !ok || ff.Reason != want {
			t.Errorf("false finding %d: got reason %q, want %q", ff.Index, ff.Reason, want)
		}
	}
	// Finding 2 has no zone: it takes that of its best candidate BC, the
	// zone of its To node C: south.
	if r.FalseFindings[1].Zone != "south" {
		t.Errorf("zone from the best candidate: got %q, want south", r.FalseFindings[1].Zone)
	}
	if len(r.FalseByZone) != 1 || r.FalseByZone[0].Zone != "south" || r.FalseByZone[0].Count != 3 {
		t.Errorf("false by zone: got %+v, want south 3", r.FalseByZone)
	}
}

// TestTwoEventsOneFinding: one finding cannot detect two events. It goes
// to the event that started nearest before it; a later finding takes the
// other.
func TestTwoEventsOneFinding(t *testing.T) {
	truth := []finding.Event{
		{Kind: finding.Leak, At: "A", Start: at(1), SizeLPS: 1},
		{Kind: finding.Leak, At: "F", Start: at(2), SizeLPS: 1},
	}
	one := []finding.Finding{{Kind: finding.Leak, Raised: at(3), Candidates: cands("A")}}
	r := Score(truth, one, nil, Options{})
	if r.Events[0].Detected || !r.Events[1].Detected || r.Overall.Detected != 1 || r.Overall.Missed != 1 || *r.Overall.FalseFindings != 0 {
		t.Errorf("one finding: got %+v", r.Events)
	}
	if r.Events[1].Rank != 0 {
		t.Errorf("rank of F among [A]: got %d, want 0 (absent)", r.Events[1].Rank)
	}
	two := append(one, finding.Finding{Kind: finding.Leak, Raised: at(4), Candidates: cands("A")})
	r = Score(truth, two, nil, Options{})
	if !r.Events[0].Detected || *r.Events[0].Finding != 1 || r.Overall.Detected != 2 {
		t.Errorf("two findings: got %+v", r.Events)
	}
	approx(t, "TTD of the first leak", r.Events[0].TimeToDetectS, 3*3600, 1e-9)
	if r.Events[0].DistanceM != nil || r.Events[0].Localised != nil || r.Overall.Localisation.WithinFraction != nil {
		t.Errorf("no network: distances must be null")
	}
}

// TestTieOnStart: two events starting together; the finding goes to the
// event whose true element ranks best among its candidates.
func TestTieOnStart(t *testing.T) {
	truth := []finding.Event{
		{Kind: finding.Leak, At: "A", Start: at(1), SizeLPS: 1},
		{Kind: finding.Leak, At: "F", Start: at(1), SizeLPS: 1},
	}
	for _, c := range []struct {
		cands []string
		want  int
	}{{[]string{"F", "A"}, 1}, {[]string{"A", "F"}, 0}, {[]string{"X"}, 0}} {
		r := Score(truth, []finding.Finding{{Kind: finding.Leak, Raised: at(2), Candidates: cands(c.cands...)}}, nil, Options{})
		if !r.Events[c.want].Detected || r.Events[1-c.want].Detected {
			t.Errorf("candidates %v: want event %d detected, got %+v", c.cands, c.want, r.Events)
		}
	}
}

// TestZones: a finding in another zone neither detects nor is excused;
// AnyZone lifts the restriction; a finding with no event of its kind is
// false.
func TestZones(t *testing.T) {
	truth := []finding.Event{{Kind: finding.Leak, At: "G", Start: at(1), SizeLPS: 3}}
	findings := []finding.Finding{
		{Kind: finding.Leak, Zone: "north", Raised: at(2), Candidates: cands("A")},
		{Kind: finding.SensorFault, Zone: "north", Raised: at(3), Candidates: cands("P-7")},
	}
	r := Score(truth, findings, handNetwork(), Options{})
	if r.Events[0].Detected || r.Events[0].Zone != "east" {
		t.Errorf("leak in east found in north: want missed, got %+v", r.Events[0])
	}
	if len(r.FalseFindings) != 2 || r.FalseFindings[0].Reason != "no leak event in zone north" ||
		r.FalseFindings[1].Reason != "no sensor-fault event in the truth" {
		t.Errorf("false findings: got %+v", r.FalseFindings)
	}
	r = Score(truth, findings, handNetwork(), Options{AnyZone: true})
	if !r.Events[0].Detected || len(r.FalseFindings) != 1 {
		t.Errorf("AnyZone: want detected, got %+v", r.Events[0])
	}
	// A is not connected to G: the distance cannot be measured, so the
	// detection is not localised.
	if r.Events[0].DistanceM != nil || r.Events[0].Localised == nil || *r.Events[0].Localised {
		t.Errorf("unreachable best candidate: got distance %v localised %v", r.Events[0].DistanceM, r.Events[0].Localised)
	}
	approx(t, "within fraction", r.Overall.Localisation.WithinFraction, 0, 0)
}

func TestMaxDelay(t *testing.T) {
	truth := []finding.Event{{Kind: finding.Blockage, At: "BE", Start: at(0), OpenFrac: 0.5}}
	findings := []finding.Finding{{Kind: finding.Blockage, Raised: at(50), Candidates: cands("BE")}}
	r := Score(truth, findings, handNetwork(), Options{MaxDelay: 48 * time.Hour})
	if r.Events[0].Detected || len(r.FalseFindings) != 1 ||
		r.FalseFindings[0].Reason != "raised later than the maximum delay after every event it could detect" {
		t.Errorf("late finding: got %+v %+v", r.Events, r.FalseFindings)
	}
	r = Score(truth, findings, handNetwork(), Options{})
	if !r.Events[0].Detected || r.Events[0].DistanceM == nil || *r.Events[0].DistanceM != 0 {
		t.Errorf("no delay limit: got %+v", r.Events[0])
	}
}

// TestRaisedAtStart: a finding raised at the very start detects (after or
// at the start), with time to detect 0.
func TestRaisedAtStart(t *testing.T) {
	truth := []finding.Event{{Kind: finding.Leak, At: "B", Start: at(5), SizeLPS: 1}}
	r := Score(truth, []finding.Finding{{Kind: finding.Leak, Raised: at(5), Candidates: cands("B")}}, handNetwork(), Options{})
	if !r.Events[0].Detected {
		t.Fatalf("want detected")
	}
	approx(t, "TTD", r.Events[0].TimeToDetectS, 0, 0)
}

// TestLeakBandsAndMedian: bands split at 2 L/s (2 itself is large), the
// median of an even count is the mean of the middle two.
func TestLeakBandsAndMedian(t *testing.T) {
	truth := []finding.Event{
		{Kind: finding.Leak, At: "A", Start: at(0), SizeLPS: 0.5},
		{Kind: finding.Leak, At: "C", Start: at(10), SizeLPS: 1.99},
		{Kind: finding.Leak, At: "D", Start: at(20), SizeLPS: 2},
		{Kind: finding.Leak, At: "F", Start: at(30), SizeLPS: 6},
	}
	findings := []finding.Finding{
		{Kind: finding.Leak, Raised: at(8), Candidates: cands("A")},  // A: 8 h
		{Kind: finding.Leak, Raised: at(21), Candidates: cands("D")}, // D: 1 h
		{Kind: finding.Leak, Raised: at(33), Candidates: cands("F")}, // F: 3 h
	}
	r := Score(truth, findings, handNetwork(), Options{})
	small, large := r.LeakBands[0], r.LeakBands[1]
	if small.Events != 2 || small.Detected != 1 || large.Events != 2 || large.Detected != 2 {
		t.Errorf("bands: got small %+v large %+v", small, large)
	}
	if small.FalseFindings != nil || small.FalsePerZonePer30d != nil {
		t.Errorf("bands carry no false-finding figures")
	}
	approx(t, "leak TTD median of 8, 1, 3 h", r.ByKind.Leak.TimeToDetect.MedianS, 3*3600, 1e-9)
	approx(t, "large TTD median of 1, 3 h (mean of two)", large.TimeToDetect.MedianS, 2*3600, 1e-9)
	approx(t, "detection rate", r.ByKind.Leak.DetectionRate, 0.75, 1e-12)
	// Observed span from the data: 0 h to 33 h; zones from the network.
	if !r.Observed.Start.Equal(at(0)) || !r.Observed.End.Equal(at(33)) {
		t.Errorf("observed: got %s to %s, want %s to %s", r.Observed.Start, r.Observed.End, at(0), at(33))
	}
}

// TestObservedFromData: without options or network the period runs from
// the first event to the last finding and zones are counted from the data.
func TestObservedFromData(t *testing.T) {
	truth := []finding.Event{{Kind: finding.Leak, At: "J-1", Zone: "north", Start: at(0), SizeLPS: 1}}
	findings := []finding.Finding{
		{Kind: finding.Leak, Zone: "west", Raised: at(15 * 24)},
	}
	r := Score(truth, findings, nil, Options{})
	if r.Observed.Days != 15 || r.Observed.Zones != 2 || r.Observed.ZonesFrom != "truth and findings" {
		t.Errorf("observed: got %+v", r.Observed)
	}
	// 1 false / (2 zones × 15/30) = 1.
	approx(t, "false per zone per 30 d", r.Overall.FalsePerZonePer30d, 1, 1e-12)
	approx(t, "west per 30 d", r.FalseByZone[0].Per30d, 2, 1e-12)
	empty := Score(nil, nil, nil, Options{})
	if empty.Overall.DetectionRate != nil || empty.Overall.FalsePerZonePer30d != nil || empty.Overall.TimeToDetect.MedianS != nil {
		t.Errorf("nothing to measure: want nulls, got %+v", empty.Overall)
	}
}

// TestJSONNames checks the JSON keys are snake_case and nulls stay null.
func TestJSONNames(t *testing.T) {
	truth := []finding.Event{{Kind: finding.SensorFault, At: "P-1", Start: at(0)}}
	r := Score(truth, nil, nil, Options{Start: t0, End: at(24)})
	b, err := json.Marshal(r)
	if err != nil {
		t.Fatal(err)
	}
	var m map[string]any
	if err := json.Unmarshal(b, &m); err != nil {
		t.Fatal(err)
	}
	for _, k := range []string{"observed", "overall", "by_kind", "leak_bands", "events", "false_findings", "false_by_zone"} {
		if _, ok := m[k]; !ok {
			t.Errorf("missing key %q in %s", k, b)
		}
	}
	bk := m["by_kind"].(map[string]any)
	for _, k := range []string{"leak", "blockage", "sensor_fault"} {
		if _, ok := bk[k]; !ok {
			t.Errorf("by_kind: missing %q", k)
		}
	}
	ov := m["overall"].(map[string]any)
	for _, k := range []string{"detection_rate", "false_findings", "false_per_zone_per_30d", "time_to_detect", "localisation"} {
		if _, ok := ov[k]; !ok {
			t.Errorf("overall: missing %q", k)
		}
	}
	ttd := ov["time_to_detect"].(map[string]any)
	if v, ok := ttd["median_s"]; !ok || v != nil {
		t.Errorf("time_to_detect.median_s: want null, got %v", v)
	}
	if !strings.Contains(string(b), `"distance_m":null`) {
		t.Errorf("a missed event has distance_m null: %s", b)
	}
}

func TestWriteText(t *testing.T) {
	truth := []finding.Event{
		{Kind: finding.Leak, At: "E", Start: at(10), SizeLPS: 1.5},
		{Kind: finding.Blockage, At: "BC", Start: at(20), OpenFrac: 0.3},
	}
	findings := []finding.Finding{
		{Kind: finding.Leak, Raised: at(14), Candidates: cands("F", "E")}, // zone south from F
		{Kind: finding.Leak, Zone: "north", Raised: at(40), Candidates: cands("A")},
	}
	r := Score(truth, findings, handNetwork(), Options{Start: t0, End: at(30 * 24)})
	var buf bytes.Buffer
	if err := WriteText(&buf, &r); err != nil {
		t.Fatal(err)
	}
	out := buf.String()
	for _, want := range []string{
		"observed 2026-03-01T00:00Z to 2026-03-31T00:00Z (30.0 days), 3 zone(s) (from network)",
		"group", "false/zone/30d", "leak <2 L/s", "leak ≥2 L/s",
		"events", "4h0m0s", " 80 ", // leak found 4 h after start, F→E 80 m
		"false findings", "by zone: north 1 (1.00 per 30 days)",
	} {
		if !strings.Contains(out, want) {
			t.Errorf("text output lacks %q:\n%s", want, out)
		}
	}
	if strings.Count(out, "\n") < 12 {
		t.Errorf("text output too short:\n%s", out)
	}
}
