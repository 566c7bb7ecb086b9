package hydraulic

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/optimize"

	"plumbline/model/network"
)

// TestContentFunctionMinimum solves the same pipe-and-leak networks a
// second, independent way: the steady state minimises the content
// function over the junction heads (Collins, Cooper, Helgason, Kennington
// & LeBlanc 1978, "Solving the pipe network analysis problem using
// optimization techniques", Management Science 24(7)):
//
//	F(H) = Σ_links ∫₀^ΔH Q(x) dx + Σ_j d_j H_j + Σ_j ∫ leak_j(H_j) dH_j,
//
// whose gradient is the continuity residual at each junction. Q(x) is the
// Hazen-Williams law inverted (written out here, not the solver's code),
// minimised with gonum's L-BFGS. Heads must agree to 1 mm.
func TestContentFunctionMinimum(t *testing.T) {
	for _, tc := range []struct {
		nx, ny int
		leaks  bool
	}{{5, 4, false}, {7, 6, true}, {10, 3, true}} {
		net := grid(tc.nx, tc.ny, true, network.HazenWilliams)
		if tc.leaks {
			for i := 0; i < len(net.Nodes); i += 3 {
				if net.Nodes[i].Kind == network.Junction {
					net.Nodes[i].LeakCoeff = 0.02 + 0.001*float64(i)
					net.Nodes[i].LeakExponent = []float64{0.5, 1.0, 1.5}[i%3]
				}
			}
		}
		_, sol := mustSolve(t, net, nil)
		heads := contentMinimum(t, net)
		worst := 0.0
		for i, n := range net.Nodes {
			if n.Kind == network.Junction {
				worst = math.Max(worst, math.Abs(heads[i]-sol.Head[i]))
			}
		}
		if worst > 1e-3 {
			t.Errorf("grid %dx%d leaks %v: largest head difference solver vs content minimum %.3g m > 1 mm", tc.nx, tc.ny, tc.leaks, worst)
		}
		t.Logf("grid %dx%d leaks %v: largest head difference %.2g m", tc.nx, tc.ny, tc.leaks, worst)
	}
}

// contentMinimum returns the node heads minimising the content function.
func contentMinimum(t *testing.T, net *network.Network) []float64 {
	t.Helper()
	var junctions []int
	jx := make([]int, len(net.Nodes))
	hmax := 0.0
	for i, n := range net.Nodes {
		jx[i] = -1
		if n.Kind == network.Junction {
			jx[i] = len(junctions)
			junctions = append(junctions, i)
		} else {
			hmax = math.Max(hmax, n.Head)
		}
	}
	// Resistance R of h = R Q^1.852 with Q in L/s, from the SI form
	// 10.67 L/(C^1.852 D^4.8704) (Q in m³/s).
	const n = 1.852
	r := make([]float64, len(net.Links))
	for k, l := range net.Links {
		d := l.Diameter / 1000
		r[k] = 10.67 * l.Length / (math.Pow(l.Roughness, n) * math.Pow(d, 4.8704)) * math.Pow(1e-3, n)
	}
	head := func(x []float64, i int) float64 {
		if j := jx[i]; j >= 0 {
			return x[j]
		}
		return net.Nodes[i].Head
	}
	fg := func(grad, x []float64) float64 {
		f := 0.0
		if grad != nil {
			for j := range grad {
				grad[j] = 0
			}
		}
		for k, l := range net.Links {
			dh := head(x, l.From) - head(x, l.To)
			a := math.Abs(dh)
			q := math.Copysign(math.Pow(a/r[k], 1/n), dh)
			f += math.Pow(r[k], -1/n) * math.Pow(a, 1+1/n) / (1 + 1/n)
			if grad != nil {
				if j := jx[l.From]; j >= 0 {
					grad[j] += q
				}
				if j := jx[l.To]; j >= 0 {
					grad[j] -= q
				}
			}
		}
		for j, i := range junctions {
			nd := net.Nodes[i]
			f += nd.Demand * (x[j] - hmax) // shifted: same minimiser, smaller values
			p := x[j] - nd.Elevation
			leak := 0.0
			if p > 0 && nd.LeakCoeff > 0 {
				f += nd.LeakCoeff * math.Pow(p, nd.LeakExponent+1) / (nd.LeakExponent + 1)
				leak = nd.LeakCoeff * math.Pow(p, nd.LeakExponent)
			}
			if grad != nil {
				grad[j] += nd.Demand + leak
			}
		}
		return f
	}
	p := optimize.Problem{
		Func: func(x []float64) float64 { return fg(nil, x) },
		Grad: func(grad, x []float64) { fg(grad, x) },
	}
	x0 := make([]float64, len(junctions))
	for j := range x0 {
		x0[j] = hmax - 1
	}
	res, err := optimize.Minimize(p, x0, &optimize.Settings{GradientThreshold: 1e-9, MajorIterations: 100000, FuncEvaluations: 1000000}, &optimize.LBFGS{Store: 30})
	if err != nil && res == nil {
		t.Fatalf("content minimisation: %v", err)
	}
	g := make([]float64, len(junctions))
	fg(g, res.X)
	gmax := 0.0
	for _, v := range g {
		gmax = math.Max(gmax, math.Abs(v))
	}
	// Near the minimum the line search runs into the rounding of F and
	// may stop with a status of failure; what matters is the gradient
	// (continuity residual): 1e-5 L/s moves heads by well under 1e-5 m
	// at the conductances of these grids (about 10 L/s per m).
	if gmax > 1e-5 {
		t.Fatalf("content minimisation stopped at gradient %.3g L/s (status %v, err %v)", gmax, res.Status, err)
	}
	out := make([]float64, len(net.Nodes))
	for i := range out {
		out[i] = head(res.X, i)
	}
	return out
}
