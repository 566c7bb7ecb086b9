package calib

import (
	"bytes"
	"context"
	"math"
	"sort"
	"strings"
	"testing"

	"plumbline/model/hydraulic"
	"plumbline/model/netgen"
	"plumbline/model/network"
	"plumbline/model/sim"
	"plumbline/model/telemetry"
)

// shutCandidate picks a distribution main of the demo town's central
// zone whose closure moves some logger's pressure by 1-3 m at base
// demand: a valve left shut that sends water the long way round without
// cutting anyone off. Of those it takes the one of median effect.
func shutCandidate(t *testing.T, net *network.Network, sensors []telemetry.Sensor) string {
	t.Helper()
	s, err := hydraulic.NewSolver(net, hydraulic.Options{})
	if err != nil {
		t.Fatal(err)
	}
	c := &hydraulic.Conditions{Demand: make([]float64, len(net.Nodes))}
	for i := range net.Nodes {
		c.Demand[i] = 1.7 * net.Nodes[i].Demand // near the morning peak
	}
	base, err := s.Solve(c, nil)
	if err != nil {
		t.Fatal(err)
	}
	var nodes []int
	for _, sn := range sensors {
		if sn.Quantity == telemetry.Pressure {
			if i, ok := net.NodeIndex(sn.At); ok {
				nodes = append(nodes, i)
			}
		}
	}
	type cand struct {
		id     string
		effect float64
	}
	var cands []cand
	c.Status = make([]network.Status, len(net.Links))
	for l := range net.Links {
		lk := &net.Links[l]
		if lk.Kind != network.Pipe || lk.Diameter < 150 || net.Nodes[lk.From].Zone != netgen.ZoneCentral || net.Nodes[lk.To].Zone != netgen.ZoneCentral ||
			net.Nodes[lk.From].Kind != network.Junction || net.Nodes[lk.To].Kind != network.Junction {
			continue
		}
		for k := range c.Status {
			c.Status[k] = net.Links[k].Status
		}
		c.Status[l] = network.Closed
		sol, err := s.Solve(c, base)
		if err != nil {
			continue
		}
		eff := 0.0
		for _, i := range nodes {
			eff = math.Max(eff, math.Abs(sol.Pressure[i]-base.Pressure[i]))
		}
		if eff >= 1 && eff <= 3 {
			cands = append(cands, cand{lk.ID, eff})
		}
	}
	if len(cands) == 0 {
		t.Fatal("no main in the central zone whose closure moves a logger by 1-3 m")
	}
	sort.Slice(cands, func(a, b int) bool { return cands[a].effect < cands[b].effect })
	pick := cands[len(cands)/2]
	t.Logf("shut %s: largest logger pressure change %.2f m at 1.7 × base demand (%d candidates)", pick.id, pick.effect, len(cands))
	return pick.id
}

// shutScenario is the demo town as recorded, its loggers, the main shut
// in truth (shutCandidate), and three days of readings from the true
// network (that main shut, roughness off by up to 15 %).
func shutScenario(t *testing.T) (net *network.Network, sensors []telemetry.Sensor, shut string, snaps []telemetry.Snapshot) {
	t.Helper()
	net, err := netgen.DemoTown()
	if err != nil {
		t.Fatal(err)
	}
	sensors = netgen.DemoSensors(net)
	shut = shutCandidate(t, net, sensors)
	truth, _, err := sim.Perturb(net, sim.Mismatch{Roughness: 0.15, Shut: []string{shut}, Seed: 5})
	if err != nil {
		t.Fatal(err)
	}
	return net, sensors, shut, simulate(t, truth, sensors, monday, 3, 21, nil)
}

// TestShutValveNamed checks that a link shut in the true network but open
// in the records is named among the suspected closed links, when the
// true network also differs in roughness.
func TestShutValveNamed(t *testing.T) {
	net, sensors, shut, snaps := shutScenario(t)
	res, err := Fit(context.Background(), Problem{Network: net, Sensors: sensors, Snapshots: snaps}, Settings{})
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	found := false
	for _, s := range res.Suspects {
		names = append(names, s.Link)
		if s.Link == shut {
			found = true
			if s.Evidence == "" || len(s.Sensors) == 0 {
				t.Errorf("suspect %s: no evidence (%q) or no sensors", s.Link, s.Evidence)
			}
			if !s.Closed && s.Factor < 10 {
				t.Errorf("suspect %s: factor %.3g, want ≥ 10 or closed", s.Link, s.Factor)
			}
		}
	}
	if !found {
		var buf bytes.Buffer
		_ = res.WriteText(&buf)
		t.Fatalf("shut link %s not among the suspects %v\n%s", shut, names, buf.String())
	}
	var buf bytes.Buffer
	if err := res.WriteText(&buf); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(buf.String(), shut) {
		t.Errorf("text report does not name %s", shut)
	}
	t.Logf("suspects: %v", names)

	// And with the records right, no valve is suspected.
	clean := simulate(t, net, sensors, monday, 3, 22, nil)
	res2, err := Fit(context.Background(), Problem{Network: net, Sensors: sensors, Snapshots: clean}, Settings{})
	if err != nil {
		t.Fatal(err)
	}
	for _, s := range res2.Suspects {
		t.Errorf("records right, yet suspect %s: %s", s.Link, s.Evidence)
	}
}

// FitChecked shuts the link the check names when the readings come from
// a network where it is shut (the fit with it shut must validate better
// on the held-out day, by FitChecked's own rule), and changes nothing
// when the records are right.
func TestFitCheckedShutsTheValve(t *testing.T) {
	net, sensors, shut, snaps := shutScenario(t)
	res, err := FitChecked(context.Background(), Problem{Network: net, Sensors: sensors, Snapshots: snaps}, Settings{})
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Applied) != 1 {
		t.Fatalf("applied %+v, want one link shut; warnings %v", res.Applied, res.Warnings)
	}
	a := res.Applied[0]
	if a.Link != shut {
		// Three days of readings cannot always tell the shut main from the
		// next one along it (here the check fits the true link best at
		// ×10 and its neighbour shut slightly better); held-out validation
		// decides. The link shut must then be that neighbour: sharing an
		// end with the true one.
		i, _ := net.LinkIndex(shut)
		j, _ := net.LinkIndex(a.Link)
		li, lj := net.Links[i], net.Links[j]
		if li.From != lj.From && li.From != lj.To && li.To != lj.From && li.To != lj.To {
			t.Errorf("shut %s, truth %s: not a neighbour of the true link", a.Link, shut)
		}
	}
	if !(a.ValidationShut < a.ValidationAsRecorded) {
		t.Errorf("applied although the held-out misfit shut %.4g is not below %.4g", a.ValidationShut, a.ValidationAsRecorded)
	}
	k, _ := res.Network.LinkIndex(a.Link)
	if res.Network.Links[k].Status != network.Closed {
		t.Errorf("%s not closed in the calibrated network", a.Link)
	}
	if j, _ := net.LinkIndex(a.Link); net.Links[j].Status == network.Closed {
		t.Errorf("the recorded network was changed")
	}
	t.Logf("shut %s (truth %s): held-out misfit %.4g as recorded, %.4g shut", a.Link, shut, a.ValidationAsRecorded, a.ValidationShut)

	clean := simulate(t, net, sensors, monday, 3, 22, nil)
	res2, err := FitChecked(context.Background(), Problem{Network: net, Sensors: sensors, Snapshots: clean}, Settings{})
	if err != nil {
		t.Fatal(err)
	}
	if len(res2.Applied) != 0 {
		t.Errorf("records right, yet shut %+v", res2.Applied)
	}
}
