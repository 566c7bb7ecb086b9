package alerts

import (
	"context"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"
	"github.com/rs/zerolog"

	"plumbline/internal/testenv"
	"plumbline/model/finding"
)

// mqttMsg is one message seen by the test subscriber.
type mqttMsg struct {
	Topic    string
	Retained bool
	Payload  Payload
}

// mqttWatcher is a real paho client subscribed to prefix/# on the test
// Mosquitto.
type mqttWatcher struct {
	c    paho.Client
	mu   sync.Mutex
	msgs []mqttMsg
}

func connectMQTT(t *testing.T, url, id string) paho.Client {
	t.Helper()
	o := paho.NewClientOptions().AddBroker(url).SetClientID(id).SetCleanSession(true).
		SetKeepAlive(10 * time.Second).SetConnectTimeout(5 * time.Second).SetAutoReconnect(false)
	o.SetDefaultPublishHandler(func(paho.Client, paho.Message) {})
	c := paho.NewClient(o)
	tok := c.Connect()
	if !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
		t.Fatalf("mqtt connect %s: %v", url, tok.Error())
	}
	t.Cleanup(func() { c.Disconnect(250) })
	return c
}

func watchMQTT(t *testing.T, url, id, filter string) *mqttWatcher {
	t.Helper()
	w := &mqttWatcher{c: connectMQTT(t, url, id)}
	tok := w.c.Subscribe(filter, 1, func(_ paho.Client, m paho.Message) {
		var p Payload
		if len(m.Payload()) > 0 {
			if err := json.Unmarshal(m.Payload(), &p); err != nil {
				p.Summary = "undecodable: " + err.Error()
			}
		}
		w.mu.Lock()
		w.msgs = append(w.msgs, mqttMsg{Topic: m.Topic(), Retained: m.Retained(), Payload: p})
		w.mu.Unlock()
	})
	if !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
		t.Fatalf("mqtt subscribe %s: %v", filter, tok.Error())
	}
	return w
}

func (w *mqttWatcher) messages() []mqttMsg {
	w.mu.Lock()
	defer w.mu.Unlock()
	return slices.Clone(w.msgs)
}

func writeSecret(t *testing.T, dir, name, value string) string {
	t.Helper()
	p := filepath.Join(dir, name)
	if err := os.WriteFile(p, []byte(value+"\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	return p
}

// TestChannelsEndToEnd raises, updates, escalates, acknowledges and clears
// an alert through every channel against real receivers: an HTTP server
// checking the HMAC signature, an SMTP server with STARTTLS and PLAIN
// authentication, the test Mosquitto (retained state and personal topic),
// and the log.
func TestChannelsEndToEnd(t *testing.T) {
	mqttURL := testenv.MQTT(t)
	dir := t.TempDir()
	const hookSecret = "s3cret-for-hooks"
	const smtpPass = "mail-pass-7"
	hook := newHookReceiver(t, []byte(hookSecret))
	hook.fail = 1 // the first delivery is answered 503 and retried (set before any request)
	mailer := newSMTPReceiver(t, "plumbline", smtpPass)
	prefix := fmt.Sprintf("plumbline-test/%d/alerts", time.Now().UnixNano())
	watch := watchMQTT(t, mqttURL, "alerts-watch-"+filepath.Base(dir), prefix+"/#")

	cfg, err := ParseConfig(fmt.Appendf(nil, `
clear_after: 30m
update_interval: 1m
severity:
  leak: [{min_size_lps: 5, level: urgent}, {min_size_lps: 1, level: high}]
receivers:
  - {id: ana, name: Ana Brook, email: ana@example.org, webhook: true}
  - {id: ben, name: Ben Weir, email: ben@example.org, mqtt: true}
routes:
  - match: {severities: [urgent]}
    levels:
      - {notify: [ana], ack_timeout: 15m}
      - {notify: [ben]}
feeds: [log, mqtt]
channels:
  webhook: {url: %q, secret_file: %q, attempts: 3, backoff: 10ms, timeout: 5s}
  smtp: {host: 127.0.0.1, port: %d, username: plumbline, password_file: %q, from: "plumbline <alerts@example.org>", starttls: true, ca_file: %q, backoff: 10ms}
  mqtt: {topic_prefix: %q, qos: 1, backoff: 10ms}
operator_url: https://ops.example.org/
`, hook.srv.URL+"/hook", writeSecret(t, dir, "hook.secret", hookSecret), mailer.port, writeSecret(t, dir, "smtp.pass", smtpPass), mailer.caFile, prefix))
	if err != nil {
		t.Fatal(err)
	}
	pubClient := connectMQTT(t, mqttURL, "alerts-pub-"+filepath.Base(dir))
	chans, err := BuildChannels(cfg, PahoPublisher(pubClient, 10*time.Second))
	if err != nil {
		t.Fatal(err)
	}
	var logBuf syncBuffer
	logger := zerolog.New(&logBuf)
	clock := &testClock{t: time.Date(2026, 3, 2, 1, 30, 0, 0, time.UTC)}
	m, err := Open(Options{Config: cfg, DataDir: filepath.Join(dir, "data"), Channels: chans, Logger: logger, Now: clock.Now, TickInterval: -1})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan struct{})
	go func() { m.Run(ctx); close(done) }()
	defer func() {
		cancel()
		<-done
		m.Close()
		// Remove the retained state from the shared broker.
		pubClient.Publish(prefix+"/alert/north/AL-000001", 1, true, nil).WaitTimeout(5 * time.Second)
	}()
	t0 := clock.Now()
	drained := func() bool { return m.Stats().Pending == 0 }

	f := finding.Finding{Kind: finding.Leak, Zone: "north", Onset: t0.Add(-25 * time.Minute), Raised: t0, SizeLPS: 6.2,
		Candidates: []finding.Candidate{{ID: "J-117", Score: 0.93}, {ID: "J-118", Score: 0.88}}, Evidence: "inflow step +6.2 L/s at 01:05"}
	a, err := m.Observe(ctx, f)
	if err != nil || a.ID != "AL-000001" || a.State != Unacknowledged || a.Severity != Urgent {
		t.Fatalf("Observe: got %+v, %v; want AL-000001 unacknowledged urgent", a, err)
	}
	waitFor(t, "raise delivered", drained)

	// An update: bigger and a new best candidate; feeds hear of it after update_interval.
	clock.Set(t0.Add(1 * time.Minute))
	f.SizeLPS, f.Candidates = 7.4, []finding.Candidate{{ID: "J-118", Score: 0.95}, {ID: "J-117", Score: 0.9}}
	if _, err := m.Observe(ctx, f); err != nil {
		t.Fatal(err)
	}
	for _, min := range []int{2, 8, 14} {
		clock.Set(t0.Add(time.Duration(min) * time.Minute))
		if _, err := m.Observe(ctx, f); err != nil {
			t.Fatal(err)
		}
		if err := m.Tick(ctx, clock.Now()); err != nil {
			t.Fatal(err)
		}
	}
	// Not acknowledged within 15 minutes: level 2 (ben).
	clock.Set(t0.Add(15 * time.Minute))
	if err := m.Tick(ctx, clock.Now()); err != nil {
		t.Fatal(err)
	}
	waitFor(t, "escalation delivered", drained)
	clock.Set(t0.Add(20 * time.Minute))
	if _, err := m.Acknowledge(ctx, "AL-000001", "ben", "crew on the way"); err != nil {
		t.Fatal(err)
	}
	// Evidence gone 30 minutes after the last finding (at 14 min): cleared at 44 min.
	clock.Set(t0.Add(43 * time.Minute))
	m.Tick(ctx, clock.Now())
	if got, _, _ := m.Get("AL-000001"); got.State != Acknowledged {
		t.Errorf("at 43 min: state %s, want acknowledged (hysteresis)", got.State)
	}
	clock.Set(t0.Add(44 * time.Minute))
	m.Tick(ctx, clock.Now())
	if got, _, _ := m.Get("AL-000001"); got.State != Cleared {
		t.Errorf("at 44 min: state %s, want cleared", got.State)
	}
	waitFor(t, "outbox drained", drained)

	// Webhook: ana's raise (after one 503), acknowledged, cleared; all signed.
	waitFor(t, "webhook payloads", func() bool { return len(hook.payloads()) >= 3 })
	var hookNotices []string
	for _, p := range hook.payloads() {
		if p.To == nil || p.To.ID != "ana" || p.Alert == nil || p.Alert.ID != "AL-000001" {
			t.Errorf("webhook payload for %+v, want ana and AL-000001", p.To)
			continue
		}
		hookNotices = append(hookNotices, string(p.Notice))
	}
	if want := []string{"raised", "acknowledged", "cleared"}; !slices.Equal(hookNotices, want) {
		t.Errorf("webhook notices: got %v, want %v", hookNotices, want)
	}
	hook.mu.Lock()
	bad := hook.bad
	hook.mu.Unlock()
	if bad != 0 {
		t.Errorf("webhook: %d requests with a bad signature", bad)
	}
	if p := hook.payloads()[0]; p.Alert.SizeLPS != 6.2 || p.Alert.Candidates[0].ID != "J-117" || p.Link != "https://ops.example.org/alerts/AL-000001" || p.Alert.Levels != 2 {
		t.Errorf("webhook raise payload: got %+v", p.Alert)
	}

	// Email: ana raised/ack/cleared, ben escalated/ack/cleared, over STARTTLS with auth.
	waitFor(t, "emails", func() bool {
		if len(mailer.messages()) >= 6 {
			return true
		}
		if m.Stats().Failed > 0 {
			recs, _ := m.Deliveries()
			t.Fatalf("deliveries failed: %+v", recs)
		}
		return false
	})
	byTo := map[string][]string{}
	for _, msg := range mailer.messages() {
		if !msg.TLS || msg.User != "plumbline" || msg.From != "alerts@example.org" {
			t.Errorf("email to %s: tls %v user %q from %q; want STARTTLS, user plumbline, from alerts@example.org", msg.To, msg.TLS, msg.User, msg.From)
		}
		byTo[msg.To] = append(byTo[msg.To], msg.Header.Get("Subject"))
	}
	if got := len(byTo["ana@example.org"]); got != 3 {
		t.Errorf("emails to ana: got %d %q, want 3", got, byTo["ana@example.org"])
	}
	if got := len(byTo["ben@example.org"]); got != 3 {
		t.Errorf("emails to ben: got %d %q, want 3", got, byTo["ben@example.org"])
	}
	first := mailer.messages()[0]
	for _, want := range []string{"zone north", "Size: 6.2 L/s", "Since: 2026-03-02 01:05 UTC", "1. J-117 (score 0.93)", "https://ops.example.org/alerts/AL-000001", "inflow step"} {
		if !strings.Contains(first.Body, want) {
			t.Errorf("first email body lacks %q:\n%s", want, first.Body)
		}
	}
	if s := first.Header.Get("Subject"); !strings.HasPrefix(s, "[URGENT] NEW: leak in zone north, 6.2 L/s, best J-117 (AL-000001)") {
		t.Errorf("first email subject: got %q", s)
	}
	var escal string
	for _, msg := range mailer.messages() {
		if msg.To == "ben@example.org" && strings.Contains(msg.Header.Get("Subject"), "ESCALATED") {
			escal = msg.Body
		}
	}
	if !strings.Contains(escal, "ESCALATED to level 2 of 2") || !strings.Contains(escal, "Size: 7.4 L/s") || !strings.Contains(escal, "1. J-118") {
		t.Errorf("escalation email to ben:\n%s", escal)
	}

	// MQTT: retained state per alert, and ben's personal notifications.
	stateTopic := prefix + "/alert/north/AL-000001"
	waitFor(t, "mqtt cleared state", func() bool {
		for _, msg := range watch.messages() {
			if msg.Topic == stateTopic && msg.Payload.Alert != nil && msg.Payload.Alert.State == Cleared {
				return true
			}
		}
		return false
	})
	var states, benNotices []string
	for _, msg := range watch.messages() {
		switch msg.Topic {
		case stateTopic:
			states = append(states, string(msg.Payload.Notice)+"/"+string(msg.Payload.Alert.State))
		case prefix + "/notify/ben":
			benNotices = append(benNotices, string(msg.Payload.Notice))
		}
	}
	wantStates := []string{"raised/unacknowledged", "updated/unacknowledged", "updated/unacknowledged", "updated/unacknowledged", "escalated/unacknowledged", "acknowledged/acknowledged", "cleared/cleared"}
	if !slices.Equal(states, wantStates) {
		t.Errorf("mqtt state messages: got %v, want %v", states, wantStates)
	}
	if want := []string{"escalated", "acknowledged", "cleared"}; !slices.Equal(benNotices, want) {
		t.Errorf("mqtt notices to ben: got %v, want %v", benNotices, want)
	}
	// A subscriber arriving later gets the retained current state.
	late := watchMQTT(t, mqttURL, "alerts-late-"+filepath.Base(dir), stateTopic)
	waitFor(t, "retained state", func() bool { return len(late.messages()) > 0 })
	if msg := late.messages()[0]; !msg.Retained || msg.Payload.Alert == nil || msg.Payload.Alert.State != Cleared {
		t.Errorf("late subscriber: got retained %v state %+v, want retained cleared", msg.Retained, msg.Payload.Alert)
	}

	// Log: one line per feed message and per log delivery.
	logText := logBuf.String()
	for _, want := range []string{`"notice":"raised"`, `"notice":"escalated"`, `"notice":"cleared"`, `"message":"alert notification"`, `"message":"delivery"`} {
		if !strings.Contains(logText, want) {
			t.Errorf("log lacks %s", want)
		}
	}
	for _, secret := range []string{hookSecret, smtpPass} {
		if strings.Contains(logText, secret) {
			t.Errorf("log contains a secret")
		}
	}

	// Delivery log: the first webhook delivery took two attempts.
	recs, err := m.Deliveries()
	if err != nil {
		t.Fatal(err)
	}
	var hookRec *DeliveryRecord
	for i, r := range recs {
		if !r.OK {
			t.Errorf("delivery %+v failed", r)
		}
		if r.Channel == ChannelWebhook && hookRec == nil {
			hookRec = &recs[i]
		}
	}
	if hookRec == nil || hookRec.Attempts != 2 {
		t.Errorf("first webhook delivery: got %+v, want 2 attempts", hookRec)
	}
}
