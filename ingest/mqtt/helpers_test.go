package mqtt

import (
	"context"
	"crypto/tls"
	"fmt"
	"math"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"
	"github.com/rs/zerolog"

	"plumbline/ingest/decode"
	"plumbline/model/telemetry"
)

// key identifies a reading for de-duplication (at-least-once delivery).
type key struct {
	sensor string
	time   int64
}

// collector is a Sink that keeps every reading, de-duplicated.
type collector struct {
	mu      sync.Mutex
	seen    map[key]telemetry.Reading
	calls   int
	repeats int
	changed chan struct{}
	fail    func() error // optional: make Accept fail
	slow    atomic.Bool  // when set, Accept takes 100 ms (a slow spool)
}

func newCollector() *collector {
	return &collector{seen: map[key]telemetry.Reading{}, changed: make(chan struct{}, 1)}
}

func (c *collector) Accept(_ context.Context, rs []telemetry.Reading) error {
	if c.slow.Load() {
		time.Sleep(100 * time.Millisecond)
	}
	if c.fail != nil {
		if err := c.fail(); err != nil {
			return err
		}
	}
	c.mu.Lock()
	c.calls++
	for _, r := range rs {
		k := key{r.Sensor, r.Time.UnixNano()}
		if _, dup := c.seen[k]; dup {
			c.repeats++
		}
		c.seen[k] = r
	}
	c.mu.Unlock()
	select {
	case c.changed <- struct{}{}:
	default:
	}
	return nil
}

func (c *collector) distinct() int {
	c.mu.Lock()
	defer c.mu.Unlock()
	return len(c.seen)
}

// waitFor waits until at least n distinct readings arrived or the deadline
// passes; it fails the test on timeout.
func (c *collector) waitFor(t testing.TB, n int, d time.Duration) {
	t.Helper()
	deadline := time.Now().Add(d)
	for c.distinct() < n {
		if time.Now().After(deadline) {
			t.Fatalf("received %d distinct readings within %v, want %d", c.distinct(), d, n)
		}
		select {
		case <-c.changed:
		case <-time.After(50 * time.Millisecond):
		}
	}
}

// publisher is a plain paho client that publishes at QoS 1 and retries
// a message until the broker acknowledges it.
type publisher struct {
	t  testing.TB
	cl paho.Client
}

func newPublisher(t testing.TB, url, id string) *publisher {
	t.Helper()
	o := paho.NewClientOptions().AddBroker(url).SetClientID(id).
		SetCleanSession(false).SetAutoReconnect(true).SetConnectRetry(true).
		SetConnectRetryInterval(200 * time.Millisecond).SetMaxReconnectInterval(time.Second).
		SetKeepAlive(10 * time.Second).SetStore(paho.NewMemoryStore())
	cl := paho.NewClient(o)
	if err := waitToken(cl.Connect(), 10*time.Second); err != nil {
		t.Fatalf("publisher connect: %v", err)
	}
	t.Cleanup(func() { cl.Disconnect(100) })
	return &publisher{t: t, cl: cl}
}

type message struct {
	topic   string
	payload string
}

// publishAll publishes msgs in windows of `window`, republishing any whose
// token fails or times out (repeats are allowed by the design).
func (p *publisher) publishAll(msgs []message, window int, midway func(i int)) {
	p.t.Helper()
	for start := 0; start < len(msgs); start += window {
		end := min(start+window, len(msgs))
		if midway != nil {
			midway(start)
		}
		pending := msgs[start:end]
		for attempt := 0; len(pending) > 0; attempt++ {
			if attempt > 100 {
				p.t.Fatalf("publish: %d messages still failing after 100 attempts", len(pending))
			}
			toks := make([]paho.Token, len(pending))
			for i, m := range pending {
				toks[i] = p.cl.Publish(m.topic, 1, false, m.payload)
			}
			var again []message
			for i, tok := range toks {
				if err := waitToken(tok, 5*time.Second); err != nil {
					again = append(again, pending[i])
				}
			}
			if len(again) > 0 {
				time.Sleep(100 * time.Millisecond)
			}
			pending = again
		}
	}
}

// runClient starts Run in a goroutine and returns a stop function that
// cancels it and waits for Run to return.
func runClient(t testing.TB, c *Client) (stop func()) {
	t.Helper()
	ctx, cancel := context.WithCancelCause(context.Background())
	errc := make(chan error, 1)
	go func() { errc <- c.Run(ctx) }()
	var once sync.Once
	stop = func() {
		once.Do(func() {
			cancel(fmt.Errorf("test %s is over", t.Name()))
			select {
			case err := <-errc:
				if err != nil {
					t.Errorf("Run: %v", err)
				}
			case <-time.After(15 * time.Second):
				t.Errorf("Run did not return within 15 s of cancel")
			}
		})
	}
	t.Cleanup(stop)
	return stop
}

// waitConnected waits until the client is connected and subscribed.
func waitConnected(t testing.TB, c *Client) {
	t.Helper()
	deadline := time.Now().Add(15 * time.Second)
	for !c.Status().Subscribed {
		if time.Now().After(deadline) {
			t.Fatalf("not connected after 15 s: %+v", c.Status())
		}
		time.Sleep(20 * time.Millisecond)
	}
}

func testLogger(t testing.TB) zerolog.Logger {
	return zerolog.New(zerolog.NewTestWriter(t)).Level(zerolog.WarnLevel)
}

func newPipe(t testing.TB, sensors []telemetry.Sensor) *decode.Pipeline {
	t.Helper()
	p, err := decode.NewPipeline(sensors, decode.Options{Log: testLogger(t)})
	if err != nil {
		t.Fatal(err)
	}
	return p
}

func relDiff(a, b float64) float64 { return math.Abs(a-b) / math.Max(math.Abs(b), 1e-300) }

func newTLSPublisher(t testing.TB, url string, tc *tls.Config) *publisher {
	t.Helper()
	o := paho.NewClientOptions().AddBroker(url).SetClientID("tls-pub").SetTLSConfig(tc).
		SetCleanSession(false).SetAutoReconnect(true).SetConnectRetry(true).SetStore(paho.NewMemoryStore())
	cl := paho.NewClient(o)
	if err := waitToken(cl.Connect(), 10*time.Second); err != nil {
		t.Fatalf("TLS publisher connect: %v", err)
	}
	t.Cleanup(func() { cl.Disconnect(100) })
	return &publisher{t: t, cl: cl}
}
