package service

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"time"

	"plumbline/daemon/pipeline"
	"plumbline/ingest/align"
	"plumbline/ingest/filestore"
	"plumbline/ingest/source"
	"plumbline/ingest/store"
	"plumbline/model/calib"
	"plumbline/model/network"
	"plumbline/model/telemetry"
)

// Periodic recalibration
//
// With `calibration.every` set, Run starts a goroutine (in its back
// group; it stops with Run's context, a fit in progress is cancelled)
// that every interval calls Recalibrate. Recalibrate reads the last
// `calibration.window` of readings, up to the end of the last step the
// detector processed, from the store; fits the recorded network
// (config `network`) to them with calib.Fit while detection goes on (the
// service's lock is not held while reading or fitting); and compares the
// new calibration with the network in use on the same held-out days (the
// fit's validation days) by calib.Evaluate. Only a new calibration whose
// misfit there is lower by at least AdoptMargin is adopted: it is written
// to data_dir/calibrated.geojson (and its residual scatter by hour to
// data_dir/calibrated.noise.json), and under the lock the pipeline is
// rebuilt on it: the old aligner's steps before the current one are
// closed, the detector's state (findings, baselines, night history) moves
// to the new detector and is rebased onto the new model
// (detect.Detector.Rebase), and readings of the step in hand that had
// reached the old aligner are lost (one step with fewer readings). A
// restarted service with `calibration.every` set starts from
// data_dir/calibrated.geojson when it is there.

// AdoptMargin is the relative fall of the held-out misfit a new
// calibration must show over the network in use to be adopted: 1 %, so
// that noise does not swap models back and forth (our choice).
const AdoptMargin = 0.01

// Decision is the outcome of one recalibration.
type Decision struct {
	// From and To bound the readings fitted.
	From time.Time `json:"from"`
	To   time.Time `json:"to"`
	// Snapshots is the number of hourly snapshots read; HeldOutDays the
	// days the two networks are compared on.
	Snapshots   int      `json:"snapshots"`
	HeldOutDays []string `json:"held_out_days"`
	// CurrentMisfit and NewMisfit are the mean (r/σ)² per reading on the
	// held-out days with the network in use and the new calibration.
	CurrentMisfit float64 `json:"current_misfit"`
	NewMisfit     float64 `json:"new_misfit"`
	Adopted       bool    `json:"adopted"`
	// Reason says why in words.
	Reason  string        `json:"reason"`
	Elapsed time.Duration `json:"elapsed_ns"`
	// Result is the fit (its report), nil when the fit did not run.
	Result *calib.Result `json:"-"`
}

// calibratedPath is where the adopted calibration is kept.
func (s *Service) calibratedPath() string { return filepath.Join(s.cfg.DataDir, "calibrated.geojson") }

func (s *Service) calibratedNoisePath() string {
	return filepath.Join(s.cfg.DataDir, "calibrated.noise.json")
}

// startNetwork returns the network the pipeline starts on: an adopted
// calibration kept in data_dir when periodic recalibration is on and the
// file matches the recorded network's nodes and links, else the
// recorded one; and whether it is the adopted one.
func (s *Service) startNetwork() (*network.Network, bool) {
	rec := s.cfg.Network
	if s.recalEvery() <= 0 {
		return rec, false
	}
	path := s.calibratedPath()
	if _, err := os.Stat(path); err != nil {
		return rec, false
	}
	net, err := network.ReadFile(path)
	if err == nil {
		err = sameElements(rec, net)
	}
	if err != nil {
		s.log.Warn().Err(err).Str("file", path).Msg("adopted calibration not used; starting from the recorded network")
		return rec, false
	}
	s.log.Info().Str("file", path).Msg("starting from the adopted calibration")
	return net, true
}

// sameElements checks that b has a's nodes and links, in order.
func sameElements(a, b *network.Network) error {
	if len(a.Nodes) != len(b.Nodes) || len(a.Links) != len(b.Links) {
		return fmt.Errorf("%d nodes and %d links, the recorded network has %d and %d", len(b.Nodes), len(b.Links), len(a.Nodes), len(a.Links))
	}
	for i := range a.Nodes {
		if a.Nodes[i].ID != b.Nodes[i].ID {
			return fmt.Errorf("node %d is %s, the recorded network has %s", i, b.Nodes[i].ID, a.Nodes[i].ID)
		}
	}
	for i := range a.Links {
		if a.Links[i].ID != b.Links[i].ID {
			return fmt.Errorf("link %d is %s, the recorded network has %s", i, b.Links[i].ID, a.Links[i].ID)
		}
	}
	return nil
}

// recalEvery is the recalibration interval (Options override the
// configuration).
func (s *Service) recalEvery() time.Duration {
	if s.opt.CalibrationEvery != 0 {
		return s.opt.CalibrationEvery
	}
	return s.cfg.Calibration.Every
}

func (s *Service) recalWindow() time.Duration {
	if s.opt.CalibrationWindow > 0 {
		return s.opt.CalibrationWindow
	}
	return s.cfg.Calibration.Window
}

// recalibrateLoop runs Recalibrate every interval until ctx ends (Run's
// back group owns it).
func (s *Service) recalibrateLoop(ctx context.Context, every time.Duration) {
	t := time.NewTicker(every)
	defer t.Stop()
	for {
		select {
		case <-ctx.Done():
			return
		case <-t.C:
			if _, err := s.Recalibrate(ctx); err != nil && ctx.Err() == nil {
				s.log.Error().Err(err).Msg("recalibration failed; the network in use stays")
			}
		}
	}
}

// LastCalibration returns the last recalibration's decision (nil before
// the first).
func (s *Service) LastCalibration() *Decision {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.lastDecision
}

// Recalibrate fits the recorded network to the last window of stored
// readings and adopts the result if it validates better than the network
// in use (see "Periodic recalibration" above). It is safe to call while
// the service runs; one recalibration runs at a time. An error means no
// decision could be made (no readings, a failed fit, a cancelled ctx);
// the network in use then stays.
func (s *Service) Recalibrate(ctx context.Context) (*Decision, error) {
	s.recalMu.Lock()
	defer s.recalMu.Unlock()
	began := time.Now()
	s.mu.Lock()
	end, cur := s.lastStep, s.net
	s.mu.Unlock()
	if end.IsZero() {
		return nil, errors.New("recalibration: no step processed yet")
	}
	dec := &Decision{From: end.Add(-s.recalWindow()), To: end}
	snaps, err := s.windowSnapshots(ctx, dec.From, dec.To)
	if err != nil {
		return nil, err
	}
	dec.Snapshots = len(snaps)
	zones := map[string]*time.Location{}
	// The zones' balance meters: each metered zone is fitted
	// inflow-matched, as the detector models it (as `calibrate` does).
	balances := map[string]calib.ZoneMeters{}
	for _, z := range s.cfg.Zones {
		zones[z.ID] = z.TimeZone
		balances[z.ID] = calib.ZoneMeters{Inlets: z.Inlets, Outlets: z.Outlets}
	}
	res, err := calib.FitChecked(ctx, calib.Problem{Network: s.cfg.Network, Sensors: s.cfg.Sensors, Snapshots: snaps, Zones: zones, Balances: balances}, calib.Settings{})
	if err != nil {
		return nil, fmt.Errorf("recalibration: %w", err)
	}
	dec.Result = res
	dec.HeldOutDays = res.Validation.Days
	held := map[string]bool{}
	for _, d := range res.Validation.Days {
		held[d] = true
	}
	var hs []telemetry.Snapshot
	for _, sn := range snaps {
		if held[sn.Step.UTC().Format("2006-01-02")] {
			hs = append(hs, sn)
		}
	}
	switch {
	case len(hs) == 0:
		dec.Reason = "no held-out day to compare the networks on"
	default:
		p := calib.Problem{Sensors: s.cfg.Sensors, Snapshots: hs, Zones: zones, Balances: balances}
		p.Network = cur
		evCur, err := calib.Evaluate(ctx, p, calib.Settings{})
		if err != nil {
			return nil, fmt.Errorf("recalibration: network in use on the held-out days: %w", err)
		}
		p.Network = res.Network
		evNew, err := calib.Evaluate(ctx, p, calib.Settings{})
		if err != nil {
			return nil, fmt.Errorf("recalibration: new calibration on the held-out days: %w", err)
		}
		dec.CurrentMisfit, dec.NewMisfit = evCur.Misfit, evNew.Misfit
		if evNew.Misfit < evCur.Misfit*(1-AdoptMargin) {
			dec.Adopted = true
			dec.Reason = fmt.Sprintf("held-out misfit %.3g with the new calibration against %.3g with the network in use", evNew.Misfit, evCur.Misfit)
		} else {
			dec.Reason = fmt.Sprintf("held-out misfit %.3g with the new calibration is not %.0f %% below %.3g with the network in use", evNew.Misfit, 100*AdoptMargin, evCur.Misfit)
		}
	}
	if dec.Adopted {
		if err := s.adopt(ctx, res.Network, cur, snaps, zones); err != nil {
			return nil, err
		}
	}
	dec.Elapsed = time.Since(began)
	ev := s.log.Info()
	if !dec.Adopted {
		ev = s.log.Warn()
	}
	ev.Bool("adopted", dec.Adopted).Time("from", dec.From).Time("to", dec.To).Int("snapshots", dec.Snapshots).
		Strs("held_out_days", dec.HeldOutDays).Float64("current_misfit", dec.CurrentMisfit).Float64("new_misfit", dec.NewMisfit).
		Float64("fit_misfit_before", res.MisfitBefore).Float64("fit_misfit_after", res.MisfitAfter).
		Str("status", res.Status.String()).Str("reason", dec.Reason).Dur("elapsed", dec.Elapsed).Msg("recalibration")
	s.mu.Lock()
	s.lastDecision = dec
	s.mu.Unlock()
	return dec, nil
}

// windowSnapshots reads the window's readings from the store through the
// service's aligner settings and keeps one snapshot an hour.
func (s *Service) windowSnapshots(ctx context.Context, from, to time.Time) ([]telemetry.Snapshot, error) {
	var src source.Source
	if s.fileSt != nil {
		src = s.fileSt
	} else {
		sc := store.Config{URL: s.cfg.Store.URL, Org: s.cfg.Store.Org, Bucket: s.cfg.Store.Bucket}
		if s.cfg.Store.TokenFile != "" {
			b, err := os.ReadFile(s.cfg.Store.TokenFile)
			if err != nil {
				return nil, fmt.Errorf("recalibration: store token: %w", err)
			}
			sc.Token = string(trimSpace(b))
		}
		is, err := store.NewSource(sc)
		if err != nil {
			return nil, fmt.Errorf("recalibration: %w", err)
		}
		defer is.Close()
		src = is
	}
	th := calib.NewThinner(time.Hour)
	var kept []telemetry.Snapshot
	c := s.cfg
	al, err := align.New(align.Config{Step: c.Step, Lateness: c.Step, Sensors: c.Sensors, Start: from, StuckAfter: 2 * time.Hour},
		func(sn telemetry.Snapshot) {
			if th.Keep(sn) {
				sn.Values = append([]telemetry.Aggregate(nil), sn.Values...)
				kept = append(kept, sn)
			}
		})
	if err != nil {
		return nil, err
	}
	ids := make([]string, len(c.Sensors))
	for i, sn := range c.Sensors {
		ids[i] = sn.ID
	}
	err = src.Read(ctx, from, to, ids, func(r telemetry.Reading) error { al.Add(r); return nil })
	var le *filestore.LineError
	if err != nil && ctx.Err() == nil && errors.As(err, &le) {
		// Unreadable store lines were skipped; the rest is good.
		s.log.Warn().Err(err).Msg("recalibration: some stored lines unreadable; fitted without them")
		err = nil
	}
	if err != nil {
		return nil, fmt.Errorf("recalibration: reading %s to %s: %w", from.Format(time.RFC3339), to.Format(time.RFC3339), err)
	}
	al.Flush(to)
	if len(kept) == 0 {
		return nil, fmt.Errorf("recalibration: no readings from %s to %s", from.Format(time.RFC3339), to.Format(time.RFC3339))
	}
	return kept, nil
}

// adopt writes the new calibration to data_dir and rebuilds the
// pipeline on it, carrying the detector's state over.
func (s *Service) adopt(ctx context.Context, net, prev *network.Network, snaps []telemetry.Snapshot, zones map[string]*time.Location) error {
	tmp := s.calibratedPath() + ".new"
	if err := network.WriteFile(tmp, net); err != nil {
		return fmt.Errorf("recalibration: %w", err)
	}
	if err := os.Rename(tmp, s.calibratedPath()); err != nil {
		return fmt.Errorf("recalibration: %w", err)
	}
	if ev, err := calib.Evaluate(ctx, calib.Problem{Network: net, Sensors: s.cfg.Sensors, Snapshots: snaps, Zones: zones}, calib.Settings{}); err == nil {
		if err := calib.WriteNoiseFile(s.calibratedNoisePath(), calib.NoiseFrom(ev, snaps[len(snaps)-1].Step)); err != nil {
			s.log.Warn().Err(err).Msg("residual scatter of the adopted calibration not written")
		}
	}
	cfg := *s.cfg
	cfg.Network = net
	s.mu.Lock()
	defer s.mu.Unlock()
	old := s.pipe
	cut := old.Aligner().Watermark().Truncate(s.cfg.Step)
	if err := old.Flush(cut); err != nil {
		return fmt.Errorf("recalibration: closing the steps before %s: %w", cut.Format(time.RFC3339), err)
	}
	np, err := pipeline.New(pipeline.Options{Config: &cfg, Store: s.sink, OnStep: s.onStep, Start: cut})
	if err != nil {
		return fmt.Errorf("recalibration: %w", err)
	}
	st, err := old.Detector().State()
	if err == nil {
		err = np.Detector().Restore(st)
	}
	if err == nil {
		err = np.Detector().Rebase(prev)
	}
	if err != nil {
		return fmt.Errorf("recalibration: carrying the detector's state over: %w", err)
	}
	s.pipe, s.net = np, net
	s.saveState()
	return nil
}
