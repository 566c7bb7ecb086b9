package calib

import (
	"context"
	"math"
	"testing"

	"plumbline/model/netgen"
)

// TestPipeEffectKeepsGroup checks the pipes' own roughness on a case
// worked out by hand: in truth one pipe alone, the pump station's rising
// main to the hill tank, is rougher than recorded (C × 0.75: 0.75^-1.852
// = 1.70 times the head loss, Williams & Hazen 1905), while every other
// pipe is as recorded. The pump's outlet logger reads
// the rising main's loss on its own, to a tenth of a metre, so a fit of
// groups alone must lower the whole plastic group to explain one pipe.
// With the pipe given its own roughness, the group's record (its true
// value) lies within two standard errors of its estimate and nearer than
// with groups alone, and the rising main's own roughness comes out at its
// truth within two standard errors, rougher than its group.
func TestPipeEffectKeepsGroup(t *testing.T) {
	net := demoTown(t)
	k, ok := net.LinkIndex("P-rising")
	if !ok {
		t.Fatal("no P-rising in the demo town")
	}
	group := GroupOf(&net.Links[k])
	truth := net.Clone()
	truth.Links[k].Roughness *= 0.75
	sensors := netgen.DemoSensors(net)
	snaps := simulate(t, truth, sensors, monday, 3, 31, nil)
	p := Problem{Network: net, Sensors: sensors, Snapshots: snaps}
	fit := func(spread float64) *Result {
		res, err := Fit(context.Background(), p, Settings{PipeSpread: spread, SuspectCandidates: -1})
		if err != nil {
			t.Fatal(err)
		}
		return res
	}
	plain, full := fit(-1), fit(0)
	gp, ok1 := plain.Parameter("roughness " + group)
	gf, ok2 := full.Parameter("roughness " + group)
	if !ok1 || !ok2 || !gp.Identifiable || !gf.Identifiable {
		t.Fatalf("group %s: found %v %v, identifiable %v %v", group, ok1, ok2, gp.Identifiable, gf.Identifiable)
	}
	t.Logf("%s: record %.1f; groups alone %.1f ± %.2g; with pipes %.1f ± %.2g", group, gp.Prior, gp.Estimate, gp.StdErr, gf.Estimate, gf.StdErr)
	if math.Abs(gf.Estimate-gf.Prior) > 2*gf.StdErr {
		t.Errorf("with pipes: %s %.1f ± %.2g, record (true) %.1f outside 2 s.e.", group, gf.Estimate, gf.StdErr, gf.Prior)
	}
	if math.Abs(gp.Estimate-gp.Prior) <= math.Abs(gf.Estimate-gf.Prior) {
		t.Errorf("groups alone %.1f, with pipes %.1f: the record %.1f should be nearer with pipes", gp.Estimate, gf.Estimate, gp.Prior)
	}
	var pe *PipeEffect
	for i := range full.PipeEffects {
		if full.PipeEffects[i].Link == "P-rising" {
			pe = &full.PipeEffects[i]
		}
	}
	if pe == nil {
		t.Fatalf("P-rising has no roughness of its own; pipes: %v", full.PipeEffects)
	}
	t.Logf("P-rising: factor %.3f ± %.2g on its group, C %.1f ± %.2g against a true %.1f", pe.Factor, pe.StdErr, pe.Estimate, pe.EstimateStdErr, truth.Links[k].Roughness)
	if tc := truth.Links[k].Roughness; math.Abs(pe.Estimate-tc) > 2*pe.EstimateStdErr || pe.Prior != net.Links[k].Roughness {
		t.Errorf("P-rising: C %.1f ± %.2g (record %.1f), want the true %.1f within 2 s.e.", pe.Estimate, pe.EstimateStdErr, pe.Prior, tc)
	}
	if pe.Factor >= 1 {
		t.Errorf("P-rising: factor %.3f on its group, want below 1 (rougher than its group)", pe.Factor)
	}
}
