package alerts

import (
	"context"
	"fmt"
	"runtime"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"plumbline/model/finding"
)

// TestBurstThousandFindings: 1,000 findings for one event in ten minutes
// give one alert, and the receiver (a real HTTP server) gets exactly the
// hourly cap of notifications, then one summary when the hour allows.
func TestBurstThousandFindings(t *testing.T) {
	secret := []byte("burst")
	hook := newHookReceiver(t, secret)
	cfg, err := ParseConfig(fmt.Appendf(nil, `
clear_after: 30m
hourly_cap: 4
severity: {leak: [{min_size_lps: 5, level: urgent}]}
receivers: [{id: ana, webhook: true}]
routes: [{repeat: 2m, levels: [{notify: [ana]}]}]
channels: {webhook: {url: %q, secret_file: unused}}
`, hook.srv.URL))
	if err != nil {
		t.Fatal(err)
	}
	wh, _ := NewWebhook(*cfg.Channels.Webhook, secret, nil)
	t0 := time.Date(2026, 3, 2, 2, 0, 0, 0, time.UTC)
	clock := &testClock{t: t0}
	m, err := Open(Options{Config: cfg, DataDir: t.TempDir(), Channels: []Channel{wh}, Logger: zerolog.Nop(), Now: clock.Now, TickInterval: -1})
	if err != nil {
		t.Fatal(err)
	}
	defer m.Close()
	stop := runFor(t, m)
	defer stop()
	ctx := context.Background()
	for i := range 1000 {
		clock.Set(t0.Add(time.Duration(i) * 600 * time.Millisecond))
		cands := []finding.Candidate{{ID: "J-7", Score: 0.9}, {ID: "J-8", Score: 0.8}}
		if i%2 == 1 {
			cands[0], cands[1] = cands[1], cands[0]
		}
		if _, err := m.Observe(ctx, finding.Finding{Kind: finding.Leak, Zone: "south", SizeLPS: 8 + float64(i%5)/10, Candidates: cands}); err != nil {
			t.Fatal(err)
		}
		if i%100 == 0 {
			m.Tick(ctx, clock.Now())
		}
	}
	for min := 10; min <= 59; min++ {
		clock.Set(t0.Add(time.Duration(min) * time.Minute))
		m.Tick(ctx, clock.Now())
	}
	waitFor(t, "deliveries", func() bool { return m.Stats().Pending == 0 })
	alerts, _ := m.Alerts(true)
	if len(alerts) != 1 || alerts[0].Findings != 1000 {
		t.Fatalf("alerts: got %d (%+v), want one with 1000 findings", len(alerts), alerts)
	}
	if got := len(hook.payloads()); got != 4 {
		t.Errorf("notifications in the first hour: got %d, want the cap of 4", got)
	}
	clock.Set(t0.Add(time.Hour + time.Minute))
	m.Tick(ctx, clock.Now())
	waitFor(t, "summary", func() bool { return len(hook.payloads()) == 5 })
	last := hook.payloads()[4]
	// Held: repeats every 2 min from 8 min until the return to normal at
	// about 40 min, and the return itself.
	if last.Notice != NoticeSummary || len(last.Held) < 10 {
		t.Errorf("last message: got %s with %d held, want a summary of the held repeats", last.Notice, len(last.Held))
	}
}

// TestRunStops checks that Run's goroutines end when its context does.
func TestRunStops(t *testing.T) {
	before := runtime.NumGoroutine()
	m, err := Open(Options{DataDir: t.TempDir(), Logger: zerolog.Nop(), TickInterval: time.Millisecond})
	if err != nil {
		t.Fatal(err)
	}
	stop := runFor(t, m)
	time.Sleep(20 * time.Millisecond)
	stop()
	if err := m.Close(); err != nil {
		t.Fatal(err)
	}
	deadline := time.Now().Add(2 * time.Second)
	for runtime.NumGoroutine() > before && time.Now().Before(deadline) {
		time.Sleep(10 * time.Millisecond)
	}
	if after := runtime.NumGoroutine(); after > before {
		t.Errorf("goroutines: %d before Run, %d after it stopped", before, after)
	}
	if err := m.Tick(context.Background(), time.Now()); err == nil {
		t.Error("Tick after Close: got nil error")
	}
}

// BenchmarkObserveSameEvent measures merging a finding into an open alert
// (the path a burst takes).
func BenchmarkObserveSameEvent(b *testing.B) {
	m, err := Open(Options{DataDir: b.TempDir(), Logger: zerolog.Nop(), TickInterval: -1})
	if err != nil {
		b.Fatal(err)
	}
	defer m.Close()
	ctx := context.Background()
	f := finding.Finding{Kind: finding.Leak, Zone: "z", SizeLPS: 3, Candidates: []finding.Candidate{{ID: "J-1", Score: 0.9}}}
	m.Observe(ctx, f)
	b.ResetTimer()
	for range b.N {
		if _, err := m.Observe(ctx, f); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkTick1000 measures one Tick over 1,000 open alerts with nothing due.
func BenchmarkTick1000(b *testing.B) {
	now := time.Date(2026, 3, 2, 0, 0, 0, 0, time.UTC)
	m, err := Open(Options{Config: Config{ClearAfter: 24 * time.Hour, Feeds: []string{}}, DataDir: b.TempDir(), Logger: zerolog.Nop(), Now: func() time.Time { return now }, TickInterval: -1})
	if err != nil {
		b.Fatal(err)
	}
	defer m.Close()
	ctx := context.Background()
	for i := range 1000 {
		m.Observe(ctx, finding.Finding{Kind: finding.Leak, Zone: "z", SizeLPS: 3, Candidates: []finding.Candidate{{ID: fmt.Sprintf("J-%d", i), Score: 0.9}}})
	}
	m.Tick(ctx, now)
	b.ResetTimer()
	for range b.N {
		if err := m.Tick(ctx, now); err != nil {
			b.Fatal(err)
		}
	}
}
