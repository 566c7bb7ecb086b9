package alerts

import (
	"bytes"
	"context"
	"flag"
	"fmt"
	"os"
	"strings"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"plumbline/model/finding"
)

var update = flag.Bool("update", false, "rewrite EXAMPLES.md from the formatting code")

// exampleAlert is the invented alert shown in EXAMPLES.md.
func exampleAlert() Alert {
	return Alert{
		ID: "AL-000017", Zone: "north", Kind: finding.Leak, State: Unacknowledged, Severity: Urgent, Route: "bursts",
		Level: 0, LevelSince: time.Date(2026, 3, 2, 3, 30, 0, 0, time.UTC),
		Raised:  time.Date(2026, 3, 2, 3, 30, 0, 0, time.UTC),
		Onset:   time.Date(2026, 3, 2, 3, 10, 0, 0, time.UTC),
		Updated: time.Date(2026, 3, 2, 3, 30, 0, 0, time.UTC), LastEvidence: time.Date(2026, 3, 2, 3, 30, 0, 0, time.UTC),
		SizeLPS: 6.2, MaxSizeLPS: 6.2,
		Candidates: []finding.Candidate{{ID: "J-117", Score: 0.93}, {ID: "J-118", Score: 0.88}, {ID: "J-120", Score: 0.41}},
		Evidence:   "inflow step +6.2 L/s at 03:10; pressure residuals match J-117",
		Findings:   3,
	}
}

// TestExamples renders one message of every channel with the real
// formatting code and compares EXAMPLES.md (go test -run TestExamples
// -update ./alerts rewrites it).
func TestExamples(t *testing.T) {
	a := exampleAlert()
	ana := &Recipient{ID: "ana", Name: "Ana Brook", Email: "ana@example.org"}
	link := "https://ops.example.org/alerts/AL-000017"
	raised := Notification{ID: 41, Channel: ChannelEmail, Notice: NoticeRaised, Time: a.Raised, To: ana, Alert: a, Levels: 3, Link: link}

	esc := a
	esc.Level, esc.SizeLPS, esc.MaxSizeLPS, esc.Findings = 1, 6.8, 6.8, 5
	esc.LevelSince = a.Raised.Add(15 * time.Minute)
	escalated := Notification{ID: 44, Channel: ChannelEmail, Notice: NoticeEscalated, Time: esc.LevelSince, To: &Recipient{ID: "ben", Name: "Ben Weir", Email: "ben@example.org"}, Alert: esc, Levels: 3, Link: link}

	acked := esc
	acked.State, acked.AckedBy, acked.AckedAt, acked.AckComment = Acknowledged, "ben", a.Raised.Add(21*time.Minute), "crew on the way"
	acked.Updated = acked.AckedAt
	feed := Notification{ID: 47, Channel: ChannelMQTT, Notice: NoticeAcknowledged, Time: acked.AckedAt, Alert: acked, Levels: 3, Link: link, Actor: "ben", Comment: "crew on the way"}

	summary := Notification{ID: 90, Channel: ChannelEmail, Notice: NoticeSummary, Time: a.Raised.Add(time.Hour), To: ana, Link: "https://ops.example.org/alerts",
		Held: []Held{
			{Time: a.Raised.Add(9 * time.Minute), AlertID: "AL-000021", Notice: NoticeRaised, Zone: "north", Kind: finding.Leak, Severity: High},
			{Time: a.Raised.Add(12 * time.Minute), AlertID: "AL-000022", Notice: NoticeRaised, Zone: "east", Kind: finding.Blockage, Severity: Low},
			{Time: a.Raised.Add(20 * time.Minute), AlertID: "AL-000021", Notice: NoticeRepeated, Zone: "north", Kind: finding.Leak, Severity: High},
		}}

	var b strings.Builder
	b.WriteString("# Alert messages\n\n")
	b.WriteString("Produced by `TestExamples` in alerts/examples_test.go from the real formatting\n")
	b.WriteString("code (`go test ./alerts -run TestExamples -update` rewrites this file). The\n")
	b.WriteString("alert, people and addresses are invented.\n\n")

	mail, err := FormatEmail("plumbline <alerts@example.org>", raised)
	if err != nil {
		t.Fatal(err)
	}
	b.WriteString("## Email: a new urgent alert\n\nThe whole message as sent (quoted-printable, UTF-8; CRLF shown as newlines):\n\n```\n")
	b.WriteString(strings.ReplaceAll(string(mail), "\r\n", "\n"))
	b.WriteString("```\n\n")

	b.WriteString("## Email: escalated to the next level\n\nSubject: `" + Subject(escalated) + "`\n\n```\n" + TextBody(escalated) + "```\n\n")
	b.WriteString("## Email: summary of what the hourly cap held back\n\nSubject: `" + Subject(summary) + "`\n\n```\n" + TextBody(summary) + "```\n\n")

	body, err := MarshalPayload(Notification{ID: raised.ID, Channel: ChannelWebhook, Notice: raised.Notice, Time: raised.Time, To: &Recipient{ID: "ana", Name: "Ana Brook"}, Alert: a, Levels: 3, Link: link})
	if err != nil {
		t.Fatal(err)
	}
	const ts = "1772422200" // 2026-03-02T03:30:00Z
	fmt.Fprintf(&b, "## Webhook: POST with an HMAC-SHA256 signature\n\nThe signature is HMAC-SHA256 of `TIMESTAMP.BODY` with the shared secret\n(here `example-secret`), in lower-case hex.\n\n```\nPOST /hooks/plumbline HTTP/1.1\nContent-Type: application/json\n%s: %s\n%s: %s\n%s: %d\n\n%s\n```\n\n",
		HeaderTimestamp, ts, HeaderSignature, Sign([]byte("example-secret"), ts, body), HeaderNotification, raised.ID, body)

	mq, _ := NewMQTT(MQTTConfig{TopicPrefix: "town/alerts", QoS: 1}, PublisherFunc(func(string, byte, bool, []byte) error { return nil }))
	topic, retained := mq.Topic(feed)
	payload, _ := MarshalPayload(feed)
	fmt.Fprintf(&b, "## MQTT: retained state of one alert (for SCADA)\n\nTopic `%s`, QoS 1, retained %v. Every change replaces the\nretained message, so a subscriber always finds the current state; a cleared\nalert keeps its last (cleared) state.\n\n```json\n%s\n```\n\n", topic, retained, payload)
	personal := raised
	personal.Channel = ChannelMQTT
	ptopic, pret := mq.Topic(personal)
	fmt.Fprintf(&b, "Personal notifications go to `%s` (retained %v) with the same payload shape.\n\n", ptopic, pret)

	var logBuf bytes.Buffer
	lc := NewLogChannel(zerolog.New(&logBuf))
	if err := lc.Send(context.Background(), Notification{ID: 42, Channel: ChannelLog, Notice: NoticeRaised, Time: a.Raised, Alert: a, Levels: 3, Link: link}); err != nil {
		t.Fatal(err)
	}
	b.WriteString("## Log: one JSON line per notification (zerolog)\n\n```json\n" + logBuf.String() + "```\n")

	got := b.String()
	if *update {
		if err := os.WriteFile("EXAMPLES.md", []byte(got), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile("EXAMPLES.md")
	if err != nil {
		t.Fatalf("EXAMPLES.md: %v (run with -update)", err)
	}
	if string(want) != got {
		t.Errorf("EXAMPLES.md differs from the formatting code; rerun with -update and review.\n--- got:\n%s", got)
	}
	// The person-facing text carries what a person needs to act.
	for _, need := range []string{"zone north", "Size: 6.2 L/s", "Since: 2026-03-02 03:10 UTC", "1. J-117 (score 0.93)", link} {
		if !strings.Contains(TextBody(raised), need) {
			t.Errorf("email body lacks %q", need)
		}
	}
}
