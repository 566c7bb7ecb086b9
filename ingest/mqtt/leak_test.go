package mqtt

import (
	"runtime"
	"testing"
	"time"

	"plumbline/ingest/broker"
	"plumbline/model/telemetry"
)

// TestNoGoroutineLeak: after Run returns and the broker is closed, every
// goroutine the client started is gone.
func TestNoGoroutineLeak(t *testing.T) {
	before := runtime.NumGoroutine()
	b, err := broker.Start(broker.Config{}, testLogger(t))
	if err != nil {
		t.Fatal(err)
	}
	pipe := newPipe(t, []telemetry.Sensor{{ID: "A", Quantity: telemetry.Flow, Topic: "a", Unit: "L/s"}})
	for i := 0; i < 3; i++ {
		c, err := New(Config{URL: b.URL(), ClientID: "leak"}, pipe, newCollector(), testLogger(t))
		if err != nil {
			t.Fatal(err)
		}
		stop := runClient(t, c)
		waitConnected(t, c)
		stop()
	}
	if err := b.Close(); err != nil {
		t.Fatal(err)
	}
	deadline := time.Now().Add(5 * time.Second)
	for runtime.NumGoroutine() > before && time.Now().Before(deadline) {
		time.Sleep(20 * time.Millisecond)
	}
	if n := runtime.NumGoroutine(); n > before {
		buf := make([]byte, 1<<16)
		t.Errorf("%d goroutines after stop, %d before:\n%s", n, before, buf[:runtime.Stack(buf, true)])
	}
}
