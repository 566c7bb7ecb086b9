package sim

import (
	"math"
	"strings"
	"testing"

	"plumbline/model/hydraulic"
	"plumbline/model/network"
)

// TestPerturbAged checks the aged-pipes mismatch: the chosen pipes'
// Hazen-Williams C is the randomly perturbed one times the factor, every
// other value is what the same seed gives without ageing, and a
// shut link is closed.
func TestPerturbAged(t *testing.T) {
	net := testTown()
	net.Links[2].Material, net.Links[3].Material = "cast-iron", "cast-iron"
	old := func(l *network.Link) bool { return l.Material == "cast-iron" }
	m := Mismatch{Demand: 0.1, Diameter: 0.1, Roughness: 0.1, Seed: 7}
	plain, _, err := Perturb(net, m)
	if err != nil {
		t.Fatal(err)
	}
	m.Aged = []Aging{{Name: "cast-iron", Match: old, Factor: 0.55}}
	m.Shut = []string{"P-5"}
	aged, notes, err := Perturb(net, m)
	if err != nil {
		t.Fatal(err)
	}
	for i := range net.Links {
		want := plain.Links[i].Roughness
		if old(&net.Links[i]) {
			want *= 0.55
		}
		if got := aged.Links[i].Roughness; math.Abs(got-want) > 1e-12*want {
			t.Errorf("link %s: C %v, want %v", net.Links[i].ID, got, want)
		}
		if aged.Links[i].Diameter != plain.Links[i].Diameter {
			t.Errorf("link %s: diameter %v, want %v as without ageing", net.Links[i].ID, aged.Links[i].Diameter, plain.Links[i].Diameter)
		}
	}
	for i := range net.Nodes {
		if aged.Nodes[i].Demand != plain.Nodes[i].Demand {
			t.Errorf("node %s: demand %v, want %v as without ageing", net.Nodes[i].ID, aged.Nodes[i].Demand, plain.Nodes[i].Demand)
		}
	}
	if k, _ := aged.LinkIndex("P-5"); aged.Links[k].Status != network.Closed {
		t.Errorf("P-5 is %v in truth, want closed", aged.Links[k].Status)
	}
	if k, _ := net.LinkIndex("P-5"); net.Links[k].Status == network.Closed {
		t.Error("Perturb closed P-5 in the records too")
	}
	if !strings.Contains(strings.Join(notes, "\n"), "cast-iron aged") {
		t.Errorf("notes %q do not name the aged pipes", notes)
	}

	for _, bad := range []Aging{{Name: "none", Match: func(*network.Link) bool { return false }, Factor: 0.5},
		{Name: "cast-iron", Match: old, Factor: 1.5}, {Name: "cast-iron", Factor: 0.5}} {
		if _, _, err := Perturb(net, Mismatch{Aged: []Aging{bad}}); err == nil || !strings.Contains(err.Error(), bad.Name) {
			t.Errorf("aged %s ×%v: error %v, want one naming it", bad.Name, bad.Factor, err)
		}
	}
}

// TestAgedEpsFullyRough checks the Darcy-Weisbach ageing against the
// project's Colebrook-White friction factor at a Reynolds number high
// enough for fully rough flow: the friction factor rises by
// factor^-1.852, as the Hazen-Williams head loss does for C × factor
// (head loss ∝ C^-1.852, Williams & Hazen 1905). The rough-pipe limit
// is Colebrook (1939).
func TestAgedEpsFullyRough(t *testing.T) {
	for _, c := range []struct{ eps, d, factor float64 }{{0.25, 150, 0.55}, {0.05, 300, 0.8}, {1, 100, 0.4}} {
		e2 := agedEps(c.eps, c.d, c.factor)
		const re = 1e9
		ratio := hydraulic.FrictionFactor(re, e2/c.d) / hydraulic.FrictionFactor(re, c.eps/c.d)
		want := math.Pow(c.factor, -1.852)
		if math.Abs(ratio/want-1) > 0.01 {
			t.Errorf("ε %.3g mm, D %.0f mm, factor %.2f: ε' %.3g mm raises f by %.4g, want %.4g", c.eps, c.d, c.factor, e2, ratio, want)
		}
	}
	// On a Darcy-Weisbach network the aged pipes get agedEps.
	net := testTown()
	net.Headloss = network.DarcyWeisbach
	for i := range net.Links {
		net.Links[i].Roughness = 0.25
	}
	out, _, err := Perturb(net, Mismatch{Aged: []Aging{{Name: "P-1", Match: func(l *network.Link) bool { return l.ID == "P-1" }, Factor: 0.5}}})
	if err != nil {
		t.Fatal(err)
	}
	if got, want := out.Links[0].Roughness, agedEps(0.25, 200, 0.5); math.Abs(got-want) > 1e-12 {
		t.Errorf("P-1: ε %v mm, want %v", got, want)
	}
	if out.Links[1].Roughness != 0.25 {
		t.Errorf("P-2: ε %v mm, want the record's 0.25 (no random roughness asked)", out.Links[1].Roughness)
	}
}
