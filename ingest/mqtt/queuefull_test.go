package mqtt

import (
	"fmt"
	"testing"
	"time"

	"plumbline/internal/testenv"
	"plumbline/model/telemetry"
)

func queueTestMessages(topic string, n int) []message {
	now := time.Now().UTC().Add(-time.Minute)
	var msgs []message
	for i := 0; i < n; i++ {
		msgs = append(msgs, message{topic, fmt.Sprintf(`{"value":%d,"time":%d}`, i, now.Add(time.Duration(i)*time.Millisecond).UnixMilli())})
	}
	return msgs
}

// TestQueueFullRedelivered checks the documented queue-full policy against
// a real Mosquitto: with a queue smaller than the broker's in-flight window
// (1000 in the test broker) and a stalled sink, messages are dropped
// unacknowledged and counted; each reconnect makes the broker redeliver
// them, and nothing is lost.
func TestQueueFullRedelivered(t *testing.T) {
	m := testenv.StartMosquitto(t)
	sensors := []telemetry.Sensor{{ID: "P-3", Quantity: telemetry.Pressure, Topic: "q/P-3", Unit: "m"}}
	pipe := newPipe(t, sensors)
	sink := newCollector()
	gate := make(chan struct{})
	sink.fail = func() error { <-gate; return nil } // stall until the gate opens
	c, err := New(Config{URL: m.URL(), ClientID: "queue-full", QueueSize: 16, BatchSize: 4, MaxReconnectInterval: time.Second}, pipe, sink, testLogger(t))
	if err != nil {
		t.Fatal(err)
	}
	stop := runClient(t, c)
	waitConnected(t, c)
	const n = 200
	pub := newPublisher(t, m.URL(), "queue-full-pub")
	pub.publishAll(queueTestMessages("q/P-3", n), n, nil)
	deadline := time.Now().Add(10 * time.Second)
	for c.Stats().Received < n && time.Now().Before(deadline) {
		time.Sleep(10 * time.Millisecond)
	}
	dropped := c.Stats().Dropped
	if dropped == 0 {
		t.Fatalf("no message dropped with a queue of 16 and a stalled sink: %+v", c.Stats())
	}
	close(gate)
	time.Sleep(100 * time.Millisecond)
	if got := sink.distinct(); got >= n {
		t.Fatalf("all %d delivered without a reconnect, though %d were dropped", got, dropped)
	}
	// Each reconnect redelivers what is still unacknowledged; a
	// redelivered burst can overflow the small queue again, so it may take
	// several.
	restarts := 0
	for sink.distinct() < n && restarts < 30 {
		before := sink.distinct()
		m.Restart()
		restarts++
		waitConnected(t, c)
		deadline := time.Now().Add(3 * time.Second)
		for sink.distinct() == before && time.Now().Before(deadline) {
			time.Sleep(10 * time.Millisecond)
		}
		if sink.distinct() == before {
			t.Fatalf("restart %d: no progress (%d of %d)", restarts, before, n)
		}
	}
	sink.waitFor(t, n, 10*time.Second)
	stop()
	t.Logf("dropped %d of %d, all delivered after %d reconnects (%d repeats)", c.Stats().Dropped, n, restarts, sink.repeats)
}

// TestStalledSinkNoDrop: with the default queue (larger than the broker's
// in-flight window) a stalled sink drops nothing: the broker holds back
// what does not fit in its window, and all arrives once the sink resumes.
func TestStalledSinkNoDrop(t *testing.T) {
	m := testenv.StartMosquitto(t)
	sensors := []telemetry.Sensor{{ID: "P-4", Quantity: telemetry.Pressure, Topic: "q/P-4", Unit: "m"}}
	pipe := newPipe(t, sensors)
	sink := newCollector()
	gate := make(chan struct{})
	sink.fail = func() error { <-gate; return nil }
	c, err := New(Config{URL: m.URL(), ClientID: "stalled"}, pipe, sink, testLogger(t))
	if err != nil {
		t.Fatal(err)
	}
	stop := runClient(t, c)
	waitConnected(t, c)
	const n = 5000
	pub := newPublisher(t, m.URL(), "stalled-pub")
	pub.publishAll(queueTestMessages("q/P-4", n), 1000, nil)
	time.Sleep(300 * time.Millisecond)
	if got := c.Stats().Received; got > 1000 {
		t.Errorf("received %d while stalled: more than the broker's window of 1000", got)
	}
	close(gate)
	sink.waitFor(t, n, 30*time.Second)
	stop()
	if s := c.Stats(); s.Dropped != 0 {
		t.Errorf("dropped %d, want 0", s.Dropped)
	}
}
