package service

import (
	"io"
	"os"
	"testing"
	"time"

	"github.com/rs/zerolog"
)

// A crash between a reading being made durable (and acknowledged) and the
// next detector-state save must not lose it for the detector: a restarted
// service reads the stored readings after its restored state's last step
// and so comes back to where the crashed one was.
func TestRestartCatchesUpFromTheStore(t *testing.T) {
	dir := t.TempDir()
	cfg, net := demoService(t, dir)
	a, err := New(cfg, Options{Logger: zerolog.New(io.Discard), NoWallClock: true})
	if err != nil {
		t.Fatal(err)
	}
	start := time.Date(2026, 3, 2, 0, 0, 0, 0, time.UTC)
	feed(t, a, net, cfg, start, 24*time.Hour, 1)
	a.mu.Lock()
	a.saveState() // the state as of the end of day 1
	a.mu.Unlock()
	// Day 2 goes into the store and the pipeline, then the process dies
	// before its next state save.
	feed(t, a, net, cfg, start.Add(24*time.Hour), 24*time.Hour, 2)
	crashed := a.LastStep()
	a.closeStore()
	if a.alerts != nil {
		a.alerts.Close()
	}
	if _, err := os.Stat(a.statePath()); err != nil {
		t.Fatal(err)
	}
	b, err := New(cfg, Options{Logger: zerolog.New(io.Discard), NoWallClock: true})
	if err != nil {
		t.Fatal(err)
	}
	defer func() {
		b.closeStore()
		if b.alerts != nil {
			b.alerts.Close()
		}
	}()
	// The crashed run's test helper flushed its last steps; the restarted
	// one keeps the newest few open until later readings come (one step of
	// lateness, one for the spike check, the step in hand): it is within
	// four steps of the crashed one.
	if got := b.LastStep(); got.Before(crashed.Add(-4 * cfg.Step)) {
		t.Errorf("restarted at step %s, the crashed service had reached %s", got, crashed)
	}
	if got := b.LastStep(); !got.After(start.Add(24 * time.Hour)) {
		t.Errorf("restarted detector stayed at its saved state (%s)", got)
	}
}
