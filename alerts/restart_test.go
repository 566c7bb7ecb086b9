package alerts

import (
	"context"
	"fmt"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"plumbline/model/finding"
)

// runFor starts m.Run and returns a function that stops it and waits.
func runFor(t *testing.T, m *Manager) func() {
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan struct{})
	go func() { m.Run(ctx); close(done) }()
	return func() { cancel(); <-done }
}

// crash closes the store without the orderly flush of Close, as a killed
// process would leave it.
func crash(t *testing.T, m *Manager) {
	t.Helper()
	m.mu.Lock()
	m.closed = true
	m.mu.Unlock()
	if err := m.st.close(); err != nil {
		t.Fatal(err)
	}
}

// TestRestartMidEscalation stops the service in the middle of an
// escalation, with one notification still in the outbox, and checks that
// after the restart no alert is lost, nothing already delivered is sent
// again, the pending one is sent once, and the escalation happens when due.
func TestRestartMidEscalation(t *testing.T) {
	secret := []byte("restart-secret")
	hook := newHookReceiver(t, secret)
	dir := t.TempDir()
	cfg, err := ParseConfig(fmt.Appendf(nil, `
clear_after: 2h
severity:
  leak: [{min_size_lps: 5, level: urgent}]
receivers:
  - {id: ana, webhook: true}
  - {id: ben, webhook: true}
routes:
  - match: {severities: [urgent]}
    levels:
      - {notify: [ana], ack_timeout: 15m}
      - {notify: [ben]}
channels:
  webhook: {url: %q, secret_file: unused, backoff: 10ms}
`, hook.srv.URL))
	if err != nil {
		t.Fatal(err)
	}
	open := func(clock *testClock) *Manager {
		wh, err := NewWebhook(*cfg.Channels.Webhook, secret, nil)
		if err != nil {
			t.Fatal(err)
		}
		m, err := Open(Options{Config: cfg, DataDir: filepath.Join(dir, "data"), Channels: []Channel{wh}, Logger: zerolog.Nop(), Now: clock.Now, TickInterval: -1})
		if err != nil {
			t.Fatal(err)
		}
		return m
	}
	t0 := time.Date(2026, 3, 2, 2, 0, 0, 0, time.UTC)
	clock := &testClock{t: t0}
	ctx := context.Background()
	leak := func(node string) finding.Finding {
		return finding.Finding{Kind: finding.Leak, Zone: "north", SizeLPS: 8, Onset: clock.Now(), Raised: clock.Now(), Candidates: []finding.Candidate{{ID: node, Score: 0.9}}}
	}

	// First life: AL-000001 raised and delivered to ana.
	m := open(clock)
	stop := runFor(t, m)
	if _, err := m.Observe(ctx, leak("J-1")); err != nil {
		t.Fatal(err)
	}
	waitFor(t, "first raise", func() bool { return len(hook.payloads()) == 1 && m.Stats().Pending == 0 })
	stop()
	// Ten minutes on, a second alert is raised but the process dies before
	// delivering it.
	clock.Set(t0.Add(10 * time.Minute))
	if err := m.Tick(ctx, clock.Now()); err != nil {
		t.Fatal(err)
	}
	if _, err := m.Observe(ctx, leak("J-40")); err != nil {
		t.Fatal(err)
	}
	if got := m.Stats().Pending; got != 2 { // the webhook to ana and the log feed
		t.Fatalf("pending before crash: got %d, want 2", got)
	}
	crash(t, m)

	// Second life, 12 minutes after the first raise.
	clock.Set(t0.Add(12 * time.Minute))
	m = open(clock)
	defer m.Close()
	alerts, _ := m.Alerts(false)
	if len(alerts) != 2 || alerts[0].State != Unacknowledged || alerts[0].Level != 0 || alerts[1].ID != "AL-000002" {
		t.Fatalf("after restart: got %+v, want AL-000001 and AL-000002 unacknowledged at level 1", alerts)
	}
	stop = runFor(t, m)
	defer stop()
	waitFor(t, "pending raise after restart", func() bool { return len(hook.payloads()) == 2 })
	for _, min := range []int{13, 14} {
		clock.Set(t0.Add(time.Duration(min) * time.Minute))
		m.Tick(ctx, clock.Now())
	}
	waitFor(t, "outbox", func() bool { return m.Stats().Pending == 0 })
	if got := len(hook.payloads()); got != 2 {
		t.Fatalf("before the ack timeout: %d webhook calls, want 2", got)
	}
	clock.Set(t0.Add(15 * time.Minute))
	m.Tick(ctx, clock.Now())
	clock.Set(t0.Add(16 * time.Minute))
	m.Tick(ctx, clock.Now())
	waitFor(t, "escalation", func() bool { return len(hook.payloads()) == 3 })
	time.Sleep(50 * time.Millisecond) // room for a wrong extra delivery to show
	var got []string
	for _, p := range hook.payloads() {
		got = append(got, fmt.Sprintf("%s %s %s", p.Alert.ID, p.Notice, p.To.ID))
	}
	want := []string{"AL-000001 raised ana", "AL-000002 raised ana", "AL-000001 escalated ben"}
	if fmt.Sprint(got) != fmt.Sprint(want) {
		t.Errorf("webhook deliveries across the restart:\n got %q\nwant %q", got, want)
	}
	// The person's hourly window survived the restart too.
	m.mu.Lock()
	sent := len(m.people["ana"].Sent)
	m.mu.Unlock()
	if sent != 2 {
		t.Errorf("ana's hourly window after restart: %d sends, want 2", sent)
	}
}

func TestWebhookFailures(t *testing.T) {
	secret := []byte("k")
	hook := newHookReceiver(t, secret)
	wh, err := NewWebhook(WebhookConfig{URL: hook.srv.URL}, secret, nil)
	if err != nil {
		t.Fatal(err)
	}
	n := Notification{ID: 7, Notice: NoticeRaised, Alert: Alert{ID: "AL-000009", Zone: "z", Kind: finding.Leak}}
	hook.mu.Lock()
	hook.status = 400
	hook.mu.Unlock()
	if err := wh.Send(context.Background(), n); err == nil || !IsPermanent(err) {
		t.Errorf("400: got %v, want a permanent error", err)
	}
	hook.mu.Lock()
	hook.status = 503
	hook.mu.Unlock()
	if err := wh.Send(context.Background(), n); err == nil || IsPermanent(err) {
		t.Errorf("503: got %v, want a retryable error", err)
	}
	// The dispatcher gives up after the configured attempts and logs it.
	m, err := Open(Options{Config: Config{Channels: ChannelsConfig{Webhook: &WebhookConfig{URL: hook.srv.URL, SecretFile: "unused", Delivery: Delivery{Attempts: 3, Backoff: time.Millisecond}}}, Receivers: []Receiver{{ID: "a", Webhook: true}}}, DataDir: t.TempDir(), Channels: []Channel{wh}, Logger: zerolog.Nop(), TickInterval: -1})
	if err != nil {
		t.Fatal(err)
	}
	defer m.Close()
	m.mu.Lock()
	b := newBatch()
	b.notes = append(b.notes, Notification{Channel: ChannelWebhook, Notice: NoticeRaised, To: &Recipient{ID: "a"}, Alert: n.Alert})
	m.commitLocked(b)
	m.mu.Unlock()
	stop := runFor(t, m)
	waitFor(t, "failed delivery", func() bool { return m.Stats().Failed == 1 })
	stop()
	recs, _ := m.Deliveries()
	if len(recs) != 1 || recs[0].OK || recs[0].Attempts != 3 || recs[0].Error == "" {
		t.Errorf("delivery log: got %+v, want one failure after 3 attempts", recs)
	}
	hook.mu.Lock()
	calls := hook.calls
	hook.mu.Unlock()
	if calls != 2+3 {
		t.Errorf("receiver saw %d requests, want 5", calls)
	}
}

func TestEmailFailures(t *testing.T) {
	mailer := newSMTPReceiver(t, "u", "right")
	mailer.rejectTo = "gone@example.org"
	n := Notification{ID: 1, Notice: NoticeRaised, To: &Recipient{ID: "x", Email: "gone@example.org"}, Alert: Alert{ID: "AL-000001", Zone: "z", Kind: finding.Leak}}
	good := SMTPConfig{Host: "127.0.0.1", Port: mailer.port, Username: "u", From: "a@example.org", StartTLS: true, CAFile: mailer.caFile}
	e, err := NewEmail(good, []byte("right"), nil)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	if err := e.Send(ctx, n); err == nil || !IsPermanent(err) {
		t.Errorf("550 recipient: got %v, want a permanent error", err)
	}
	wrong, _ := NewEmail(good, []byte("wrong"), nil)
	n.To.Email = "ok@example.org"
	if err := wrong.Send(ctx, n); err == nil || !IsPermanent(err) || strings.Contains(err.Error(), "wrong") {
		t.Errorf("bad password: got %v, want a permanent error without the password", err)
	}
	// A certificate the client does not trust: no mail, no password sent.
	untrusted := good
	untrusted.CAFile = ""
	u, _ := NewEmail(untrusted, []byte("right"), nil)
	if err := u.Send(ctx, n); err == nil {
		t.Error("untrusted certificate: got nil error")
	}
	if got := len(mailer.messages()); got != 0 {
		t.Errorf("messages received: %d, want 0", got)
	}
	if err := e.Send(ctx, Notification{ID: 2}); !IsPermanent(err) {
		t.Errorf("no recipient: got %v, want a permanent error", err)
	}
}

// TestRestartAfterDowntime: an outage longer than clear_after does not
// return alerts to normal at the first Tick after the restart; the
// hysteresis resumes where it stopped.
func TestRestartAfterDowntime(t *testing.T) {
	dir := t.TempDir()
	cfg, err := ParseConfig([]byte("clear_after: 30m\nreceivers: [{id: ana}]\nroutes: [{levels: [{notify: [ana]}]}]\n"))
	if err != nil {
		t.Fatal(err)
	}
	t0 := time.Date(2026, 3, 2, 2, 0, 0, 0, time.UTC)
	clock := &testClock{t: t0}
	open := func() *Manager {
		m, err := Open(Options{Config: cfg, DataDir: dir, Logger: zerolog.Nop(), Now: clock.Now, TickInterval: -1})
		if err != nil {
			t.Fatal(err)
		}
		return m
	}
	ctx := context.Background()
	m := open()
	m.Observe(ctx, finding.Finding{Kind: finding.Leak, Zone: "z", SizeLPS: 1})
	clock.Set(t0.Add(10 * time.Minute))
	m.Tick(ctx, clock.Now())
	crash(t, m)
	// Down for three hours; 20 minutes of the 30 remain.
	clock.Set(t0.Add(3*time.Hour + 10*time.Minute))
	m = open()
	defer m.Close()
	state := func() State {
		a, _, err := m.Get("AL-000001")
		if err != nil {
			t.Fatal(err)
		}
		return a.State
	}
	m.Tick(ctx, clock.Now())
	if s := state(); s != Unacknowledged {
		t.Fatalf("first tick after the outage: %s, want unacknowledged", s)
	}
	clock.Set(t0.Add(3*time.Hour + 29*time.Minute))
	m.Tick(ctx, clock.Now())
	if s := state(); s != Unacknowledged {
		t.Errorf("19 min after restart: %s, want unacknowledged", s)
	}
	clock.Set(t0.Add(3*time.Hour + 30*time.Minute))
	m.Tick(ctx, clock.Now())
	if s := state(); s != ReturnedUnacknowledged {
		t.Errorf("20 min after restart (30 min of watching): %s, want returned-unacknowledged", s)
	}
}
