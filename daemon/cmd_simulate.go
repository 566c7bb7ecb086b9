package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"time"

	"plumbline/model/network"
	"plumbline/model/scenario"
	"plumbline/model/sim"
)

// runSimulate implements `plumbline simulate`: synthetic telemetry and
// ground truth from a network and a scenario.
func runSimulate(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("simulate", "--network F --scenario F [--out readings.csv] [--truth truth.json] [--true-network F] [--mqtt URL --speedup X]", stderr)
	netPath := fs.String("network", "", "the operator's network file (GeoJSON)")
	scenPath := fs.String("scenario", "", "scenario file (YAML)")
	truePath := fs.String("true-network", "", "network the water really flows in (default: the scenario's true_network, else --network)")
	out := fs.String("out", "readings.csv", "readings file: .csv, or .lp/.line for line protocol; - for stdout")
	truth := fs.String("truth", "truth.json", "ground-truth file")
	mqttURL := fs.String("mqtt", "", "publish readings live to this MQTT broker instead of writing --out")
	speedup := fs.Float64("speedup", 1440, "with --mqtt: simulated seconds per real second")
	asJSON := fs.Bool("json", false, "print the run summary as JSON")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if *netPath == "" || *scenPath == "" {
		fs.Usage()
		return errUsage
	}
	net, err := network.ReadFile(*netPath)
	if err != nil {
		return err
	}
	sc, err := scenario.LoadFile(*scenPath)
	if err != nil {
		return err
	}
	water := net
	if *truePath == "" {
		*truePath = sc.TrueNetwork
	}
	if *truePath != "" {
		if water, err = network.ReadFile(*truePath); err != nil {
			return err
		}
	}
	if errs := scenario.Validate(sc, water); len(errs) > 0 {
		return errors.Join(errs...)
	}
	settings := simSettings(sc)

	var emit func(sim.Reading) error
	var flush func() error
	if *mqttURL != "" {
		pub, err := newLivePublisher(ctx, *mqttURL, sc.Sensors, *speedup, sc.Start)
		if err != nil {
			return err
		}
		defer pub.Close()
		emit, flush = pub.Publish, func() error { return nil }
	} else {
		w, closeOut, err := openOut(*out)
		if err != nil {
			return err
		}
		defer closeOut()
		if ext := strings.ToLower(filepath.Ext(*out)); ext == ".lp" || ext == ".line" {
			lw := sim.NewLineProtocolWriter(w)
			emit, flush = lw.Write, lw.Flush
		} else {
			cw := sim.NewCSVWriter(w)
			emit, flush = cw.Write, cw.Flush
		}
	}
	res, err := sim.Run(ctx, water, settings, emit, sim.Options{})
	if err != nil {
		return err
	}
	if err := flush(); err != nil {
		return err
	}
	tf, err := os.Create(*truth)
	if err != nil {
		return fmt.Errorf("truth: %w", err)
	}
	if err := sim.WriteTruth(tf, res.Truth); err != nil {
		tf.Close()
		return err
	}
	if err := tf.Close(); err != nil {
		return fmt.Errorf("truth: %w", err)
	}
	summary := map[string]any{
		"steps": res.Steps, "readings": res.Readings, "events": len(res.Truth),
		"max_balance_error_lps": res.MaxBalanceError, "readings_file": *out, "truth_file": *truth,
	}
	if *mqttURL != "" {
		summary["readings_file"] = *mqttURL
	}
	if *asJSON {
		return json.NewEncoder(stdout).Encode(summary)
	}
	fmt.Fprintf(stdout, "simulated %d steps of %s from %s: %d readings to %s, %d events to %s (largest mass-balance error %.2g L/s)\n",
		res.Steps, settings.Step, sc.Start.Format(time.RFC3339), res.Readings, summary["readings_file"], len(res.Truth), *truth, res.MaxBalanceError)
	return nil
}

// simSettings maps a scenario file onto the simulator's settings.
func simSettings(sc *scenario.Scenario) sim.Settings {
	s := sim.Settings{
		Start: sc.Start, Duration: sc.Duration, Step: sc.Step, Seed: uint64(sc.Seed),
		Sensors: sc.Sensors, Noise: sc.Noise, Resolution: sc.Resolution,
		LoggingInterval: sc.LoggingInterval, MissingFraction: sc.MissingFraction,
		LateFraction: sc.LateFraction, MaxDelay: sc.MaxDelay,
		DemandNoise: sc.DemandNoise, DailyVariation: sc.DailyVariation, WeekendPattern: sc.WeekendPattern,
	}
	for i := range sc.Events {
		e := &sc.Events[i]
		ev := sim.Event{Kind: e.Kind, At: e.At, Start: e.Start, End: e.End, SizeLPS: e.SizeLPS,
			Ramp: e.Ramp, OpenFraction: e.OpenFraction, Mode: string(e.Mode), Amount: e.Amount, Every: e.Every}
		if e.Kind == "leak" {
			ev.Exponent = e.LeakExponent()
			if e.Burst {
				ev.Ramp = 0
			}
		}
		s.Events = append(s.Events, ev)
	}
	return s
}

// openOut opens a file for writing, or stdout for "-".
func openOut(path string) (io.Writer, func() error, error) {
	if path == "-" {
		return os.Stdout, func() error { return nil }, nil
	}
	f, err := os.Create(path)
	if err != nil {
		return nil, nil, fmt.Errorf("readings: %w", err)
	}
	return f, f.Close, nil
}
