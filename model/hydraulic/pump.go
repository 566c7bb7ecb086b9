package hydraulic

import (
	"errors"
	"fmt"
	"math"
	"sort"
)

// PumpCurve is a pump head curve H = A − B·Q^C (H in m, Q in L/s) at
// nominal speed. At relative speed s the affinity laws (flow ∝ s, head ∝
// s²) give H = s²A − B·s^(2−C)·Q^C.
type PumpCurve struct {
	A, B, C float64
	// Method says how the curve was obtained: "one-point", "three-point"
	// or "least-squares".
	Method string
}

// Head returns the head gain (m) of the pump at flow q ≥ 0 (L/s) and
// relative speed s.
func (pc PumpCurve) Head(q, s float64) float64 {
	return s*s*pc.A - pc.B*math.Pow(s, 2-pc.C)*math.Pow(q, pc.C)
}

// Slope returns dH/dq (m per L/s, ≤ 0) at flow q > 0 and speed s.
func (pc PumpCurve) Slope(q, s float64) float64 {
	return -pc.B * pc.C * math.Pow(s, 2-pc.C) * math.Pow(q, pc.C-1)
}

// Shutoff returns the head at zero flow, s²A (m).
func (pc PumpCurve) Shutoff(s float64) float64 { return s * s * pc.A }

// MaxFlow returns the flow at zero head, s·(A/B)^(1/C) (L/s).
func (pc PumpCurve) MaxFlow(s float64) float64 {
	return s * math.Pow(pc.A/pc.B, 1/pc.C)
}

// FitPumpCurve fits H = A − B·Q^C to the curve points (flow L/s, head m).
//
//   - One point (Q1, H1): the common-practice one-point rule (from
//     memory): shutoff head 4/3·H1 at zero flow and zero head at 2·Q1,
//     which gives C = 2 exactly, A = 4H1/3, B = H1/(3Q1²).
//   - Three points: the curve passes exactly through all three; C is the
//     root of (H1−H2)/(H1−H3) = (Q2^C−Q1^C)/(Q3^C−Q1^C) found by
//     bisection, then B and A follow.
//   - Two, or more than three points: least squares. For fixed C the
//     model is linear in A and B; C is found by golden-section search on
//     the residual sum of squares over [0.2, 6].
//
// Heads must fall strictly as flows rise, flows must be non-negative.
func FitPumpCurve(points [][2]float64) (PumpCurve, error) {
	if len(points) == 0 {
		return PumpCurve{}, errors.New("pump curve has no points")
	}
	pts := append([][2]float64(nil), points...)
	sort.Slice(pts, func(i, j int) bool { return pts[i][0] < pts[j][0] })
	for i, p := range pts {
		if math.IsNaN(p[0]) || math.IsNaN(p[1]) || math.IsInf(p[0], 0) || math.IsInf(p[1], 0) {
			return PumpCurve{}, fmt.Errorf("pump curve point %d is not a number", i+1)
		}
		if p[0] < 0 || p[1] <= 0 {
			return PumpCurve{}, fmt.Errorf("pump curve point (%g L/s, %g m): flow must be ≥ 0 and head > 0", p[0], p[1])
		}
		if i > 0 && (p[0] <= pts[i-1][0] || p[1] >= pts[i-1][1]) {
			return PumpCurve{}, fmt.Errorf("pump curve points (%g, %g) and (%g, %g): head must fall as flow rises", pts[i-1][0], pts[i-1][1], p[0], p[1])
		}
	}
	switch len(pts) {
	case 1:
		q, h := pts[0][0], pts[0][1]
		if q <= 0 {
			return PumpCurve{}, fmt.Errorf("one-point pump curve needs a positive design flow, got %g L/s", q)
		}
		return PumpCurve{A: 4 * h / 3, B: h / (3 * q * q), C: 2, Method: "one-point"}, nil
	case 3:
		return fitThree(pts)
	}
	return fitLeastSquares(pts)
}

func fitThree(pts [][2]float64) (PumpCurve, error) {
	q1, h1 := pts[0][0], pts[0][1]
	q2, h2 := pts[1][0], pts[1][1]
	q3, h3 := pts[2][0], pts[2][1]
	want := (h1 - h2) / (h1 - h3)
	ratio := func(c float64) float64 {
		return (math.Pow(q2, c) - math.Pow(q1, c)) / (math.Pow(q3, c) - math.Pow(q1, c))
	}
	// ratio(c) falls from its c→0 limit towards 0 as c grows.
	lo, hi := 1e-3, 20.0
	rlo, rhi := ratio(lo), ratio(hi)
	if !(want < rlo && want > rhi) {
		return PumpCurve{}, fmt.Errorf("pump curve points (%g, %g), (%g, %g), (%g, %g) do not fit H = A − B·Q^C with 0 < C ≤ 20", q1, h1, q2, h2, q3, h3)
	}
	for i := 0; i < 200 && hi-lo > 1e-15*hi; i++ {
		mid := 0.5 * (lo + hi)
		if ratio(mid) > want {
			lo = mid
		} else {
			hi = mid
		}
	}
	c := 0.5 * (lo + hi)
	b := (h1 - h3) / (math.Pow(q3, c) - math.Pow(q1, c))
	a := h1 + b*math.Pow(q1, c)
	return PumpCurve{A: a, B: b, C: c, Method: "three-point"}, nil
}

// fitAB solves the linear least-squares problem for A and B at fixed c and
// returns them with the residual sum of squares.
func fitAB(pts [][2]float64, c float64) (a, b, sse float64) {
	// h = a − b x, x = q^c.
	var n, sx, sxx, sh, sxh float64
	for _, p := range pts {
		x := math.Pow(p[0], c)
		n++
		sx += x
		sxx += x * x
		sh += p[1]
		sxh += x * p[1]
	}
	det := n*sxx - sx*sx
	if det == 0 {
		return math.NaN(), math.NaN(), math.Inf(1)
	}
	// minimise Σ (a − b x − h)²: [n −sx; sx −sxx][a b] = [sh sxh]
	a = (sh*sxx - sx*sxh) / det
	b = (sx*sh - n*sxh) / det
	for _, p := range pts {
		r := a - b*math.Pow(p[0], c) - p[1]
		sse += r * r
	}
	return a, b, sse
}

func fitLeastSquares(pts [][2]float64) (PumpCurve, error) {
	lo, hi := 0.2, 6.0
	g := (math.Sqrt(5) - 1) / 2
	x1, x2 := hi-g*(hi-lo), lo+g*(hi-lo)
	_, _, f1 := fitAB(pts, x1)
	_, _, f2 := fitAB(pts, x2)
	for i := 0; i < 200 && hi-lo > 1e-10; i++ {
		if f1 < f2 {
			hi, x2, f2 = x2, x1, f1
			x1 = hi - g*(hi-lo)
			_, _, f1 = fitAB(pts, x1)
		} else {
			lo, x1, f1 = x1, x2, f2
			x2 = lo + g*(hi-lo)
			_, _, f2 = fitAB(pts, x2)
		}
	}
	c := 0.5 * (lo + hi)
	a, b, _ := fitAB(pts, c)
	if !(a > 0 && b > 0) {
		return PumpCurve{}, fmt.Errorf("pump curve of %d points: least-squares fit of H = A − B·Q^C gave A = %g, B = %g; need both positive", len(pts), a, b)
	}
	return PumpCurve{A: a, B: b, C: c, Method: "least-squares"}, nil
}
