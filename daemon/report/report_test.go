package report

import (
	"bytes"
	"encoding/csv"
	"flag"
	"math"
	"os"
	"strings"
	"testing"

	"plumbline/model/detect"
	"plumbline/model/telemetry"
)

var update = flag.Bool("update", false, "rewrite the golden files")

func near(t *testing.T, what string, got *float64, want, tol float64) {
	t.Helper()
	if got == nil {
		t.Errorf("%s = null, want %.6g", what, want)
		return
	}
	// tol is relative (absolute below 1): the summary keeps 9 significant digits.
	if d := math.Abs(*got - want); d > tol*math.Max(1, math.Abs(want)) {
		t.Errorf("%s = %.9g, want %.9g (difference %.3g, tolerance %.1g relative)", what, *got, want, d, tol)
	}
}

func val(x float64) *float64 { return &x }

// Every figure of the small scenario against its value worked out by
// hand (see scenario_test.go): volumes are flow × time, the night-day
// factor Σ_h (P_h/P_night)^N1 (Lambert 2001; FAVAD, May 1994), UARL =
// (18·Lm + 0.8·Nc + 25·Lp)·P (Lambert et al. 1999) with south's
// configured 20 km, 2000 connections, 30 km and 50 m:
//
//	UARL = (360 + 1600 + 750) × 50 = 135 500 L/day
//	south real losses = 7/6 L/s × 3.6 × 19.5 h = 81.9 m³/day
//	ILI = 81 900 / 135 500 = 0.604428...
func TestScenarioFiguresByHand(t *testing.T) {
	r := buildScenario(t, 0)
	s := r.Summary
	north, south := s.Zones[0], s.Zones[1]
	const tol = 1e-8
	near(t, "north inflow m³", val(north.InflowM3), 8*3*86400/1000.0, tol)
	near(t, "south inflow m³", val(south.InflowM3), 5*3*86400/1000.0+259.2, tol)
	near(t, "south imbalance m³", val(south.ImbalanceM3), 259.2, tol)
	near(t, "north imbalance m³", val(north.ImbalanceM3), 0, tol)
	// Mass balance: imbalance = inflow − expected, in every zone and the network.
	for _, z := range append(s.Zones, s.Network) {
		near(t, z.Zone+" inflow − expected − imbalance", val(z.InflowM3-z.ExpectedM3-z.ImbalanceM3), 0, 1e-9)
	}
	near(t, "network imbalance m³", val(s.Network.ImbalanceM3), 259.2, tol)
	near(t, "south NDF", south.NDFHours, 19.5, tol)
	near(t, "north NDF", north.NDFHours, 19.5, tol)
	near(t, "south night pressure", south.NightPressureM, 60, tol)
	near(t, "south mean pressure", south.MeanPressureM, (6*60+18*45)/24.0, tol)
	near(t, "south night excess", south.NightExcessLPS, 7.0/6, tol)
	near(t, "north night excess", north.NightExcessLPS, 0.3, tol)
	near(t, "south real losses m³/day", south.RealLossesM3PerDay, 81.9, tol)
	near(t, "south real losses L/s", south.RealLossesLPS, 81.9/86.4, tol)
	near(t, "north real losses m³/day", north.RealLossesM3PerDay, 21.06, tol)
	near(t, "south UARL", south.UARLLPerDay, 135500, tol)
	near(t, "south ILI", south.ILI, 81900.0/135500, tol)
	if north.UARLLPerDay != nil || north.ILI != nil || s.Network.ILI != nil {
		t.Errorf("UARL/ILI given without mains length and connections: north %v %v network %v", north.UARLLPerDay, north.ILI, s.Network.ILI)
	}
	near(t, "network real losses", s.Network.RealLossesM3PerDay, 81.9+21.06, tol)
	near(t, "south missing fraction", val(south.MissingFraction), 60.0/(2*864), tol)
	near(t, "north fault fraction", val(north.FaultFraction), 36.0/(2*864), tol)
	if len(s.Findings) != 3 || s.Findings[0].Label != "F1" {
		t.Fatalf("findings: %+v", s.Findings)
	}
	near(t, "F1 volume lost m³", s.Findings[0].VolumeLostM3, 259.2, tol)
	if s.Findings[1].VolumeLostM3 != nil || s.Findings[2].VolumeLostM3 != nil {
		t.Errorf("volume lost given for a sensor fault or a blockage")
	}
	if north.Findings != 2 || south.Findings != 1 || s.Network.Findings != 3 {
		t.Errorf("findings per zone: north %d south %d network %d, want 2 1 3", north.Findings, south.Findings, s.Network.Findings)
	}
}

// Merging bins (a long period in few columns) changes no total and
// keeps the number of bins bounded: memory flat in the period's length.
func TestBinsStayBounded(t *testing.T) {
	wide := buildScenario(t, 0)
	narrow := buildScenario(t, 8)
	if a, b := wide.Summary.Zones[1].ImbalanceM3, narrow.Summary.Zones[1].ImbalanceM3; a != b {
		t.Errorf("imbalance with 1024 columns %v, with 8 columns %v", a, b)
	}
	for _, z := range narrow.b.zones {
		if len(z.bins) > 8 {
			t.Errorf("zone %s: %d bins, want at most 8", z.z.ID, len(z.bins))
		}
		// Mean inflow over all bins is still the step mean.
		sum, n := 0.0, 0
		for _, bin := range z.bins {
			sum += bin.inflow
			n += bin.n
		}
		if want := z.inflowM3 * 1000 / (float64(n) * 300); math.Abs(sum/float64(n)-want) > 1e-9 {
			t.Errorf("zone %s: binned mean inflow %v, exact %v", z.z.ID, sum/float64(n), want)
		}
	}
	for _, l := range narrow.b.loggers {
		if len(l.bins) > 8 {
			t.Errorf("logger %s: %d bins, want at most 8", l.id, len(l.bins))
		}
	}
	if narrow.b.width <= wide.b.width {
		t.Errorf("bin width %v with 8 columns, %v with 1024", narrow.b.width, wide.b.width)
	}
}

func TestAddRejectsBadSteps(t *testing.T) {
	cfg := loadSmall(t)
	b, _ := NewBuilder(Options{Config: cfg})
	var snaps []telemetry.Snapshot
	var ress []*detect.StepResult
	scenarioSteps(t, cfg, 3, func(s telemetry.Snapshot, r *detect.StepResult) { snaps, ress = append(snaps, s), append(ress, r) })
	if err := b.Add(snaps[2], ress[2]); err != nil {
		t.Fatal(err)
	}
	if err := b.Add(snaps[0], ress[0]); err == nil || !strings.Contains(err.Error(), "comes before") {
		t.Errorf("step out of order: err = %v", err)
	}
	short := *ress[2]
	short.Residual = short.Residual[:2]
	if err := b.Add(snaps[2], &short); err == nil {
		t.Error("short residuals: no error")
	}
	if _, err := NewBuilder(Options{Config: cfg, N1: -1}); err == nil {
		t.Error("negative N1: no error")
	}
}

// Golden file of the JSON summary of the small scenario (go test
// -update rewrites it); the figures in it are checked by hand above.
func TestSummaryGolden(t *testing.T) {
	var buf bytes.Buffer
	if err := buildScenario(t, 0).WriteJSON(&buf); err != nil {
		t.Fatal(err)
	}
	const golden = "testdata/small-summary.golden.json"
	if *update {
		if err := os.WriteFile(golden, buf.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(golden)
	if err != nil {
		t.Fatal(err)
	}
	if got := buf.String(); got != string(want) {
		gl, wl := strings.Split(got, "\n"), strings.Split(string(want), "\n")
		for i := 0; i < max(len(gl), len(wl)); i++ {
			var g, w string
			if i < len(gl) {
				g = gl[i]
			}
			if i < len(wl) {
				w = wl[i]
			}
			if g != w {
				t.Fatalf("summary differs from %s at line %d:\n got: %s\nwant: %s", golden, i+1, g, w)
			}
		}
	}
}

// The CSV summary has one row per zone and the network, with the JSON's
// numbers.
func TestCSVMatchesJSON(t *testing.T) {
	r := buildScenario(t, 0)
	var buf bytes.Buffer
	if err := r.WriteCSV(&buf); err != nil {
		t.Fatal(err)
	}
	recs, err := csv.NewReader(&buf).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if len(recs) != 4 || recs[3][0] != "network" || recs[2][0] != "south" {
		t.Fatalf("rows: %v", recs)
	}
	if got, want := recs[2][4], num(r.Summary.Zones[1].ImbalanceM3); got != want {
		t.Errorf("south imbalance in CSV %s, JSON %s", got, want)
	}
	if got, want := recs[2][15], num(*r.Summary.Zones[1].ILI); got != want {
		t.Errorf("south ILI in CSV %s, JSON %s", got, want)
	}
}

// The page is the same bytes run to run (golden-friendly, no map order
// or clock in it).
func TestHTMLDeterministic(t *testing.T) {
	var a, b bytes.Buffer
	na, err := buildScenario(t, 0).WriteHTML(&a)
	if err != nil {
		t.Fatal(err)
	}
	nb, _ := buildScenario(t, 0).WriteHTML(&b)
	if !bytes.Equal(a.Bytes(), b.Bytes()) || na != nb {
		t.Errorf("two renderings differ (%d and %d bytes)", a.Len(), b.Len())
	}
	// Self-contained: no script, no outside reference.
	page := a.String()
	for _, bad := range []string{"<script", `src="http`, `href="http`, "url(http", "@import"} {
		if strings.Contains(page, bad) {
			t.Errorf("page contains %q", bad)
		}
	}
	if !strings.Contains(page, "data:font/ttf;base64,") {
		t.Error("page embeds no font")
	}
}
