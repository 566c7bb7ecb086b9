package mqtt

import (
	"fmt"
	"io"
	"log/slog"
	"testing"
	"time"

	mochi "github.com/mochi-mqtt/server/v2"
	"github.com/mochi-mqtt/server/v2/listeners"

	"plumbline/internal/testenv"
	"plumbline/model/telemetry"
)

// TestWebsocket ingests over ws:// from a real (in-process) broker's
// websocket listener, through our connection function.
func TestWebsocket(t *testing.T) {
	addr := fmt.Sprintf("127.0.0.1:%d", testenv.FreePort(t))
	srv := mochi.New(&mochi.Options{Logger: slog.New(slog.NewTextHandler(io.Discard, nil))})
	if err := srv.AddHook(new(allowAll), nil); err != nil {
		t.Fatal(err)
	}
	if err := srv.AddListener(listeners.NewWebsocket(listeners.Config{ID: "ws", Address: addr})); err != nil {
		t.Fatal(err)
	}
	if err := srv.Serve(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = srv.Close() })
	url := "ws://" + addr

	pipe := newPipe(t, []telemetry.Sensor{{ID: "F-1", Quantity: telemetry.Flow, Topic: "w/F-1", Unit: "gpm"}})
	sink := newCollector()
	c, err := New(Config{URL: url, ClientID: "ws-sub"}, pipe, sink, testLogger(t))
	if err != nil {
		t.Fatal(err)
	}
	stop := runClient(t, c)
	waitConnected(t, c)
	pub := newPublisher(t, url, "ws-pub")
	now := time.Now().UTC().Add(-time.Minute).Truncate(time.Second)
	var msgs []message
	for i := 0; i < 100; i++ {
		msgs = append(msgs, message{"w/F-1", fmt.Sprintf(`{"value":%d,"time":%d}`, i, now.Add(time.Duration(i)*time.Second).Unix())})
	}
	pub.publishAll(msgs, 100, nil)
	sink.waitFor(t, 100, 10*time.Second)
	stop()
	// 10 US gpm = 0.6309020 L/s (NIST SP 811 (2008) App. B.8: gpm = 6.309020E-05 m³/s).
	if r := sink.seen[key{"F-1", now.Add(10 * time.Second).UnixNano()}]; relDiff(r.Value, 0.6309020) > 1e-6 {
		t.Errorf("10 gpm → %v L/s, want 0.6309020", r.Value)
	}
}
