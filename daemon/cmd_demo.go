package main

import (
	"context"
	"crypto/rand"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"sync/atomic"
	"time"

	"plumbline/daemon/config"
	"plumbline/daemon/service"
	"plumbline/model/detect"
	"plumbline/model/finding"
	"plumbline/model/hydraulic"
	"plumbline/model/netgen"
	"plumbline/model/network"
	"plumbline/model/score"
	"plumbline/model/sim"
	"plumbline/model/telemetry"
	"plumbline/model/units"
)

// Demo timing: a history the detector learns from, then live days with
// the injected events, published over MQTT at the chosen speed-up.
const (
	demoHistoryDays = 8
	demoLiveDays    = 3
)

// runDemo implements `plumbline demo`: the demo town simulated and
// published to the embedded broker, the service detecting with the
// embedded store, the operator page up, and at the end what was found
// against what was injected.
func runDemo(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("demo", "[--speedup X] [--keep-running] [--data-dir D] [--listen ADDR]", stderr)
	speedup := fs.Float64("speedup", 1440, "simulated seconds per wall-clock second for the live days (1440: a day a minute)")
	keep := fs.Bool("keep-running", false, "keep the service and the operator page up after the demo, until interrupted")
	dataDir := fs.String("data-dir", "", "where the demo keeps its store and state (default: a new temporary folder)")
	listen := fs.String("listen", "127.0.0.1:8470", "operator page address (port 0: any free port)")
	logFormat := fs.String("log-format", "console", "service log format on stderr: console or json")
	quiet := fs.Bool("quiet", false, "service logs at warning level only")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if *speedup <= 0 {
		return fmt.Errorf("--speedup %g: must be positive", *speedup)
	}
	dir := *dataDir
	if dir == "" {
		d, err := os.MkdirTemp("", "plumbline-demo-")
		if err != nil {
			return err
		}
		dir = d
	} else if err := os.MkdirAll(dir, 0o755); err != nil {
		return fmt.Errorf("--data-dir %s: %w", dir, err)
	}
	cfg, net, err := demoConfig(dir)
	if err != nil {
		return err
	}
	level := "info"
	if *quiet {
		level = "warn"
	}
	log, err := newLogger(stderr, level, *logFormat)
	if err != nil {
		return err
	}
	events, err := demoEvents(net, cfg.Sensors)
	if err != nil {
		return err
	}
	start := time.Now().UTC().Truncate(time.Hour).Add(-(demoHistoryDays + demoLiveDays) * 24 * time.Hour)
	live := start.Add(demoHistoryDays * 24 * time.Hour)
	end := live.Add(demoLiveDays * 24 * time.Hour)
	for i := range events {
		events[i].Start = live.Add(time.Duration(i*20+6) * time.Hour)
	}

	var steps atomic.Int64
	var lastStep atomic.Int64
	svc, err := service.New(cfg, service.Options{Logger: log, NoWallClock: true, MaxPast: 30 * 24 * time.Hour, Listen: *listen, Handler: webHandler,
		OnStep: func(s telemetry.Snapshot, _ *detect.StepResult) { steps.Add(1); lastStep.Store(s.Step.Unix()) }})
	if err != nil {
		return err
	}
	runCtx, stop := context.WithCancel(ctx)
	defer stop()
	done := make(chan error, 1)
	go func() { done <- svc.Run(runCtx) }()
	select {
	case <-svc.Ready():
	case err := <-done:
		return err
	}
	fmt.Fprintf(stdout, "plumbline demo: the invented town of Quillmere (%d junctions, 3 zones, %d sensors)\n", countJunctions(net), len(cfg.Sensors))
	fmt.Fprintf(stdout, "  operator page: http://%s/\n", svc.Addr())
	fmt.Fprintf(stdout, "  MQTT broker:   %s (embedded)\n", svc.MQTTURL())
	fmt.Fprintf(stdout, "  data:          %s\n", dir)
	if tok, err := os.ReadFile(filepath.Join(dir, "api.token")); err == nil {
		fmt.Fprintf(stdout, "  operator token (for Acknowledge and Shelve on the page): %s", tok)
	}
	fmt.Fprintf(stdout, "  %d days of history go straight into the store; then %d days are published live, a day every %.0f s\n\n",
		demoHistoryDays, demoLiveDays, 86400 / *speedup)

	pub, err := newLivePublisher(runCtx, svc.MQTTURL(), cfg.Sensors, *speedup, live)
	if err != nil {
		stop()
		<-done
		return err
	}
	var published atomic.Int64
	history := make([]telemetry.Reading, 0, 4096)
	flushHistory := func() error {
		if len(history) == 0 {
			return nil
		}
		err := svc.Accept(runCtx, history)
		history = history[:0]
		return err
	}
	ticker := time.NewTicker(2 * time.Second)
	defer ticker.Stop()
	progress := func(simT time.Time) {
		select {
		case <-ticker.C:
			fmt.Fprintf(stdout, "\r  simulated %s  steps %d  findings %d   ", simT.Format("Jan 02 15:04"), steps.Load(), len(svc.Findings()))
		default:
		}
	}
	settings := sim.Settings{Start: start, Duration: end.Sub(start), Step: cfg.Step, Seed: 2026, Sensors: cfg.Sensors, Events: events,
		Resolution: map[telemetry.Quantity]float64{telemetry.Pressure: 0.01}}
	res, err := sim.Run(runCtx, net, settings, func(r sim.Reading) error {
		progress(r.Time)
		v, err := toCanonical(cfg, r.Reading)
		if err != nil {
			return err
		}
		if r.Arrival.Before(live) {
			history = append(history, v)
			if len(history) == cap(history) {
				return flushHistory()
			}
			return nil
		}
		if err := flushHistory(); err != nil {
			return err
		}
		published.Add(1)
		return pub.Publish(r)
	}, sim.Options{})
	if err == nil {
		err = flushHistory()
	}
	pub.Close()
	if err != nil && !errors.Is(err, context.Canceled) {
		stop()
		<-done
		return err
	}
	// Let the service take in the last live readings, then close the steps.
	deadline := time.Now().Add(30 * time.Second)
	for time.Now().Before(deadline) && lastStep.Load() < end.Add(-2*cfg.Step).Unix() && runCtx.Err() == nil {
		time.Sleep(200 * time.Millisecond)
	}
	if err := svc.Flush(end); err != nil {
		log.Error().Err(err).Msg("flush")
	}
	fmt.Fprintf(stdout, "\r%s\r", strings.Repeat(" ", 70))
	findings := svc.Findings()
	writeFindings(filepath.Join(dir, "findings.json"), findings)
	printDemoResult(stdout, net, res.Truth, findings, start, end)
	fmt.Fprintf(stdout, "\nfindings: %s; store and state: %s\n", filepath.Join(dir, "findings.json"), dir)
	fmt.Fprintln(stdout, "Findings are hypotheses to confirm in the field; valve operation, excavation and pressure changes follow the utility's procedures and local codes.")
	if *keep && ctx.Err() == nil {
		fmt.Fprintf(stdout, "\nthe operator page stays up at http://%s/ — press Ctrl-C to stop\n", svc.Addr())
		<-ctx.Done()
	}
	stop()
	if err := <-done; err != nil {
		return err
	}
	return nil
}

func countJunctions(net *network.Network) int {
	n := 0
	for i := range net.Nodes {
		if net.Nodes[i].Kind == network.Junction {
			n++
		}
	}
	return n
}

// toCanonical converts a simulated reading (in its sensor's unit) to
// canonical units, as the MQTT path does on ingest.
func toCanonical(cfg *config.Config, r telemetry.Reading) (telemetry.Reading, error) {
	s, ok := cfg.Sensor(r.Sensor)
	if !ok {
		return r, fmt.Errorf("reading of unknown sensor %s", r.Sensor)
	}
	v, err := unitsToCanonical(s.Quantity, r.Unit, r.Value)
	if err != nil {
		return r, fmt.Errorf("sensor %s: %w", r.Sensor, err)
	}
	r.Value = v
	return r, nil
}

// demoConfig writes the demo town's network and service configuration
// into dir and loads them as `plumbline run` would.
func demoConfig(dir string) (*config.Config, *network.Network, error) {
	net, err := netgen.DemoTown()
	if err != nil {
		return nil, nil, err
	}
	if err := network.WriteFile(filepath.Join(dir, "demo-town.geojson"), net); err != nil {
		return nil, nil, err
	}
	yml := demoConfigYAML(net, ".")
	// The operator page's Acknowledge and Shelve buttons ask for this token.
	tok := make([]byte, 12)
	if _, err := rand.Read(tok); err != nil {
		return nil, nil, err
	}
	if err := os.WriteFile(filepath.Join(dir, "api.token"), []byte(hex.EncodeToString(tok)+"\n"), 0o600); err != nil {
		return nil, nil, err
	}
	yml += "alerts:\n  clear_after: 2h\n  api_token_file: api.token\n"
	path := filepath.Join(dir, "demo-town.yaml")
	if err := os.WriteFile(path, []byte(yml), 0o644); err != nil {
		return nil, nil, err
	}
	cfg, err := config.LoadFile(path)
	if err != nil {
		return nil, nil, err
	}
	return cfg, cfg.Network, nil
}

// demoConfigYAML is the service configuration of the demo town, with its
// data under dataDir (relative to the file). configs/demo-town.yaml is
// this text with data_dir ../plumbline-data.
func demoConfigYAML(net *network.Network, dataDir string) string {
	sens := netgen.DemoSensors(net)
	var b strings.Builder
	b.WriteString(`# Service configuration of the demo town, Quillmere (an invented place):
# three metered districts, a works reservoir, a pumped hill tank and a
# pressure-reducing valve into the low zone. Used by "plumbline demo".
# Made by the demo's own code (daemon/cmd_demo.go, demoConfigYAML).
network: demo-town.geojson
step: 5m
# mqtt: omitted: the embedded broker on loopback
# store: omitted: the embedded file store under data_dir
`)
	fmt.Fprintf(&b, "data_dir: %s\nsensors:\n", dataDir)
	for _, s := range sens {
		fmt.Fprintf(&b, "  - {id: %s, quantity: %s, at: %s, topic: %s, unit: %s, accuracy: %g", s.ID, s.Quantity, s.At, s.Topic, s.Unit, s.Accuracy)
		if s.Min != s.Max {
			fmt.Fprintf(&b, ", min: %g, max: %g", s.Min, s.Max)
		}
		b.WriteString("}\n")
	}
	b.WriteString("zones:\n")
	for _, z := range netgen.DemoZones(net, sens) {
		fmt.Fprintf(&b, "  - id: %s\n    inlets: [%s]\n    outlets: [%s]\n    night: \"02:00-04:00\"\n    timezone: UTC\n    night_use_lps: %g\n",
			z.Zone, strings.Join(z.Inlets, ", "), strings.Join(z.Outlets, ", "), z.NightUseLps)
	}
	b.WriteString("http:\n  listen: 127.0.0.1:8470\n")
	return b.String()
}

// demoEvents picks the demo's three events by rule, where the town's
// loggers can see them: a leak at the central junction whose outflow moves
// the loggers most, a blockage (20% open) on the central main whose
// constriction moves them most, and an offset on a high-zone logger. The
// start times are set by the caller.
func demoEvents(net *network.Network, sensors []telemetry.Sensor) ([]sim.Event, error) {
	s, err := hydraulic.NewSolver(net, hydraulic.Options{})
	if err != nil {
		return nil, err
	}
	sol, err := s.Solve(&hydraulic.Conditions{}, nil)
	if err != nil {
		return nil, err
	}
	var obs []hydraulic.Observation
	var highLogger string
	for _, sen := range sensors {
		if sen.Quantity != telemetry.Pressure {
			continue
		}
		i, _ := net.NodeIndex(sen.At)
		if net.Nodes[i].Zone == netgen.ZoneCentral && strings.HasPrefix(sen.ID, "P-central") {
			obs = append(obs, hydraulic.NodeObservation(i))
		}
		if net.Nodes[i].Zone == netgen.ZoneHigh && highLogger == "" && strings.HasPrefix(sen.ID, "P-high") {
			highLogger = sen.ID
		}
	}
	sens, err := s.Sensitivities(sol, obs)
	if err != nil {
		return nil, err
	}
	norm := func(col func(k int) float64) float64 {
		v := 0.0
		for k := range obs {
			v += col(k) * col(k)
		}
		return math.Sqrt(v)
	}
	leakAt, bestLeak := "", 0.0
	for i := range net.Nodes {
		n := &net.Nodes[i]
		if n.Kind != network.Junction || n.Zone != netgen.ZoneCentral {
			continue
		}
		if v := norm(func(k int) float64 { return sens.Outflow[k][i] }); v > bestLeak {
			leakAt, bestLeak = n.ID, v
		}
	}
	blockAt, bestBlock := "", 0.0
	for l := range net.Links {
		lk := &net.Links[l]
		a, b := &net.Nodes[lk.From], &net.Nodes[lk.To]
		// A main inside the zone, not its inlet from the works: choking
		// the only supply main would empty the town, not test a detector.
		if lk.Kind != network.Pipe || lk.Diameter < 200 || a.Kind != network.Junction || b.Kind != network.Junction ||
			a.Zone != netgen.ZoneCentral || b.Zone != netgen.ZoneCentral {
			continue
		}
		if v := norm(func(k int) float64 { return sens.Resistance[k][l] }); v > bestBlock {
			blockAt, bestBlock = lk.ID, v
		}
	}
	if leakAt == "" || blockAt == "" || highLogger == "" {
		return nil, errors.New("demo: the demo town has no place for its events")
	}
	return []sim.Event{
		{Kind: finding.Leak, At: leakAt, SizeLPS: 3, Exponent: 0.5},
		{Kind: finding.Blockage, At: blockAt, OpenFraction: 0.2},
		{Kind: finding.SensorFault, At: highLogger, Mode: "offset", Amount: 0.6},
	}, nil
}

// printDemoResult prints what was found against what was injected.
func printDemoResult(w io.Writer, net *network.Network, truth []finding.Event, found []finding.Finding, start, end time.Time) {
	rep := score.Score(truth, found, net, score.Options{Start: start, End: end})
	fmt.Fprintln(w, "injected                                  found")
	sort.SliceStable(found, func(i, j int) bool { return found[i].Raised.Before(found[j].Raised) })
	for _, ev := range truth {
		what := fmt.Sprintf("%-12s at %-10s %s", ev.Kind, ev.At, ev.Start.Format("Jan 02 15:04"))
		got := "not found"
		for _, f := range found {
			if f.Kind == ev.Kind && !f.Raised.Before(ev.Start) {
				best := "-"
				if len(f.Candidates) > 0 {
					best = f.Candidates[0].ID
				}
				got = fmt.Sprintf("%-12s %s, %v later, best candidate %s", f.Kind, f.Raised.Format("Jan 02 15:04"), f.Raised.Sub(ev.Start).Round(time.Minute), best)
				break
			}
		}
		fmt.Fprintf(w, "  %-40s %s\n", what, got)
	}
	fmt.Fprintln(w)
	score.WriteText(w, &rep)
}

func unitsToCanonical(q telemetry.Quantity, unit string, v float64) (float64, error) {
	return units.ToCanonical(q, unit, v)
}
