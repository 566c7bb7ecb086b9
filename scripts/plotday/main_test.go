package main

import (
	"bytes"
	"math"
	"strings"
	"testing"
	"time"

	"plumbline/model/telemetry"
)

const sample = `time,sensor,value,unit
2026-03-03T23:55:00Z,F-in,36,m3/h
2026-03-04T00:00:00Z,F-in,36,m3/h
2026-03-04T00:00:00Z,P-1,1,bar
2026-03-04T00:00:00Z,P-2,9,bar
2026-03-04T12:00:00Z,F-in,72,m3/h,good
2026-03-04T12:00:00Z,P-1,2,bar
2026-03-05T00:00:00Z,F-in,99,m3/h
`

func TestReadDayConvertsAndFilters(t *testing.T) {
	from := time.Date(2026, 3, 4, 0, 0, 0, 0, time.UTC)
	want := map[string]telemetry.Quantity{"F-in": telemetry.Flow, "P-1": telemetry.Pressure}
	got, err := readDay(strings.NewReader(sample), "sample.csv", from, from.Add(24*time.Hour), want)
	if err != nil {
		t.Fatal(err)
	}
	// The day is [00:00, 24:00): the readings before and at the next
	// midnight are left out, and P-2 was not asked for.
	if len(got["F-in"]) != 2 || len(got["P-1"]) != 2 || len(got["P-2"]) != 0 {
		t.Fatalf("got %d flow, %d P-1, %d P-2 readings; want 2, 2, 0", len(got["F-in"]), len(got["P-1"]), len(got["P-2"]))
	}
	// 36 m3/h = 10 L/s exactly (1 m3 = 1000 L, 1 h = 3600 s).
	if v := got["F-in"][0].Y; math.Abs(v-10) > 1e-12 {
		t.Errorf("36 m3/h: got %v L/s, want 10 (tolerance 1e-12)", v)
	}
	// 1 bar = 1e5 Pa / (1000 kg/m3 × 9.80665 m/s2) = 10.197 m of water
	// (standard gravity, CGPM 1901; fresh water taken at 1000 kg/m3).
	if v := got["P-1"][0].Y; math.Abs(v-10.197) > 0.01 {
		t.Errorf("1 bar: got %v m, want 10.197 m (tolerance 0.01 m)", v)
	}
}

func TestReadDayNamesBadLine(t *testing.T) {
	bad := "time,sensor,value,unit\n2026-03-04T00:00:00Z,F-in,lots,m3/h\n"
	from := time.Date(2026, 3, 4, 0, 0, 0, 0, time.UTC)
	_, err := readDay(strings.NewReader(bad), "bad.csv", from, from.Add(24*time.Hour), map[string]telemetry.Quantity{"F-in": telemetry.Flow})
	if err == nil || !strings.Contains(err.Error(), "bad.csv:2") {
		t.Fatalf("got error %v, want one naming bad.csv:2", err)
	}
}

func TestDrawIsDeterministic(t *testing.T) {
	from := time.Date(2026, 3, 4, 0, 0, 0, 0, time.UTC)
	want := map[string]telemetry.Quantity{"F-in": telemetry.Flow, "P-1": telemetry.Pressure}
	s, err := readDay(strings.NewReader(sample), "sample.csv", from, from.Add(24*time.Hour), want)
	if err != nil {
		t.Fatal(err)
	}
	a, err := draw2(s["F-in"], s["P-1"], "F-in", "P-1", "a day", false)
	if err != nil {
		t.Fatal(err)
	}
	b, err := draw2(s["F-in"], s["P-1"], "F-in", "P-1", "a day", false)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(a, b) {
		t.Error("two drawings of the same readings differ")
	}
	for _, w := range []string{"<svg", "F-in, L/s", "P-1, m", "12:00"} {
		if !bytes.Contains(a, []byte(w)) {
			t.Errorf("SVG lacks %q", w)
		}
	}
}
