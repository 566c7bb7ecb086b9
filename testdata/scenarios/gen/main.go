// Command gen writes the detection benchmark suite: the scenario files
// under testdata/scenarios/<net>/<condition>/, the suite manifest
// testdata/scenarios/suite.tsv that scripts/bench-detect.sh runs, the
// service configuration of the 5,000-junction town (configs/town-5k.yaml)
// and the mismatched "true" network of the demo town
// (testdata/scenarios/demo/true-demo.geojson).
//
// Run it from the repository root:
//
//	go run ./testdata/scenarios/gen                      # regenerate the suite
//	go run ./testdata/scenarios/gen -true-networks DIR   # only the true networks, into DIR
//
// Everything is a pure function of the committed network files: the
// same networks give byte-identical output. Junctions, mains, valves and
// sensors are chosen by rule (farthest-point spread across each zone,
// mains by diameter), never by hand, so the suite carries over to any
// zoned network.
//
// Two conditions per scenario, after the measuring-stick issue:
//
//   - exact: the detector's model is the network the water flows in; the
//     readings carry only the sensors' own noise.
//   - realistic: 5-minute logging, pressure resolution 0.01 m, and a true
//     network whose junction demands, pipe diameters and roughness are off
//     by up to 10 % (sim.Perturb), as in the BattLeDIM 2020 benchmark
//     (Vrachimis et al. 2020, "BattLeDIM: Battle of the Leakage Detection
//     and Isolation Methods", CCWI/WDSA).
package main

import (
	"flag"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"time"

	"plumbline/daemon/config"
	"plumbline/model/network"
	"plumbline/model/sim"
	"plumbline/model/telemetry"
)

// suiteStart is the start of every scenario (a Monday, UTC).
var suiteStart = time.Date(2026, 3, 2, 0, 0, 0, 0, time.UTC)

const (
	day = 24 * time.Hour
	// quietLead is the leak-free history before the first event: the
	// detector learns for 7 days, plus one day in hand.
	quietLead = 8 * day
	// learning is the detector's learning period; the score's observed
	// period starts after it.
	learning = 7 * day
	// afterEvent is how long a run goes on after an event: two and a half
	// days, beyond the 48 h limit of the detection target for leaks of
	// 2 L/s and more; afterSmall three nights and a half, beyond the
	// 3-night target for smaller leaks.
	afterEvent = 60 * time.Hour
	afterSmall = 84 * time.Hour
	// mismatch is the model error of the realistic condition (±10 %).
	mismatch = 0.1
)

// target is one network of the suite with its service configuration.
type target struct {
	key     string // directory name under testdata/scenarios
	network string // network file, relative to the repository root
	config  string // service configuration, relative to the repository root
	// quiet is the length of the event-free scenario (false-alarm rate).
	quiet time.Duration
	// seed of the true network's perturbation.
	perturbSeed uint64
	// reduced: a smaller suite (see suite).
	reduced bool
}

var targets = []target{
	{key: "demo", network: "configs/demo-town.geojson", config: "configs/demo-town.yaml", quiet: 60 * day, perturbSeed: 2020},
	{key: "town5k", network: "testdata/network/town-5k.geojson", config: "configs/town-5k.yaml", quiet: 30 * day, perturbSeed: 2021, reduced: true},
}

func main() {
	trueDir := flag.String("true-networks", "", "write only the perturbed true networks (true-<net>.geojson) into this directory")
	flag.Parse()
	if err := run(".", ".", *trueDir); err != nil {
		fmt.Fprintln(os.Stderr, "gen:", err)
		os.Exit(1)
	}
}

// run reads the networks and service configurations under repo and
// writes the suite under out (normally both the repository root; the
// test writes into a temporary folder and compares). With trueDir set it
// writes only the true networks, there.
func run(repo, out, trueDir string) error {
	nets := map[string]*network.Network{}
	cfgs := map[string]*config.Config{}
	for _, t := range targets {
		n, err := network.ReadFile(filepath.Join(repo, t.network))
		if err != nil {
			return fmt.Errorf("%s: %w (run from the repository root)", t.network, err)
		}
		nets[t.key] = n
	}
	if trueDir == "" {
		if err := writeTown5kConfig(nets["town5k"], filepath.Join(out, "configs/town-5k.yaml")); err != nil {
			return err
		}
	}
	scs := map[string][]scenario{}
	mms := map[string]map[string]sim.Mismatch{}
	specs := map[string]agedSpec{}
	for _, t := range targets {
		cfg, err := config.LoadFile(filepath.Join(repo, t.config))
		if err != nil {
			return fmt.Errorf("%s: %w", t.config, err)
		}
		cfgs[t.key] = cfg
		if scs[t.key], err = suite(nets[t.key], cfg, t); err != nil {
			return fmt.Errorf("%s: %w", t.key, err)
		}
		aged, spec, err := agedMismatch(nets[t.key], cfg, t, scs[t.key])
		if err != nil {
			return err
		}
		specs[t.key] = spec
		mms[t.key] = map[string]sim.Mismatch{
			"realistic": {Demand: mismatch, Diameter: mismatch, Roughness: mismatch, Seed: t.perturbSeed},
			"aged":      aged,
		}
	}
	if trueDir != "" {
		for _, t := range targets {
			for _, cond := range mismatched {
				if err := writeTrue(nets[t.key], t, mms[t.key][cond], filepath.Join(trueDir, trueName(t.key, cond))); err != nil {
					return err
				}
			}
		}
		return nil
	}
	for _, cond := range mismatched {
		if err := writeTrue(nets["demo"], targets[0], mms["demo"][cond], filepath.Join(out, "testdata/scenarios/demo", trueName("demo", cond))); err != nil {
			return err
		}
	}

	var manifest strings.Builder
	manifest.WriteString("# Written by `go run ./testdata/scenarios/gen`; read by scripts/bench-detect.sh.\n")
	manifest.WriteString("# net\tcondition\tscenario\tnetwork\tconfig\tfrom\tto\n")
	for _, t := range targets {
		for _, cond := range conditions {
			dir := filepath.Join("testdata/scenarios", t.key, cond)
			if err := os.RemoveAll(filepath.Join(out, dir)); err != nil {
				return err
			}
			if err := os.MkdirAll(filepath.Join(out, dir), 0o755); err != nil {
				return err
			}
			for _, sc := range scs[t.key] {
				path := filepath.Join(dir, sc.name+".yaml")
				if err := os.WriteFile(filepath.Join(out, path), []byte(sc.yaml(t, cond, specs[t.key])), 0o644); err != nil {
					return err
				}
				fmt.Fprintf(&manifest, "%s\t%s\t%s\t%s\t%s\t%s\t%s\n", t.key, cond, path, t.network, t.config,
					suiteStart.Add(learning).Format(time.RFC3339), suiteStart.Add(sc.duration).Format(time.RFC3339))
			}
		}
	}
	return os.WriteFile(filepath.Join(out, "testdata/scenarios/suite.tsv"), []byte(manifest.String()), 0o644)
}

// conditions are the suite's conditions, in manifest order; mismatched
// those whose water flows in a true network other than the records.
var (
	conditions = []string{"exact", "realistic", "aged"}
	mismatched = []string{"realistic", "aged"}
)

// trueName is the file name of a condition's true network:
// true-<net>.geojson for the realistic condition (as before the aged one
// existed), true-<net>-<condition>.geojson otherwise.
// scripts/bench-detect.sh and scripts/benchdetect use the same rule.
func trueName(key, cond string) string {
	if cond == "realistic" {
		return "true-" + key + ".geojson"
	}
	return "true-" + key + "-" + cond + ".geojson"
}

// writeTrue writes a true network of t.
func writeTrue(net *network.Network, t target, m sim.Mismatch, path string) error {
	tn, _, err := sim.Perturb(net, m)
	if err != nil {
		return fmt.Errorf("%s: %w", t.network, err)
	}
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		return err
	}
	if err := network.WriteFile(path, tn); err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	return nil
}

// event is one injected event, written as a flow-style YAML mapping.
type event struct {
	kind   string // leak, blockage, sensor-fault
	at     string
	start  time.Duration // offset from the scenario start
	size   float64       // leak L/s
	ramp   time.Duration
	burst  bool
	open   float64 // blockage open fraction
	mode   string  // sensor-fault mode
	amount float64
}

func (e event) yaml() string {
	var b strings.Builder
	fmt.Fprintf(&b, "{kind: %s, at: %s, start: %s", e.kind, e.at, suiteStart.Add(e.start).Format(time.RFC3339))
	switch e.kind {
	case "leak":
		fmt.Fprintf(&b, ", size_lps: %s", num(e.size))
		if e.burst {
			b.WriteString(", burst: true")
		}
		if e.ramp > 0 {
			fmt.Fprintf(&b, ", ramp: %s", hours(e.ramp))
		}
	case "blockage":
		fmt.Fprintf(&b, ", open_fraction: %s", num(e.open))
	case "sensor-fault":
		fmt.Fprintf(&b, ", mode: %s", e.mode)
		if e.amount != 0 {
			fmt.Fprintf(&b, ", amount: %s", num(e.amount))
		}
	}
	b.WriteString("}")
	return b.String()
}

// scenario is one file of the suite.
type scenario struct {
	name     string
	comment  string
	duration time.Duration
	events   []event
}

func (s scenario) yaml(t target, cond string, aged agedSpec) string {
	var b strings.Builder
	fmt.Fprintf(&b, "# %s\n", s.comment)
	fmt.Fprintf(&b, "# Network: %s; service config: %s; condition: %s.\n", t.network, t.config, cond)
	switch cond {
	case "realistic":
		fmt.Fprintf(&b, "# True network: %s (sim.Perturb: demands, diameters, roughness off by up to %.0f%%, seed %d);\n",
			trueName(t.key, cond), 100*mismatch, t.perturbSeed)
		b.WriteString("# scripts/bench-detect.sh writes it and passes --true-network.\n")
	case "aged":
		fmt.Fprintf(&b, "# True network: %s (sim.Perturb: demands, diameters, roughness off by up to %.0f%%, seed %d,\n",
			trueName(t.key, cond), 100*mismatch, t.perturbSeed)
		if aged.group != "" {
			fmt.Fprintf(&b, "# the oldest pipe group %s aged to C × %s", aged.group, num(aged.factor))
		} else {
			b.WriteString("# no pipe group old enough to age")
		}
		if aged.shut != "" {
			fmt.Fprintf(&b, ", link %s shut (moves a logger by %.1f m at peak)", aged.shut, aged.effect)
		}
		b.WriteString(");\n# the operator's model keeps the records. scripts/bench-detect.sh writes it and passes --true-network.\n")
	}
	b.WriteString("# Written by `go run ./testdata/scenarios/gen`; do not edit by hand.\n")
	fmt.Fprintf(&b, "start: %s\n", suiteStart.Format(time.RFC3339))
	fmt.Fprintf(&b, "duration: %s\n", hours(s.duration))
	b.WriteString("step: 5m\n")
	fmt.Fprintf(&b, "seed: %d\n", seedOf(t.key+"/"+s.name))
	fmt.Fprintf(&b, "sensors: ../../../../%s\n", t.config)
	if cond != "exact" {
		b.WriteString("logging_interval: 5m\n")
		b.WriteString("resolution: {pressure: 0.01}\n")
		if t.key == "demo" {
			fmt.Fprintf(&b, "true_network: ../%s\n", trueName(t.key, cond))
		}
	}
	if len(s.events) == 0 {
		b.WriteString("events: []\n")
		return b.String()
	}
	b.WriteString("events:\n")
	for _, e := range s.events {
		fmt.Fprintf(&b, "  - %s\n", e.yaml())
	}
	return b.String()
}

// seedOf is a stable seed from a name (FNV-1a, 32 bits).
func seedOf(s string) uint32 {
	h := uint32(2166136261)
	for i := 0; i < len(s); i++ {
		h ^= uint32(s[i])
		h *= 16777619
	}
	return h % 1000000
}

func num(v float64) string { return fmt.Sprintf("%g", v) }

func hours(d time.Duration) string { return fmt.Sprintf("%dh", int(d/time.Hour)) }

// suite builds the scenarios of one network by rule. A full target gets
// every leak size in every zone, a burst, a slow rise and every sensor
// fault mode on both kinds of sensor; a reduced one (the large town,
// whose replay costs about 15 times more per day) gets each leak size in
// one zone, zones in turn, and one of each other kind.
func suite(net *network.Network, cfg *config.Config, t target) ([]scenario, error) {
	zones := append([]string(nil), net.Zones()...)
	sort.Strings(zones)
	nz := len(zones)
	var out []scenario
	add := func(s scenario) { out = append(out, s) }
	hour := func(i int) time.Duration { return time.Duration((i*7+3)%24) * time.Hour }
	after := func(size float64) time.Duration {
		if size < 2 {
			return afterSmall
		}
		return afterEvent
	}
	perZone := func(full int) int {
		if t.reduced {
			return 1
		}
		return full
	}

	// Single leaks: every size in every zone (reduced: zones in turn), at
	// spread junctions and at hours spread over the day.
	sizes := []float64{0.5, 1, 2, 5, 10}
	sites := map[string][]string{}
	for _, z := range zones {
		sites[z] = spreadJunctions(net, z, len(sizes)+4)
	}
	n := 0
	for zi, z := range zones {
		for si, size := range sizes {
			if t.reduced && si%nz != zi {
				continue
			}
			j := sites[z][si%len(sites[z])]
			start := quietLead + hour(n)
			add(scenario{
				name:     fmt.Sprintf("leak-%s-%s-lps", z, strings.ReplaceAll(num(size), ".", "p")),
				comment:  fmt.Sprintf("A %s L/s leak at %s (zone %s) from %s.", num(size), j, z, suiteStart.Add(start).Format("Jan 2 15:04")),
				duration: start + after(size),
				events:   []event{{kind: "leak", at: j, start: start, size: size}},
			})
			n++
		}
	}
	// Bursts: sudden large openings, daytime and evening.
	burstSizes := []float64{4, 8, 10}
	for zi, z := range zones[:perZone(nz)] {
		j := sites[z][len(sizes)+zi%4]
		start := quietLead + time.Duration(9+5*zi)*time.Hour
		size := burstSizes[zi%len(burstSizes)]
		add(scenario{
			name:     fmt.Sprintf("burst-%s", z),
			comment:  fmt.Sprintf("A burst of %s L/s at %s (zone %s).", num(size), j, z),
			duration: start + afterEvent,
			events:   []event{{kind: "leak", at: j, start: start, size: size, burst: true}},
		})
	}
	// Slow rises: leaks growing over days.
	ramps := []time.Duration{72 * time.Hour, 144 * time.Hour, 240 * time.Hour}
	riseSizes := []float64{2, 3, 5}
	for zi := range perZone(nz) {
		z := zones[(zi+1)%nz]
		j := sites[z][len(sizes)+(zi+1)%4]
		start := quietLead + hour(n+zi)
		r := ramps[zi%len(ramps)]
		size := riseSizes[zi%len(riseSizes)]
		add(scenario{
			name:     fmt.Sprintf("rise-%s-%dh", z, int(r/time.Hour)),
			comment:  fmt.Sprintf("A leak at %s (zone %s) growing to %s L/s over %s.", j, z, num(size), hours(r)),
			duration: start + r + afterEvent,
			events:   []event{{kind: "leak", at: j, start: start, size: size, ramp: r}},
		})
	}
	// Two leaks at once: in two zones, and (full) in one zone.
	{
		z1, z2 := zones[1%nz], zones[nz-1]
		a, b := sites[z1][len(sizes)+3], sites[z2][len(sizes)+2]
		start := quietLead + 20*time.Hour
		add(scenario{
			name:     fmt.Sprintf("two-leaks-%s-%s", z1, z2),
			comment:  fmt.Sprintf("Two leaks at the same time: 2.5 L/s at %s (zone %s) and 2.5 L/s at %s (zone %s).", a, z1, b, z2),
			duration: start + afterEvent,
			events: []event{
				{kind: "leak", at: a, start: start, size: 2.5},
				{kind: "leak", at: b, start: start, size: 2.5},
			},
		})
		if !t.reduced {
			z := zones[0]
			a, b := sites[z][len(sizes)+2], sites[z][len(sizes)+3]
			start := quietLead + 13*time.Hour
			add(scenario{
				name:     fmt.Sprintf("two-leaks-%s", z),
				comment:  fmt.Sprintf("Two leaks in zone %s an hour apart: 3 L/s at %s and 1.5 L/s at %s.", z, a, b),
				duration: start + time.Hour + afterSmall,
				events: []event{
					{kind: "leak", at: a, start: start, size: 3},
					{kind: "leak", at: b, start: start + time.Hour, size: 1.5},
				},
			})
		}
	}
	// Blockages on mains (the largest pipes of each zone, spread): two in
	// the first zone and one in each other (reduced: the first zone's
	// largest main and one of the second zone), then on every valve.
	fractions := []float64{0.05, 0.15, 0.3, 0.5}
	if t.reduced {
		fractions = []float64{0.3, 0.1}
	}
	meanFlow, _, err := dayFlows(net)
	if err != nil {
		return nil, err
	}
	bi := 0
	for zi, z := range zones {
		mains := spreadMains(net, z, 2, meanFlow)
		for mi, m := range mains {
			if (zi > 0 && mi > 0) || (t.reduced && (zi > 1 || mi > 0)) {
				break
			}
			f := fractions[bi%len(fractions)]
			start := quietLead + hour(bi+11)
			add(scenario{
				name:     fmt.Sprintf("blockage-%s-main-%d", z, mi+1),
				comment:  fmt.Sprintf("Main %s (zone %s, %.0f mm) left %s open.", m, z, net.Links[mustLink(net, m)].Diameter, num(f)),
				duration: start + afterEvent,
				events:   []event{{kind: "blockage", at: m, start: start, open: f}},
			})
			bi++
		}
	}
	for k := range net.Links {
		l := &net.Links[k]
		if l.Kind != network.Valve || l.Status == network.Closed {
			continue
		}
		for vi, f := range []float64{0.1, 0.3} {
			start := quietLead + time.Duration(7+8*vi)*time.Hour
			add(scenario{
				name:     fmt.Sprintf("blockage-valve-%s-%s", strings.ToLower(l.ID), strings.ReplaceAll(num(f), ".", "p")),
				comment:  fmt.Sprintf("Valve %s jammed %s open.", l.ID, num(f)),
				duration: start + afterEvent,
				events:   []event{{kind: "blockage", at: l.ID, start: start, open: f}},
			})
		}
	}
	// Sensor faults: every mode on a pressure logger and on a zone's main
	// inlet flow meter, zones taken in turn (reduced: a drifting logger
	// and an offset meter).
	loggers, meters := faultSensors(cfg, zones)
	for mi, mode := range []string{"stuck", "drift", "spike", "offset"} {
		if !t.reduced || mode == "drift" {
			p := loggers[mi%len(loggers)]
			amount := map[string]float64{"stuck": 0, "drift": 0.5, "spike": 5, "offset": -1}[mode]
			start := quietLead + hour(mi+2)
			add(scenario{
				name:     fmt.Sprintf("fault-pressure-%s", mode),
				comment:  fmt.Sprintf("Pressure logger %s (zone %s) %s%s.", p.ID, p.Zone, mode, amountWords(mode, amount, "m")),
				duration: start + afterEvent,
				events:   []event{{kind: "sensor-fault", at: p.ID, start: start, mode: mode, amount: amount}},
			})
		}
		if !t.reduced || mode == "offset" {
			m := meters[mi%len(meters)]
			// Amounts relative to the meter's mean flow, taken as a
			// quarter of its plausible maximum (DemoSensors' rule).
			mean := m.Max / 4
			famount := map[string]float64{"stuck": 0, "drift": 0.05 * mean, "spike": 0.5 * mean, "offset": -0.1 * mean}[mode]
			famount = math.Round(famount*100) / 100
			start := quietLead + hour(mi+9)
			add(scenario{
				name:     fmt.Sprintf("fault-flow-%s", mode),
				comment:  fmt.Sprintf("Flow meter %s (zone %s) %s%s.", m.ID, m.Zone, mode, amountWords(mode, famount, "L/s")),
				duration: start + afterEvent,
				events:   []event{{kind: "sensor-fault", at: m.ID, start: start, mode: mode, amount: famount}},
			})
		}
	}
	// A quiet period: no event at all, for the false-alarm rate.
	add(scenario{
		name:     fmt.Sprintf("quiet-%dd", int(t.quiet/day)),
		comment:  fmt.Sprintf("%d days with no event: every finding is a false alarm.", int(t.quiet/day)),
		duration: t.quiet,
	})
	return out, nil
}

func amountWords(mode string, amount float64, unit string) string {
	switch mode {
	case "drift":
		return fmt.Sprintf(" by %s %s a day", num(amount), unit)
	case "spike":
		return fmt.Sprintf(" of %s %s every hour", num(amount), unit)
	case "offset":
		return fmt.Sprintf(" by %s %s", num(amount), unit)
	}
	return ""
}

func mustLink(net *network.Network, id string) int {
	k, _ := net.LinkIndex(id)
	return k
}

// candidateJunctions returns the junctions of zone z with a demand that
// touch only pipes (junctions at pumps and valves belong to stations).
func candidateJunctions(net *network.Network, z string) []int {
	station := make([]bool, len(net.Nodes))
	for k := range net.Links {
		if l := &net.Links[k]; l.Kind != network.Pipe {
			station[l.From], station[l.To] = true, true
		}
	}
	var out []int
	for i := range net.Nodes {
		nd := &net.Nodes[i]
		if nd.Kind == network.Junction && nd.Zone == z && nd.Demand > 0 && !station[i] && nd.HasCoord {
			out = append(out, i)
		}
	}
	return out
}

// farthest picks k of the points by farthest-point sampling on
// great-circle distance, starting from the one nearest their centroid,
// so the picks spread over the area. Ties go to the lower index.
func farthest(pts []network.Point, k int, avoid []network.Point) []int {
	if len(pts) == 0 {
		return nil
	}
	var c network.Point
	for _, p := range pts {
		c.Lon += p.Lon / float64(len(pts))
		c.Lat += p.Lat / float64(len(pts))
	}
	minD := make([]float64, len(pts))
	for i := range minD {
		minD[i] = math.Inf(1)
	}
	for _, a := range avoid {
		for i, p := range pts {
			minD[i] = min(minD[i], network.GreatCircle(a, p))
		}
	}
	var picks []int
	first := -1
	if len(avoid) == 0 {
		for i, p := range pts {
			if first < 0 || network.GreatCircle(p, c) < network.GreatCircle(pts[first], c) {
				first = i
			}
		}
	}
	for len(picks) < k && len(picks) < len(pts) {
		next := first
		if next < 0 {
			for i := range pts {
				if minD[i] > 0 && (next < 0 || minD[i] > minD[next]) {
					next = i
				}
			}
		}
		first = -1
		if next < 0 || minD[next] == 0 {
			break
		}
		picks = append(picks, next)
		for i, p := range pts {
			minD[i] = min(minD[i], network.GreatCircle(pts[next], p))
		}
	}
	return picks
}

// spreadJunctions returns k leak sites spread across zone z.
func spreadJunctions(net *network.Network, z string, k int) []string {
	cands := candidateJunctions(net, z)
	pts := make([]network.Point, len(cands))
	for i, n := range cands {
		pts[i] = net.Nodes[n].Coord
	}
	var out []string
	for _, i := range farthest(pts, k, nil) {
		out = append(out, net.Nodes[cands[i]].ID)
	}
	return out
}

// spreadMains returns up to k mains of zone z: open pipes feeding a
// junction of the zone that carry, on the day's mean, at least
// mainShare of the zone's mean consumption (flows from dayFlows, mean),
// the one carrying most first, then spread by farthest point. A main is
// a pipe by what it carries, not by its bore: in a looped grid a wide
// pipe can carry little (one of 250 mm with 3.5 L/s, where shutting it
// moved no logger by more than 0.06 m), and blocking it is no
// blockage of the supply. Without any such pipe it falls back to the
// widest (the zone's 95th percentile of diameter).
func spreadMains(net *network.Network, z string, k int, mean []float64) []string {
	var pipes []int
	var diams []float64
	use := 0.0
	for i := range net.Nodes {
		if n := &net.Nodes[i]; n.Kind == network.Junction && n.Zone == z {
			use += n.Demand * meanPattern(net, n.Pattern)
		}
	}
	for li := range net.Links {
		l := &net.Links[li]
		to := &net.Nodes[l.To]
		if l.Kind != network.Pipe || l.Status == network.Closed || to.Kind != network.Junction || to.Zone != z {
			continue
		}
		pipes = append(pipes, li)
		diams = append(diams, l.Diameter)
	}
	if len(pipes) == 0 {
		return nil
	}
	var mains []int
	for _, li := range pipes {
		if use > 0 && mean[li] >= mainShare*use {
			mains = append(mains, li)
		}
	}
	if len(mains) == 0 {
		sort.Float64s(diams)
		cut := diams[int(0.95*float64(len(diams)-1))]
		for _, li := range pipes {
			if net.Links[li].Diameter >= cut {
				mains = append(mains, li)
			}
		}
	}
	sort.SliceStable(mains, func(a, b int) bool {
		if qa, qb := mean[mains[a]], mean[mains[b]]; qa != qb {
			return qa > qb
		}
		return net.Links[mains[a]].Length > net.Links[mains[b]].Length
	})
	mid := func(li int) network.Point {
		l := &net.Links[li]
		a, b := net.Nodes[l.From].Coord, net.Nodes[l.To].Coord
		return network.Point{Lon: (a.Lon + b.Lon) / 2, Lat: (a.Lat + b.Lat) / 2}
	}
	out := []string{net.Links[mains[0]].ID}
	rest := mains[1:]
	pts := make([]network.Point, len(rest))
	for i, li := range rest {
		pts[i] = mid(li)
	}
	for _, i := range farthest(pts, k-1, []network.Point{mid(mains[0])}) {
		out = append(out, net.Links[rest[i]].ID)
	}
	return out
}

// faultSensors returns pressure loggers (the third of each zone, zones in
// turn) and zone inlet flow meters (the first inlet of each zone) for the
// sensor-fault scenarios.
func faultSensors(cfg *config.Config, zones []string) (loggers, meters []telemetry.Sensor) {
	for _, z := range zones {
		var zl []telemetry.Sensor
		for _, s := range cfg.Sensors {
			if s.Zone == z && s.Quantity == telemetry.Pressure && strings.HasPrefix(s.ID, "P-"+z+"-") {
				zl = append(zl, s)
			}
		}
		if len(zl) > 0 {
			loggers = append(loggers, zl[min(2, len(zl)-1)])
		}
		if zc, ok := cfg.Zone(z); ok && len(zc.Inlets) > 0 {
			if s, ok := cfg.Sensor(meterOf(cfg, zc.Inlets)); ok {
				meters = append(meters, s)
			}
		}
	}
	return loggers, meters
}

// meterOf picks the inlet meter with the largest plausible maximum (the
// zone's main supply).
func meterOf(cfg *config.Config, ids []string) string {
	best, bestMax := ids[0], -1.0
	for _, id := range ids {
		if s, ok := cfg.Sensor(id); ok && s.Max > bestMax {
			best, bestMax = id, s.Max
		}
	}
	return best
}

// mainShare is the part of a zone's mean consumption a pipe must carry
// to count as a main for the suite's blockage scenarios (our choice: a
// tenth, so that a zone fed by one or two trunks has a handful).
const mainShare = 0.1

// meanPattern is the mean of the named pattern over its cycle (1 for a
// junction without one).
func meanPattern(net *network.Network, name string) float64 {
	p := net.Patterns[name]
	if len(p) == 0 {
		return 1
	}
	s := 0.0
	for _, v := range p {
		s += v
	}
	return s / float64(len(p))
}
