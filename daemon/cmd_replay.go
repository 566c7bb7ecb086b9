package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"runtime/pprof"
	"time"

	"plumbline/daemon/config"
	"plumbline/daemon/pipeline"
	"plumbline/daemon/report"
	"plumbline/daemon/service"
	"plumbline/ingest/readfile"
	"plumbline/ingest/source"
	"plumbline/model/calib"
	"plumbline/model/detect"
	"plumbline/model/finding"
	"plumbline/model/network"
	"plumbline/model/telemetry"
)

// replayResult is what a replay produced.
type replayResult struct {
	Run      string            `json:"run"`
	From     time.Time         `json:"from"`
	To       time.Time         `json:"to"`
	Readings int               `json:"readings"`
	Steps    int               `json:"steps"`
	Findings []finding.Finding `json:"findings"`
	Seconds  float64           `json:"seconds"`
	// Warnings are data problems the run went past (bad lines, readings
	// out of time): printed on stderr even with --quiet.
	Warnings []string `json:"warnings,omitempty"`
}

// replayOptions are the shared flags of replay and report.
type replayOptions struct {
	configPath, from, to, src, run string
	noStore                        bool
	// trace receives the detector's decisions (--trace), or nil.
	trace io.Writer
}

func (o *replayOptions) register(fs interface {
	StringVar(*string, string, string, string)
	BoolVar(*bool, string, bool, string)
}) {
	fs.StringVar(&o.configPath, "config", "", "service configuration (YAML)")
	fs.StringVar(&o.from, "from", "", "start of the period (RFC 3339; default: the first reading)")
	fs.StringVar(&o.to, "to", "", "end of the period (RFC 3339; default: the last reading)")
	fs.StringVar(&o.src, "source", "store", "readings file (CSV or line protocol) or \"store\"")
	fs.StringVar(&o.run, "run", "", "run id tagged on every result point (default replay-<time>)")
	fs.BoolVar(&o.noStore, "no-store", false, "do not write results to the store")
}

// runReplay implements `plumbline replay`: the detector over stored or
// file readings, through the same pipeline as the live service.
func runReplay(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("replay", "--config F [--from T --to T] [--source S] [--findings F]", stderr)
	var o replayOptions
	o.register(fs)
	out := fs.String("findings", "findings.json", "findings file (JSON)")
	asJSON := fs.Bool("json", false, "print the result as JSON")
	quiet := fs.Bool("quiet", false, "no progress line on stderr")
	reportOut := fs.String("report", "", "also write the retrospective report (HTML, with .json and .csv beside it)")
	cpuProfile := fs.String("cpuprofile", "", "write a CPU profile of the replay to this file (for go tool pprof)")
	trace := fs.Bool("trace", false, "write the detector's decisions (alarms, hypotheses and their misfits) to stderr")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if *trace {
		o.trace = stderr
	}
	if *cpuProfile != "" {
		f, err := os.Create(*cpuProfile)
		if err != nil {
			return err
		}
		defer f.Close()
		if err := pprof.StartCPUProfile(f); err != nil {
			return err
		}
		defer pprof.StopCPUProfile()
	}
	if o.configPath == "" {
		fs.Usage()
		return errUsage
	}
	var progress io.Writer = stderr
	if *quiet {
		progress = nil
	}
	rb, onStep, err := reportHook(o, *reportOut)
	if err != nil {
		return err
	}
	res, err := replay(ctx, o, progress, onStep)
	if err != nil {
		return err
	}
	for _, w := range res.Warnings {
		fmt.Fprintln(stderr, "warning:", w)
	}
	if rb != nil {
		if _, _, err := writeReport(rb, res, *reportOut); err != nil {
			return err
		}
	}
	if err := writeFindings(*out, res.Findings); err != nil {
		return err
	}
	if *asJSON {
		enc := json.NewEncoder(stdout)
		enc.SetIndent("", "  ")
		return enc.Encode(res)
	}
	fmt.Fprintf(stdout, "replay %s: %s to %s, %d readings, %d steps in %.1f s; %d findings written to %s\n",
		res.Run, res.From.Format(time.RFC3339), res.To.Format(time.RFC3339), res.Readings, res.Steps, res.Seconds, len(res.Findings), *out)
	for _, f := range res.Findings {
		best := "-"
		if len(f.Candidates) > 0 {
			best = f.Candidates[0].ID
		}
		fmt.Fprintf(stdout, "  %-12s zone %-10s raised %s  onset %s  best %-10s %s\n", f.Kind, f.Zone,
			f.Raised.Format("2006-01-02 15:04"), f.Onset.Format("2006-01-02 15:04"), best, report.SizeText(f))
	}
	return nil
}

// replay runs the pipeline over a period. onStep, when set, sees every
// step (the report uses it).
func replay(ctx context.Context, o replayOptions, progress io.Writer, onStep func(telemetry.Snapshot, *detect.StepResult) error) (*replayResult, error) {
	cfg, err := config.LoadFile(o.configPath)
	if err != nil {
		return nil, err
	}
	shareNames(cfg.Network)
	var from, to time.Time
	if o.from != "" {
		if from, err = time.Parse(time.RFC3339, o.from); err != nil {
			return nil, fmt.Errorf("--from: %w", err)
		}
	}
	if o.to != "" {
		if to, err = time.Parse(time.RFC3339, o.to); err != nil {
			return nil, fmt.Errorf("--to: %w", err)
		}
	} else {
		to = time.Date(9999, 1, 1, 0, 0, 0, 0, time.UTC)
	}
	if !to.After(from) {
		return nil, fmt.Errorf("--to %s is not after --from %s", o.to, o.from)
	}
	if o.run == "" {
		o.run = "replay-" + time.Now().UTC().Format("20060102T150405Z")
	}
	src, closeSrc, err := openSource(cfg, o.src)
	if err != nil {
		return nil, err
	}
	defer closeSrc()
	log, _ := newLogger(io.Discard, "info", "json")
	var sink pipeline.PointSink
	if !o.noStore {
		rs, err := openSink(ctx, cfg, o.run, log)
		if err != nil {
			return nil, err
		}
		defer func() {
			dctx, cancel := context.WithTimeout(context.WithoutCancel(ctx), time.Minute)
			defer cancel()
			rs.close(dctx)
		}()
		sink = rs
	}
	res := &replayResult{Run: o.run, From: from, To: to}
	pr := newProgress(progress, from, to)
	// A replay knows its next snapshots: the model of the next steps is
	// solved on other cores while the detector works (pipeline.Options).
	popt := pipeline.Options{Config: cfg, Run: o.run, Store: sink, Start: from, Context: ctx, SolveAhead: true}
	popt.OnStep = onStep
	if o.trace != nil {
		w := o.trace
		popt.Detector.Trace = func(line string) { fmt.Fprintln(w, "trace:", line) }
	}
	p, err := pipeline.New(popt)
	if err != nil {
		return nil, err
	}
	defer p.Close()
	// The detector starts from the calibration's residual scatter by
	// hour of day when the configuration names a noise file.
	if nf := cfg.Calibration.NoiseFile; nf != "" {
		tab, err := calib.ReadNoiseFile(nf)
		if err != nil {
			return nil, err
		}
		if _, err := service.SeedNoise(p.Detector(), tab, cfg.Step); err != nil {
			fmt.Fprintf(progress, "warning: %v\n", err)
		}
	}
	start := time.Now()
	var first time.Time
	ids := make([]string, len(cfg.Sensors))
	for i, s := range cfg.Sensors {
		ids[i] = s.ID
	}
	// The source is read on a second goroutine while this one runs the
	// pipeline (same readings, same order: the results do not change).
	readErr := source.ReadAhead(ctx, src, from, to, ids, func(r telemetry.Reading) error {
		if first.IsZero() {
			first = r.Time
		}
		res.Readings++
		pr.at(r.Time, res.Readings)
		return p.Add(r)
	})
	var fileErr error
	if readErr != nil {
		// A readings file with bad lines still gave its good ones: report
		// the bad ones after the run, stop only on other errors.
		var fe *readfile.FileError
		if !errors.As(readErr, &fe) {
			return nil, readErr
		}
		fileErr = readErr
	}
	end := to
	if o.to == "" {
		end = p.Latest().Add(cfg.Step)
	}
	if err := p.Flush(end); err != nil {
		return nil, err
	}
	pr.done(res.Readings)
	if res.From.IsZero() {
		res.From = first
	}
	if o.to == "" {
		res.To = end
	}
	res.Steps = p.Steps()
	res.Findings = p.Findings()
	res.Seconds = time.Since(start).Seconds()
	if fileErr != nil {
		res.Warnings = append(res.Warnings, fileErr.Error())
	}
	if n, ex := p.Jumped(); n > 0 {
		res.Warnings = append(res.Warnings, fmt.Sprintf("%d readings lie more than %v after the readings before them and were left out (first: %s)", n, 31*24*time.Hour, ex))
	}
	if res.Readings == 0 {
		return nil, fmt.Errorf("%s: no readings of the configured sensors in the period", o.src)
	}
	return res, nil
}

// writeFindings writes a findings list as JSON (an empty list, not null).
func writeFindings(path string, fs []finding.Finding) error {
	if fs == nil {
		fs = []finding.Finding{}
	}
	b, err := json.MarshalIndent(fs, "", "  ")
	if err != nil {
		return err
	}
	if err := os.WriteFile(path, append(b, '\n'), 0o644); err != nil {
		return fmt.Errorf("findings: %w", err)
	}
	return nil
}

// shareNames makes the junctions' pattern and zone names share one copy
// of each distinct name. The values do not change; what changes is that
// comparing two equal names no longer reads their bytes: the detector
// looks both up for every junction at every step (demand.Base), and
// with a copy per junction, as the network file's decoder leaves them,
// those reads are scattered over the heap and miss the cache. Called
// before the network is shared with anything else.
func shareNames(net *network.Network) {
	if net == nil {
		return
	}
	seen := map[string]string{}
	one := func(s string) string {
		if c, ok := seen[s]; ok {
			return c
		}
		seen[s] = s
		return s
	}
	for i := range net.Nodes {
		n := &net.Nodes[i]
		n.Pattern, n.Zone = one(n.Pattern), one(n.Zone)
	}
}
