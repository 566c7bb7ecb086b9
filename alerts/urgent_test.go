package alerts

import (
	"context"
	"encoding/json"
	"fmt"
	"testing"
	"time"

	"github.com/rs/zerolog"
	bolt "go.etcd.io/bbolt"

	"plumbline/model/finding"
)

// A pressing notification (an urgent alert raised, made urgent,
// escalated, unshelved or handed over) goes ahead of the lower-priority
// messages already waiting for its channel: three small leaks are
// queued for the webhook before a burst, and a real HTTP receiver gets
// the burst first, then the others in their order.
func TestUrgentFirstInOutbox(t *testing.T) {
	secret := []byte("order")
	hook := newHookReceiver(t, secret)
	cfg, err := ParseConfig(fmt.Appendf(nil, `
severity: {leak: [{min_size_lps: 5, level: urgent}]}
receivers: [{id: ana, webhook: true}]
routes: [{levels: [{notify: [ana]}]}]
channels: {webhook: {url: %q, secret_file: unused}}
`, hook.srv.URL))
	if err != nil {
		t.Fatal(err)
	}
	wh, err := NewWebhook(*cfg.Channels.Webhook, secret, nil)
	if err != nil {
		t.Fatal(err)
	}
	clock := &testClock{t: time.Date(2026, 3, 2, 3, 0, 0, 0, time.UTC)}
	m, err := Open(Options{Config: cfg, DataDir: t.TempDir(), Channels: []Channel{wh}, Logger: zerolog.Nop(), Now: clock.Now, TickInterval: -1})
	if err != nil {
		t.Fatal(err)
	}
	defer m.Close()
	ctx := context.Background()
	for i, size := range []float64{1, 1, 1, 9} {
		f := finding.Finding{Kind: finding.Leak, Zone: "west", SizeLPS: size, Candidates: []finding.Candidate{{ID: fmt.Sprintf("J-%d", i+1), Score: 0.9}}}
		if _, err := m.Observe(ctx, f); err != nil {
			t.Fatal(err)
		}
	}
	stop := runFor(t, m)
	defer stop()
	waitFor(t, "every delivery", func() bool { return m.Stats().Pending == 0 })
	var got []string
	for _, p := range hook.payloads() {
		got = append(got, fmt.Sprintf("%s %s %s", p.Alert.ID, p.Notice, p.Alert.Severity))
	}
	want := []string{"AL-000004 raised urgent", "AL-000001 raised low", "AL-000002 raised low", "AL-000003 raised low"}
	if fmt.Sprint(got) != fmt.Sprint(want) {
		t.Errorf("delivery order:\n got %q\nwant %q", got, want)
	}
}

// The outbox order: pressing notifications first, each group by id, and
// a pressing notification stored under the plain key (by a version
// before this order) is still found and removed.
func TestOutboxOrder(t *testing.T) {
	st, err := openStore(t.TempDir())
	if err != nil {
		t.Fatal(err)
	}
	defer st.close()
	note := func(sev Severity, notice Notice) Notification {
		return Notification{Channel: ChannelEmail, Notice: notice, To: &Recipient{ID: "ana"}, Alert: Alert{ID: "AL-" + string(sev) + "-" + string(notice), Severity: sev}}
	}
	b := newBatch()
	b.notes = []Notification{
		note(Low, NoticeRaised),
		note(Urgent, NoticeRepeated), // a reminder: not pressing
		note(High, NoticeEscalated),
		note(Urgent, NoticeEscalated),
		note(Urgent, NoticeRaised),
		{Channel: ChannelLog, Notice: NoticeRaised, Alert: Alert{ID: "AL-feed", Severity: Urgent}}, // another channel
	}
	if err := st.commit(b); err != nil {
		t.Fatal(err)
	}
	// A pressing notification written under the plain key, as before.
	legacy := note(Urgent, NoticeUpdated)
	legacy.ID = 1000
	if err := st.db.Update(func(tx *bolt.Tx) error {
		v, _ := json.Marshal(legacy)
		return tx.Bucket(bucketOutbox).Put(outboxKey(legacy.Channel, legacy.ID), v)
	}); err != nil {
		t.Fatal(err)
	}
	var got []string
	for range 10 {
		n, ok, err := st.next(ChannelEmail)
		if err != nil {
			t.Fatal(err)
		}
		if !ok {
			break
		}
		got = append(got, n.Alert.ID)
		if err := st.done(n, DeliveryRecord{Notification: n.ID, Channel: n.Channel, OK: true}); err != nil {
			t.Fatal(err)
		}
	}
	want := []string{"AL-urgent-escalated", "AL-urgent-raised", "AL-low-raised", "AL-urgent-repeated", "AL-high-escalated", "AL-urgent-updated"}
	if fmt.Sprint(got) != fmt.Sprint(want) {
		t.Errorf("email outbox order:\n got %q\nwant %q", got, want)
	}
	if n, _ := st.pending(); n != 1 {
		t.Errorf("%d notifications pending, want the log channel's one", n)
	}
	if n, ok, _ := st.next(ChannelLog); !ok || n.Alert.ID != "AL-feed" {
		t.Errorf("log channel: got %+v, %v", n, ok)
	}
}

// A full outbox drops the newest notifications, but never the news of an
// urgent alert: with room for three, a fourth small leak's notice is
// dropped and counted, and a burst's is kept.
func TestOutboxFullKeepsUrgent(t *testing.T) {
	cfg, err := ParseConfig([]byte(`
outbox_limit: 3
feeds: []
severity: {leak: [{min_size_lps: 5, level: urgent}]}
receivers: [{id: ana}]
routes: [{levels: [{notify: [ana]}]}]
`))
	if err != nil {
		t.Fatal(err)
	}
	m, err := Open(Options{Config: cfg, DataDir: t.TempDir(), Logger: zerolog.Nop(), TickInterval: -1})
	if err != nil {
		t.Fatal(err)
	}
	defer m.Close()
	ctx := context.Background()
	for i, size := range []float64{1, 1, 1, 1, 9} {
		f := finding.Finding{Kind: finding.Leak, Zone: "west", SizeLPS: size, Candidates: []finding.Candidate{{ID: fmt.Sprintf("J-%d", i+1), Score: 0.9}}}
		if _, err := m.Observe(ctx, f); err != nil {
			t.Fatal(err)
		}
	}
	if st := m.Stats(); st.Dropped != 1 || st.Pending != 4 {
		t.Fatalf("stats %+v, want 1 dropped and 4 pending", st)
	}
	var got []string
	for _, n := range drainOutbox(t, m) {
		got = append(got, n.Alert.ID+" "+string(n.Notice))
	}
	want := []string{"AL-000001 raised", "AL-000002 raised", "AL-000003 raised", "AL-000005 raised"}
	if fmt.Sprint(got) != fmt.Sprint(want) {
		t.Errorf("outbox:\n got %q\nwant %q", got, want)
	}
}
