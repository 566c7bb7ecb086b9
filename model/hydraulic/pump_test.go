package hydraulic

import (
	"math"
	"testing"
)

func TestFitPumpCurveThreePoints(t *testing.T) {
	// Through three points exactly (the curve H = A − B Q^C has three
	// parameters), including a first point off zero flow.
	for _, pts := range [][][2]float64{
		{{0, 60}, {30, 50}, {50, 30}},
		{{5, 80}, {20, 72}, {40, 40}},
		{{0, 40}, {10, 39}, {20, 20}},
	} {
		c, err := FitPumpCurve(pts)
		if err != nil {
			t.Fatalf("%v: %v", pts, err)
		}
		for _, p := range pts {
			if got := c.Head(p[0], 1); math.Abs(got-p[1]) > 1e-9 {
				t.Errorf("%v: H(%g)=%.12g, want %g", pts, p[0], got, p[1])
			}
		}
	}
	// Known curve: H = 60 − 0.01 Q² gives A, B, C back.
	c, err := FitPumpCurve([][2]float64{{0, 60}, {20, 56}, {50, 35}})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(c.A-60) > 1e-9 || math.Abs(c.B-0.01) > 1e-9 || math.Abs(c.C-2) > 1e-9 {
		t.Errorf("fit %+v, want A=60 B=0.01 C=2", c)
	}
}

func TestFitPumpCurveOnePointAndLeastSquares(t *testing.T) {
	// One-point rule (common practice, from memory): shutoff 4/3 H at Q=0,
	// zero head at 2Q, the design point on the curve.
	c, err := FitPumpCurve([][2]float64{{25, 45}})
	if err != nil {
		t.Fatal(err)
	}
	if got := c.Head(25, 1); math.Abs(got-45) > 1e-12 {
		t.Errorf("H(design)=%g, want 45", got)
	}
	if got := c.Shutoff(1); math.Abs(got-60) > 1e-12 {
		t.Errorf("shutoff %g, want 60", got)
	}
	if got := c.MaxFlow(1); math.Abs(got-50) > 1e-9 {
		t.Errorf("zero-head flow %g, want 50", got)
	}
	// Least squares recovers a curve sampled at five points exactly
	// (H = 70 − 0.5 Q^1.6).
	var pts [][2]float64
	for q := 0.0; q <= 20; q += 5 {
		pts = append(pts, [2]float64{q, 70 - 0.5*math.Pow(q, 1.6)})
	}
	c, err = FitPumpCurve(pts)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(c.A-70) > 1e-6 || math.Abs(c.B-0.5) > 1e-6 || math.Abs(c.C-1.6) > 1e-6 {
		t.Errorf("least squares %+v, want A=70 B=0.5 C=1.6", c)
	}
	// Affinity laws (e.g. Karassik, Pump Handbook): at speed s the flow
	// scales by s and the head by s²: H_s(sQ) = s² H_1(Q).
	for _, s := range []float64{0.7, 0.9, 1.2} {
		for _, q := range []float64{0, 5, 12} {
			if got, want := c.Head(s*q, s), s*s*c.Head(q, 1); math.Abs(got-want) > 1e-9 {
				t.Errorf("s=%g q=%g: H=%g, affinity %g", s, q, got, want)
			}
		}
	}
	// Bad curves are errors.
	for _, bad := range [][][2]float64{nil, {{0, 10}, {5, 12}}, {{-1, 10}}, {{10, 0}}} {
		if _, err := FitPumpCurve(bad); err == nil {
			t.Errorf("%v: no error", bad)
		}
	}
}
