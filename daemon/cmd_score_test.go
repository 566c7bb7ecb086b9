package main

import (
	"bytes"
	"context"
	"encoding/json"
	"math"
	"os"
	"strings"
	"testing"
)

const scoreData = "../testdata/score/"

func scoreRun(t *testing.T, args ...string) (int, string, string) {
	t.Helper()
	var out, errb bytes.Buffer
	code := dispatch(context.Background(), args, &out, &errb)
	return code, out.String(), errb.String()
}

// TestScoreJSON runs `plumbline score --json` on testdata/score and checks
// the figures worked out by hand for those files (five events, six
// findings, the town network; see the comments).
func TestScoreJSON(t *testing.T) {
	code, out, errs := scoreRun(t, "score", "--truth", scoreData+"truth.json", "--findings", scoreData+"findings.json",
		"--network", scoreData+"town.geojson", "--from", "2026-03-01T00:00:00Z", "--to", "2026-03-15T00:00:00Z", "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var r struct {
		Observed struct {
			Days  float64 `json:"days"`
			Zones int     `json:"zones"`
		} `json:"observed"`
		Overall struct {
			Events, Detected, Missed int
			FalseFindings            int      `json:"false_findings"`
			FalseRate                *float64 `json:"false_per_zone_per_30d"`
			TimeToDetect             struct {
				MedianS *float64 `json:"median_s"`
				MaxS    *float64 `json:"max_s"`
			} `json:"time_to_detect"`
			Localisation struct {
				WithinFraction *float64 `json:"within_fraction"`
			} `json:"localisation"`
		} `json:"overall"`
		Events []struct {
			At        string   `json:"at"`
			Detected  bool     `json:"detected"`
			Rank      int      `json:"rank"`
			DistanceM *float64 `json:"distance_m"`
		} `json:"events"`
		FalseFindings []struct {
			Index int `json:"index"`
		} `json:"false_findings"`
	}
	if err := json.Unmarshal([]byte(out), &r); err != nil {
		t.Fatalf("output is not the report JSON: %v\n%s", err, out)
	}
	o := r.Overall
	if r.Observed.Days != 14 || r.Observed.Zones != 3 {
		t.Errorf("observed: got %g days %d zones, want 14 and 3 (hill, north, south)", r.Observed.Days, r.Observed.Zones)
	}
	// Leak J-2 is never found; findings 0 (before any leak) and 5 (a second
	// leak finding in the south, whose leak was already found) are false.
	if o.Events != 5 || o.Detected != 4 || o.Missed != 1 || o.FalseFindings != 2 {
		t.Errorf("counts: got %+v, want 5 events 4 detected 1 missed 2 false", o)
	}
	if len(r.FalseFindings) != 2 || r.FalseFindings[0].Index != 0 || r.FalseFindings[1].Index != 5 {
		t.Errorf("false findings: got %+v, want 0 and 5", r.FalseFindings)
	}
	// 2 false / (3 zones × 14 days / 30) = 1.4285714…
	check := func(what string, got *float64, want float64) {
		t.Helper()
		if got == nil || math.Abs(*got-want) > 1e-9 {
			t.Errorf("%s: got %v, want %g (tolerance 1e-9)", what, got, want)
		}
	}
	check("false per zone per 30 days", o.FalseRate, 2/(3*14.0/30))
	// Times to detect 6 h, 3 h, 10 h, 1.5 h: median 4.5 h, max 10 h.
	check("TTD median", o.TimeToDetect.MedianS, 4.5*3600)
	check("TTD max", o.TimeToDetect.MaxS, 10*3600)
	// J-1 → J-3 along pipes: J-1-J-2-J-3 = 150 + 250 = 400 m (the other
	// way round the loop, 120 + 300 + 400 = 820 m).
	if e := r.Events[0]; !e.Detected || e.Rank != 2 {
		t.Errorf("leak J-3: got %+v, want detected with rank 2", e)
	}
	check("distance J-1 to J-3", r.Events[0].DistanceM, 400)
	check("distance J-5 to itself", r.Events[1].DistanceM, 0)
	// Within 300 m: leak J-5 and blockage P-3, not leak J-3: 2 of 3.
	check("localised fraction", o.Localisation.WithinFraction, 2.0/3)
}

func TestScoreText(t *testing.T) {
	code, out, errs := scoreRun(t, "score", "--truth", scoreData+"truth.json", "--findings", scoreData+"findings.json",
		"--network", scoreData+"town.geojson", "--from", "2026-03-01T00:00:00Z", "--to", "2026-03-15T00:00:00Z")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	for _, want := range []string{"(14.0 days), 3 zone(s)", "false/zone/30d", "1.43", "4h30m0s", "10h0m0s", "67%", "false findings"} {
		if !strings.Contains(out, want) {
			t.Errorf("text lacks %q:\n%s", want, out)
		}
	}
}

// TestScoreWithoutNetwork: distances are null, zones come from the files.
func TestScoreWithoutNetwork(t *testing.T) {
	code, out, errs := scoreRun(t, "score", "--truth", scoreData+"truth.json", "--findings", scoreData+"findings.json", "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	if !strings.Contains(out, `"distance_m": null`) || strings.Contains(out, `"distance_m": 0`) {
		t.Errorf("want null distances without a network:\n%s", out)
	}
	if !strings.Contains(out, `"zones_from": "truth and findings"`) {
		t.Errorf("want zones from the files")
	}
}

// TestScoreBadFiles: every problem is listed with file, line and index,
// and the command fails.
func TestScoreBadFiles(t *testing.T) {
	code, _, errs := scoreRun(t, "score", "--truth", scoreData+"bad-truth.json", "--findings", scoreData+"bad-findings.json",
		"--network", scoreData+"town.geojson")
	if code == 0 {
		t.Fatal("want a non-zero exit")
	}
	for _, want := range []string{
		`bad-truth.json:3: [1]: unknown kind "lek" (leak, blockage or sensor-fault)`,
		`bad-truth.json:4: [2]: at is missing`,
		`bad-truth.json:5: [3]: start: "yesterday" is not an RFC 3339 time`,
		`bad-truth.json:6: [4]: blockage at "P-99": no such node or link in the network`,
		`bad-truth.json:7: [5]: size_lps: want a number, got JSON string`,
		`bad-findings.json:3: [1]: raised is missing`,
		`bad-findings.json:4: [2]: candidates[0]: id is missing`,
		`bad-findings.json:5: [3]: unknown kind "valve" (leak, blockage or sensor-fault)`,
	} {
		if !strings.Contains(errs, want) {
			t.Errorf("stderr lacks %q:\n%s", want, errs)
		}
	}
	if n := strings.Count(errs, "\n"); n != 8 {
		t.Errorf("want 8 problems, got %d lines:\n%s", n, errs)
	}

	code, _, errs = scoreRun(t, "score", "--truth", scoreData+"syntax.json", "--findings", scoreData+"findings.json")
	if code == 0 || !strings.Contains(errs, `syntax.json:3: [1]: invalid character`) {
		t.Errorf("syntax error: exit %d, stderr %q", code, errs)
	}
	code, _, errs = scoreRun(t, "score", "--truth", scoreData+"truth.json")
	if code == 0 || !strings.Contains(errs, "--truth and --findings are required") {
		t.Errorf("missing flag: exit %d, stderr %q", code, errs)
	}
	code, _, errs = scoreRun(t, "score", "--truth", scoreData+"truth.json", "--findings", scoreData+"findings.json", "--from", "monday")
	if code == 0 || !strings.Contains(errs, `--from "monday": not an RFC 3339 time`) {
		t.Errorf("bad --from: exit %d, stderr %q", code, errs)
	}
	code, _, errs = scoreRun(t, "score", "--truth", scoreData+"missing.json", "--findings", scoreData+"findings.json")
	if code == 0 || !strings.Contains(errs, "missing.json") {
		t.Errorf("missing file: exit %d, stderr %q", code, errs)
	}
}

// FuzzScoreLists feeds arbitrary bytes to the truth and findings readers.
// Properties: no panic; every problem names the file; an accepted list
// holds only elements of known kinds with their times set.
func FuzzScoreLists(f *testing.F) {
	for _, name := range []string{"truth.json", "findings.json", "bad-truth.json", "bad-findings.json", "syntax.json"} {
		data, err := os.ReadFile(scoreData + name)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(data)
	}
	f.Add([]byte("null"))
	f.Add([]byte("[]"))
	f.Add([]byte("{}"))
	f.Fuzz(func(t *testing.T, data []byte) {
		truth, err := parseTruth(data, "t.json", nil)
		if err != nil && !strings.HasPrefix(err.Error(), "t.json:") {
			t.Errorf("truth: message without the file: %v", err)
		}
		for _, e := range truth {
			if !knownKind(e.Kind) || e.At == "" || e.Start.IsZero() {
				t.Errorf("accepted a bad event %+v", e)
			}
		}
		findings, err := parseFindings(data, "f.json")
		if err != nil && !strings.HasPrefix(err.Error(), "f.json:") {
			t.Errorf("findings: message without the file: %v", err)
		}
		for _, fd := range findings {
			if !knownKind(fd.Kind) || fd.Raised.IsZero() {
				t.Errorf("accepted a bad finding %+v", fd)
			}
		}
	})
}
