package calib

import (
	"context"
	"math"
	"testing"

	"gonum.org/v1/gonum/optimize"

	"plumbline/model/netgen"
)

// TestOptimumAgreesWithNelderMead checks the Levenberg-Marquardt optimum
// against gonum's general-purpose Nelder-Mead simplex (Nelder & Mead
// 1965, gonum/optimize.NelderMead), which uses objective values only, on
// the same weighted least-squares objective of a small town with
// three roughness groups only. Both must reach the same minimum: parameters
// within 2e-3 (in ln C, 0.2 % of C) and objective within 1e-6 relative.
// The objective is the plain one (sensor accuracy weights, no pipe of its
// own): the reweighting and the pipes' own roughness change the
// objective, not how it is minimised.
func TestOptimumAgreesWithNelderMead(t *testing.T) {
	net, err := netgen.DemoTown()
	if err != nil {
		t.Fatal(err)
	}
	// Three groups by material family, so that the simplex stays small.
	for l := range net.Links {
		lk := &net.Links[l]
		switch lk.Material {
		case netgen.CastIron:
			lk.Group = "iron-unlined"
		case netgen.DuctileIron:
			lk.Group = "iron-lined"
		default:
			lk.Group = "plastic"
		}
	}
	sensors := netgen.DemoSensors(net)
	rough := map[string]float64{}
	for i, g := range buildGroups(net) {
		rough[g.name] = 0.8 + 0.05*float64(i%4)
	}
	snaps := simulate(t, trueTown(net, rough, nil), sensors, monday, 1, 3, nil)
	set := Settings{NoPatterns: true, HoldOut: -1, SuspectCandidates: -1, MaxSnapshots: 12, Tolerance: 1e-9, NoReweight: true, PipeSpread: -1}
	p := Problem{Network: net, Sensors: sensors, Snapshots: snaps}
	res, err := Fit(context.Background(), p, set)
	if err != nil {
		t.Fatal(err)
	}
	if res.Status != Converged {
		t.Fatalf("status %s, want converged", res.Status)
	}

	// The same objective, rebuilt independently of the fit's loop.
	m, fit, _, _, _, _, err := setup(p, set.withDefaults(), func(string) {})
	if err != nil {
		t.Fatal(err)
	}
	b := newBatch(fit, m.sens)
	var freeIdx []int
	lm := make([]float64, len(m.params))
	for i, pr := range res.Parameters {
		if pr.Kind != Roughness {
			t.Fatalf("parameter %s: only roughness expected", pr.Name)
		}
		lm[i] = math.Log(pr.Estimate / pr.Prior)
		if pr.Identifiable {
			freeIdx = append(freeIdx, i)
			if pr.AtBound {
				t.Fatalf("%s at a bound: the comparison needs an interior optimum", pr.Name)
			}
		}
	}
	if len(freeIdx) < 2 {
		t.Fatalf("only %d identifiable groups", len(freeIdx))
	}
	ctx := context.Background()
	warm, err := m.evaluate(ctx, b, lm, nil, noTrial)
	if err != nil {
		t.Fatal(err)
	}
	objective := func(x []float64) float64 {
		th := make([]float64, len(m.params))
		for a, i := range freeIdx {
			th[i] = x[a]
		}
		st, err := m.evaluate(ctx, b, th, warm, noTrial)
		if err != nil {
			return math.Inf(1)
		}
		c := b.cost(st.r)
		for _, v := range x {
			c += v * v / (priorSD * priorSD)
		}
		return c
	}
	x0 := make([]float64, len(freeIdx))
	nm, err := optimize.Minimize(optimize.Problem{Func: objective}, x0,
		&optimize.Settings{FuncEvaluations: 4000, Converger: &optimize.FunctionConverge{Absolute: 1e-10, Relative: 1e-12, Iterations: 100}},
		&optimize.NelderMead{})
	if err != nil {
		t.Fatalf("Nelder-Mead: %v", err)
	}
	lmx := make([]float64, len(freeIdx))
	for a, i := range freeIdx {
		lmx[a] = lm[i]
	}
	fLM, fNM := objective(lmx), nm.F
	if fLM > fNM*(1+1e-6) {
		t.Errorf("objective at the LM optimum %.10g, Nelder-Mead %.10g: LM is worse by %.3g (relative tolerance 1e-6)", fLM, fNM, (fLM-fNM)/fNM)
	}
	for a, i := range freeIdx {
		if !near(lmx[a], nm.X[a], 2e-3) {
			t.Errorf("%s: ln multiplier LM %.5f, Nelder-Mead %.5f, difference %.2g > 2e-3", m.params[i].name, lmx[a], nm.X[a], lmx[a]-nm.X[a])
		}
	}
	t.Logf("%d groups, objective LM %.8g, Nelder-Mead %.8g after %d evaluations", len(freeIdx), fLM, fNM, nm.Stats.FuncEvaluations)
}
