package main

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"os"

	"plumbline/daemon/config"
	"plumbline/daemon/report"
	"plumbline/model/detect"
	"plumbline/model/leakage"
	"plumbline/model/telemetry"
)

// runReport implements `plumbline report`: the replay of the period
// (same pipeline), then one self-contained HTML report with JSON and CSV
// summaries beside it.
func runReport(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("report", "--config F [--from T --to T] [--source S] --out report.html", stderr)
	var o replayOptions
	o.register(fs)
	out := fs.String("out", "report.html", "report file (HTML); the .json and .csv summaries go beside it")
	n1 := fs.Float64("n1", leakage.DefaultN1, "FAVAD leakage exponent N1 for the night-day factor")
	asJSON := fs.Bool("json", false, "print the summary as JSON")
	quiet := fs.Bool("quiet", false, "no progress line on stderr")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if o.configPath == "" || *out == "" {
		fs.Usage()
		return errUsage
	}
	var progress io.Writer = stderr
	if *quiet {
		progress = nil
	}
	files, sum, err := replayReport(ctx, o, progress, *out, *n1)
	if err != nil {
		return err
	}
	if *asJSON {
		enc := json.NewEncoder(stdout)
		enc.SetIndent("", "  ")
		return enc.Encode(sum)
	}
	fmt.Fprintf(stdout, "report %s: %d findings, %d plots; summaries %s and %s\n", files.HTML, len(sum.Findings), files.Plots, files.JSON, files.CSV)
	return nil
}

// replayReport runs the replay with a report builder on its step hook
// and writes the report to out.
func replayReport(ctx context.Context, o replayOptions, progress io.Writer, out string, n1 float64) (report.Files, *report.Summary, error) {
	cfg, err := config.LoadFile(o.configPath)
	if err != nil {
		return report.Files{}, nil, err
	}
	b, err := report.NewBuilder(report.Options{Config: cfg, N1: n1})
	if err != nil {
		return report.Files{}, nil, err
	}
	res, err := replay(ctx, o, progress, func(s telemetry.Snapshot, r *detect.StepResult) error { return b.Add(s, r) })
	if err != nil {
		return report.Files{}, nil, err
	}
	for _, w := range res.Warnings {
		fmt.Fprintln(os.Stderr, "warning:", w)
	}
	files, sum, err := writeReport(b, res, out)
	return files, sum, err
}

// writeReport finishes a report builder fed by a replay and writes it.
func writeReport(b *report.Builder, res *replayResult, out string) (report.Files, *report.Summary, error) {
	rep := b.Finish(report.Meta{Run: res.Run, From: res.From, To: res.To, Readings: res.Readings}, res.Findings)
	files, err := rep.WriteFiles(out)
	if err != nil {
		return files, nil, err
	}
	return files, &rep.Summary, nil
}

// reportHook returns a report builder and the replay step hook feeding
// it when out is set (replay --report); nil and nil otherwise.
func reportHook(o replayOptions, out string) (*report.Builder, func(telemetry.Snapshot, *detect.StepResult) error, error) {
	if out == "" {
		return nil, nil, nil
	}
	cfg, err := config.LoadFile(o.configPath)
	if err != nil {
		return nil, nil, err
	}
	b, err := report.NewBuilder(report.Options{Config: cfg})
	if err != nil {
		return nil, nil, err
	}
	return b, func(s telemetry.Snapshot, r *detect.StepResult) error { return b.Add(s, r) }, nil
}
