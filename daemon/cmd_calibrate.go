package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"time"

	"plumbline/daemon/config"
	"plumbline/ingest/align"
	"plumbline/ingest/readfile"
	"plumbline/model/calib"
	"plumbline/model/network"
	"plumbline/model/telemetry"
)

// runCalibrate implements `plumbline calibrate`: fit the roughness of
// each pipe group and each zone's demand pattern to stored readings, and
// report how good the fit is.
func runCalibrate(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("calibrate", "--config F --from T --to T [--source S] [--out network.geojson] [--report F]", stderr)
	path := fs.String("config", "", "service configuration (YAML)")
	from := fs.String("from", "", "start of the period (RFC 3339; default: the first reading)")
	to := fs.String("to", "", "end of the period (RFC 3339; default: the last reading)")
	src := fs.String("source", "store", "readings file (CSV or line protocol) or \"store\"")
	out := fs.String("out", "", "write the calibrated network here (GeoJSON)")
	report := fs.String("report", "", "write the calibration report here (.json for JSON, else text)")
	noise := fs.String("noise", "", "write the residual scatter by sensor and hour here (JSON; default: beside --out, <name>.noise.json)")
	interval := fs.Duration("interval", time.Hour, "time between the snapshots the fit uses")
	asJSON := fs.Bool("json", false, "print the report as JSON on stdout")
	asRecorded := fs.Bool("as-recorded", false, "keep every link's status as recorded: name suspected shut valves in the report, but do not shut the best one in the calibrated network")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if *path == "" {
		fs.Usage()
		return errUsage
	}
	cfg, err := config.LoadFile(*path)
	if err != nil {
		return err
	}
	t0, t1, err := period(*from, *to)
	if err != nil {
		return err
	}
	source, closeSrc, err := openSource(cfg, *src)
	if err != nil {
		return err
	}
	defer closeSrc()

	// Readings go through the same aligner as the service; the fit keeps
	// one snapshot per interval, so memory does not grow with the period.
	th := calib.NewThinner(*interval)
	var kept []telemetry.Snapshot
	al, err := align.New(align.Config{Step: cfg.Step, Lateness: cfg.Step, Sensors: cfg.Sensors, Start: t0, StuckAfter: 2 * time.Hour},
		func(s telemetry.Snapshot) {
			if th.Keep(s) {
				s.Values = append([]telemetry.Aggregate(nil), s.Values...)
				kept = append(kept, s)
			}
		})
	if err != nil {
		return err
	}
	ids := make([]string, len(cfg.Sensors))
	for i, s := range cfg.Sensors {
		ids[i] = s.ID
	}
	var last time.Time
	pr := newProgress(stderr, t0, t1)
	n := 0
	readErr := source.Read(ctx, t0, t1, ids, func(r telemetry.Reading) error {
		al.Add(r)
		last = r.Time
		n++
		pr.at(r.Time, n)
		return nil
	})
	pr.done(n)
	var fe *readfile.FileError
	if readErr != nil && !errors.As(readErr, &fe) {
		return readErr
	}
	if readErr != nil {
		fmt.Fprintf(stderr, "warning: %v\n", readErr)
	}
	end := t1
	if *to == "" {
		end = last.Add(cfg.Step)
	}
	al.Flush(end)
	// Each zone's balance meters: the fit, like the detector, models a
	// zone's demand at its metered consumption.
	zones := map[string]*time.Location{}
	balances := map[string]calib.ZoneMeters{}
	for _, z := range cfg.Zones {
		zones[z.ID] = z.TimeZone
		balances[z.ID] = calib.ZoneMeters{Inlets: z.Inlets, Outlets: z.Outlets}
	}
	// The fit, then (unless --as-recorded) the same fit with the link the
	// closed-valve check names shut, kept if it validates better.
	fit := calib.FitChecked
	if *asRecorded {
		fit = calib.Fit
	}
	res, err := fit(ctx, calib.Problem{Network: cfg.Network, Sensors: cfg.Sensors, Snapshots: kept, Zones: zones, Balances: balances}, calib.Settings{Interval: *interval})
	if err != nil {
		return err
	}
	if *out != "" {
		if err := network.WriteFile(*out, res.Network); err != nil {
			return err
		}
		if *noise == "" {
			*noise = strings.TrimSuffix(*out, filepath.Ext(*out)) + ".noise.json"
		}
	}
	if *noise != "" {
		// The detector's noise by hour of day: the calibrated network's
		// residuals over the whole window (config calibration.noise_file),
		// against the inflow-matched model as the detector's are.
		ev, err := calib.Evaluate(ctx, calib.Problem{Network: res.Network, Sensors: cfg.Sensors, Snapshots: kept, Zones: zones, Balances: balances}, calib.Settings{Interval: *interval})
		if err != nil {
			return fmt.Errorf("noise file: %w", err)
		}
		if err := calib.WriteNoiseFile(*noise, calib.NoiseFrom(ev, end)); err != nil {
			return err
		}
	}
	if *report != "" {
		f, err := os.Create(*report)
		if err != nil {
			return fmt.Errorf("report: %w", err)
		}
		if strings.EqualFold(filepath.Ext(*report), ".json") {
			err = res.WriteJSON(f)
		} else {
			err = res.WriteText(f)
		}
		if cerr := f.Close(); err == nil {
			err = cerr
		}
		if err != nil {
			return fmt.Errorf("report: %w", err)
		}
	}
	if *asJSON {
		return res.WriteJSON(stdout)
	}
	fmt.Fprintf(stdout, "calibration over %d readings, %d snapshots\n", n, len(kept))
	if err := res.WriteText(stdout); err != nil {
		return err
	}
	if *out != "" {
		fmt.Fprintf(stdout, "\ncalibrated network written to %s (use it as the configuration's network once the report satisfies you)\n", *out)
	}
	if *noise != "" {
		fmt.Fprintf(stdout, "residual scatter by hour written to %s (the configuration's calibration.noise_file)\n", *noise)
	}
	return nil
}

// period parses --from and --to; empty means open-ended.
func period(from, to string) (time.Time, time.Time, error) {
	var t0, t1 time.Time
	var err error
	if from != "" {
		if t0, err = time.Parse(time.RFC3339, from); err != nil {
			return t0, t1, fmt.Errorf("--from: %w", err)
		}
	}
	t1 = time.Date(9999, 1, 1, 0, 0, 0, 0, time.UTC)
	if to != "" {
		if t1, err = time.Parse(time.RFC3339, to); err != nil {
			return t0, t1, fmt.Errorf("--to: %w", err)
		}
	}
	if !t1.After(t0) {
		return t0, t1, fmt.Errorf("--to %s is not after --from %s", to, from)
	}
	return t0, t1, nil
}
