package main

import (
	"bufio"
	"bytes"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"plumbline/daemon/config"
	"plumbline/model/calib"
	"plumbline/model/demand"
	"plumbline/model/finding"
	"plumbline/model/hydraulic"
	"plumbline/model/network"
	scen "plumbline/model/scenario"
	"plumbline/model/telemetry"
)

// repo is the repository root seen from this package's folder.
const repo = "../../.."

// TestCommittedSuiteIsGenerated regenerates the suite into a temporary
// folder and compares it byte for byte with the committed files: the
// suite is deterministic and nobody edited it by hand.
func TestCommittedSuiteIsGenerated(t *testing.T) {
	out := t.TempDir()
	if err := run(repo, out, ""); err != nil {
		t.Fatalf("run: %v", err)
	}
	n := 0
	err := filepath.Walk(out, func(path string, info os.FileInfo, err error) error {
		if err != nil || info.IsDir() {
			return err
		}
		rel, _ := filepath.Rel(out, path)
		got, err := os.ReadFile(path)
		if err != nil {
			return err
		}
		want, err := os.ReadFile(filepath.Join(repo, rel))
		if err != nil {
			t.Errorf("%s: generated but not committed: %v", rel, err)
			return nil
		}
		if !bytes.Equal(got, want) {
			t.Errorf("%s: committed file differs from the generator's output (run go run ./testdata/scenarios/gen)", rel)
		}
		n++
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	// And nothing stale: every committed scenario is generated.
	for _, key := range []string{"demo", "town5k"} {
		for _, cond := range conditions {
			files, _ := filepath.Glob(filepath.Join(repo, "testdata/scenarios", key, cond, "*.yaml"))
			for _, f := range files {
				rel, _ := filepath.Rel(repo, f)
				if _, err := os.Stat(filepath.Join(out, rel)); err != nil {
					t.Errorf("%s: committed but no longer generated", rel)
				}
			}
		}
	}
	if n == 0 {
		t.Fatal("the generator wrote nothing")
	}
}

type manifestLine struct{ net, cond, scenario, network, config, from, to string }

func readManifest(t *testing.T) []manifestLine {
	t.Helper()
	f, err := os.Open(filepath.Join(repo, "testdata/scenarios/suite.tsv"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var out []manifestLine
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		if strings.HasPrefix(sc.Text(), "#") {
			continue
		}
		c := strings.Split(sc.Text(), "\t")
		if len(c) != 7 {
			t.Fatalf("suite.tsv: %q: want 7 columns, got %d", sc.Text(), len(c))
		}
		out = append(out, manifestLine{c[0], c[1], c[2], c[3], c[4], c[5], c[6]})
	}
	return out
}

// TestSuiteCoversTheIssue loads every scenario of the manifest, validates
// it against its network, and checks the suite holds what the
// measuring-stick issue asks for.
func TestSuiteCoversTheIssue(t *testing.T) {
	nets := map[string]*network.Network{}
	cfgs := map[string]*config.Config{}
	type cover struct {
		minLeak, maxLeak                    float64
		bursts, rises, twoLeaks, valveBlock int
		mainBlockLow                        int
		faults                              map[string]bool // quantity/mode
		quiet                               time.Duration
		scenarios                           int
	}
	covers := map[string]*cover{}
	for _, m := range readManifest(t) {
		net, ok := nets[m.net]
		if !ok {
			var err error
			if net, err = network.ReadFile(filepath.Join(repo, m.network)); err != nil {
				t.Fatal(err)
			}
			nets[m.net] = net
			if cfgs[m.net], err = config.LoadFile(filepath.Join(repo, m.config)); err != nil {
				t.Fatal(err)
			}
		}
		cfg := cfgs[m.net]
		sc, err := scen.LoadFile(filepath.Join(repo, m.scenario))
		if err != nil {
			t.Errorf("%s: %v", m.scenario, err)
			continue
		}
		if errs := scen.Validate(sc, net); len(errs) > 0 {
			t.Errorf("%s: %v", m.scenario, errs)
		}
		key := m.net + "/" + m.cond
		c := covers[key]
		if c == nil {
			c = &cover{minLeak: math.Inf(1), faults: map[string]bool{}}
			covers[key] = c
		}
		c.scenarios++
		if m.cond != "exact" {
			if sc.LoggingInterval != 5*time.Minute || sc.Resolution[telemetry.Pressure] != 0.01 {
				t.Errorf("%s: %s without 5-minute logging and 0.01 m resolution", m.scenario, m.cond)
			}
			if m.net == "demo" && filepath.Base(sc.TrueNetwork) != trueName("demo", m.cond) {
				t.Errorf("%s: true network %q, want %s", m.scenario, sc.TrueNetwork, trueName("demo", m.cond))
			}
		} else if sc.TrueNetwork != "" || len(sc.Resolution) > 0 {
			t.Errorf("%s: exact condition with a true network or a resolution", m.scenario)
		}
		if len(sc.Events) == 0 {
			c.quiet = max(c.quiet, sc.Duration)
		}
		leaks := 0
		for _, e := range sc.Events {
			if e.Start.Sub(sc.Start) < 8*24*time.Hour {
				t.Errorf("%s: event %s starts %v after the run start, want at least 8 days of quiet history", m.scenario, e.At, e.Start.Sub(sc.Start))
			}
			switch e.Kind {
			case finding.Leak:
				leaks++
				c.minLeak, c.maxLeak = min(c.minLeak, e.SizeLPS), max(c.maxLeak, e.SizeLPS)
				if e.Burst {
					c.bursts++
				}
				if e.Ramp >= 72*time.Hour {
					c.rises++
				}
			case finding.Blockage:
				k, _ := net.LinkIndex(e.At)
				if net.Links[k].Kind == network.Valve {
					c.valveBlock++
				} else if e.OpenFraction <= 0.3 {
					c.mainBlockLow++
				}
			case finding.SensorFault:
				s, _ := cfg.Sensor(e.At)
				c.faults[s.Quantity.String()+"/"+string(e.Mode)] = true
			}
		}
		if leaks >= 2 {
			c.twoLeaks++
		}
	}
	for key, c := range covers {
		if c.minLeak > 0.5 || c.maxLeak < 10 {
			t.Errorf("%s: leak sizes %g to %g L/s, want 0.5 to 10", key, c.minLeak, c.maxLeak)
		}
		if c.bursts == 0 || c.rises == 0 || c.twoLeaks == 0 || c.mainBlockLow == 0 {
			t.Errorf("%s: bursts %d, slow rises %d, two-leak scenarios %d, main blockages <=0.3 %d; want each > 0",
				key, c.bursts, c.rises, c.twoLeaks, c.mainBlockLow)
		}
		if c.quiet < 30*24*time.Hour {
			t.Errorf("%s: longest quiet run %v, want at least 30 days", key, c.quiet)
		}
	}
	demo := covers["demo/exact"]
	if demo == nil {
		t.Fatal("no demo scenarios in the manifest")
	}
	for _, q := range []string{"pressure", "flow"} {
		for _, mode := range []string{"stuck", "drift", "spike", "offset"} {
			if !demo.faults[q+"/"+mode] {
				t.Errorf("demo: no %s fault on a %s sensor", mode, q)
			}
		}
	}
	if demo.valveBlock == 0 || demo.quiet < 60*24*time.Hour {
		t.Errorf("demo: valve blockages %d, quiet %v; want a valve blockage and 60 days of quiet", demo.valveBlock, demo.quiet)
	}
	if total := demo.scenarios + covers["town5k/exact"].scenarios; total < 40 {
		t.Errorf("%d scenarios per condition, want at least 40", total)
	}
	// Every condition holds the same scenarios.
	for _, n := range []string{"demo", "town5k"} {
		for _, cond := range conditions {
			if c := covers[n+"/"+cond]; c == nil || c.scenarios != covers[n+"/exact"].scenarios {
				t.Errorf("%s/%s: not the exact condition's %d scenarios", n, cond, covers[n+"/exact"].scenarios)
			}
		}
	}
}

// TestTown5kConfig checks the generated service configuration loads
// without problems and instruments every zone.
func TestTown5kConfig(t *testing.T) {
	cfg, err := config.LoadFile(filepath.Join(repo, "configs/town-5k.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	loggers := map[string]int{}
	for _, s := range cfg.Sensors {
		if s.Quantity == telemetry.Pressure {
			loggers[s.Zone]++
		}
	}
	if len(cfg.Zones) != 3 {
		t.Fatalf("got %d zones, want 3", len(cfg.Zones))
	}
	for _, z := range cfg.Zones {
		if loggers[z.ID] != loggersPerZone {
			t.Errorf("zone %s: got %d pressure loggers, want %d", z.ID, loggers[z.ID], loggersPerZone)
		}
		// The zone's reservoir main must be among its metered inlets.
		fed := false
		for _, id := range z.Inlets {
			s, _ := cfg.Sensor(id)
			k, _ := cfg.Network.LinkIndex(s.At)
			if cfg.Network.Nodes[cfg.Network.Links[k].From].Kind == network.Reservoir {
				fed = true
			}
		}
		if !fed {
			t.Errorf("zone %s: no inlet meter on a reservoir main", z.ID)
		}
	}
}

// TestDayFlowsMassBalance checks the day of solves that sizes the flow
// meters by conservation of mass: over the day, the water the reservoirs
// send out equals the water the junctions use (continuity, a physical
// law; no leaks in the network file).
func TestDayFlowsMassBalance(t *testing.T) {
	net, err := network.ReadFile(filepath.Join(repo, "testdata/network/town-5k.geojson"))
	if err != nil {
		t.Fatal(err)
	}
	mean, peak, err := dayFlows(net)
	if err != nil {
		t.Fatal(err)
	}
	var supplied, used float64
	for k := range net.Links {
		l := &net.Links[k]
		if net.Nodes[l.From].Kind == network.Reservoir || net.Nodes[l.To].Kind == network.Reservoir {
			supplied += mean[k]
			if peak[k] < mean[k] {
				t.Errorf("link %s: peak %g below mean %g", l.ID, peak[k], mean[k])
			}
		}
	}
	for h := 0; h < 24; h++ {
		for i := range net.Nodes {
			nd := &net.Nodes[i]
			if nd.Kind == network.Junction {
				used += nd.Demand * net.PatternValue(nd.Pattern, time.Duration(h)*time.Hour) / 24
			}
		}
	}
	if diff := math.Abs(supplied - used); diff > 1e-6*used {
		t.Errorf("reservoirs supply %.6f L/s on average, junctions use %.6f L/s: difference %.3g, tolerance %.3g", supplied, used, diff, 1e-6*used)
	}
}

// TestTown5kZoneBalance checks the zone balances of configs/town-5k.yaml
// by conservation of mass: with the network solved at base demand, each
// zone's metered inlets less its metered outlets equal the demand of its
// junctions (continuity over the zone; a physical law).
func TestTown5kZoneBalance(t *testing.T) {
	cfg, err := config.LoadFile(filepath.Join(repo, "configs/town-5k.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	net := cfg.Network
	solver, err := hydraulic.NewSolver(net, hydraulic.Options{})
	if err != nil {
		t.Fatal(err)
	}
	sol, err := solver.Solve(nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	flowOf := func(id string) float64 {
		s, ok := cfg.Sensor(id)
		if !ok {
			t.Fatalf("no sensor %s", id)
		}
		k, _ := net.LinkIndex(s.At)
		return sol.Flow[k]
	}
	for _, z := range cfg.Zones {
		var balance, demand float64
		for _, id := range z.Inlets {
			balance += flowOf(id)
		}
		for _, id := range z.Outlets {
			balance -= flowOf(id)
		}
		for i := range net.Nodes {
			if nd := &net.Nodes[i]; nd.Kind == network.Junction && nd.Zone == z.ID {
				demand += sol.Demand[i]
			}
		}
		if diff := math.Abs(balance - demand); diff > 1e-6*demand {
			t.Errorf("zone %s: inlets - outlets = %.6f L/s, demand %.6f L/s: difference %.3g, tolerance %.3g", z.ID, balance, demand, diff, 1e-6*demand)
		}
	}
}

// TestAgedTrueNetwork checks the committed true network of the demo
// town's aged condition against the realistic one (the same random
// draws): the oldest pipe group alone has a lower C, by agedFactor, one
// link open in the records is shut, and with it shut the truth still
// supplies every consumer: solved at the day's peak demand, what the
// reservoirs and tanks send out equals what the junctions use
// (continuity, a physical law), and no junction is cut off (a finite,
// positive pressure); the shut link moves some logger by 1-3 m.
func TestAgedTrueNetwork(t *testing.T) {
	rec, err := network.ReadFile(filepath.Join(repo, "configs/demo-town.geojson"))
	if err != nil {
		t.Fatal(err)
	}
	real, err := network.ReadFile(filepath.Join(repo, "testdata/scenarios/demo", trueName("demo", "realistic")))
	if err != nil {
		t.Fatal(err)
	}
	aged, err := network.ReadFile(filepath.Join(repo, "testdata/scenarios/demo", trueName("demo", "aged")))
	if err != nil {
		t.Fatal(err)
	}
	cfg, err := config.LoadFile(filepath.Join(repo, "configs/demo-town.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	old := oldestGroup(rec)
	// The demo town's oldest pipes, by its records, are the cast iron
	// installed 1930-1939; the rule must find them.
	if old != "cast-iron-1930s" {
		t.Fatalf("oldest group %q, want cast-iron-1930s", old)
	}
	var shut []int
	for l := range rec.Links {
		r, a := real.Links[l].Roughness, aged.Links[l].Roughness
		want := r
		if rec.Links[l].Kind == network.Pipe && calib.GroupOf(&rec.Links[l]) == old {
			want = r * agedFactor
		}
		if math.Abs(a-want) > 1e-9*math.Max(1, want) {
			t.Errorf("link %s: C %v in the aged truth, want %v", rec.Links[l].ID, a, want)
		}
		if aged.Links[l].Status == network.Closed && rec.Links[l].Status != network.Closed {
			shut = append(shut, l)
		}
	}
	if len(shut) != 1 {
		t.Fatalf("%d links shut in the aged truth and open in the records, want 1", len(shut))
	}
	peakSolve := func(n *network.Network) *hydraulic.Solution {
		t.Helper()
		s, err := hydraulic.NewSolver(n, hydraulic.Options{})
		if err != nil {
			t.Fatal(err)
		}
		var best []float64
		bestSum := -1.0
		for h := range 24 {
			d := demand.Base(n, time.Date(2024, 1, 1, h, 0, 0, 0, time.UTC), nil, nil)
			sum := 0.0
			for i, v := range d {
				if n.Nodes[i].Kind == network.Junction {
					sum += v
				}
			}
			if sum > bestSum {
				best, bestSum = d, sum
			}
		}
		sol, err := s.Solve(&hydraulic.Conditions{Demand: best}, nil)
		if err != nil {
			t.Fatal(err)
		}
		return sol
	}
	sol := peakSolve(aged)
	var out, used float64
	for l := range aged.Links {
		lk := &aged.Links[l]
		for _, end := range []struct {
			node int
			sign float64
		}{{lk.From, 1}, {lk.To, -1}} {
			if k := aged.Nodes[end.node].Kind; k == network.Reservoir || k == network.Tank {
				out += end.sign * sol.Flow[l]
			}
		}
	}
	for i := range aged.Nodes {
		if aged.Nodes[i].Kind != network.Junction {
			continue
		}
		used += sol.Demand[i]
		if p := sol.Pressure[i]; math.IsNaN(p) || p <= 0 {
			t.Errorf("junction %s: pressure %v m at peak with %s shut", aged.Nodes[i].ID, p, aged.Links[shut[0]].ID)
		}
	}
	if math.Abs(out-used) > 1e-6*used {
		t.Errorf("sources send %.6f L/s, junctions use %.6f L/s at peak with %s shut", out, used, aged.Links[shut[0]].ID)
	}
	open := aged.Clone()
	open.Links[shut[0]].Status = rec.Links[shut[0]].Status
	ref := peakSolve(open)
	eff := 0.0
	for _, s := range cfg.Sensors {
		if i, ok := aged.NodeIndex(s.At); ok && s.Quantity == telemetry.Pressure {
			eff = math.Max(eff, math.Abs(sol.Pressure[i]-ref.Pressure[i]))
		}
	}
	if eff < shutLow || eff > shutHigh {
		t.Errorf("shutting %s moves a logger by at most %.2f m at peak, want %g-%g m", aged.Links[shut[0]].ID, eff, shutLow, shutHigh)
	}
	t.Logf("aged %s, shut %s (%.2f m)", old, aged.Links[shut[0]].ID, eff)
}
