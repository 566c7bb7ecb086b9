package mqtt

import (
	"context"
	"fmt"
	"sync/atomic"
	"testing"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"
	"github.com/rs/zerolog"

	"plumbline/ingest/decode"
	"plumbline/internal/testenv"
	"plumbline/model/telemetry"
)

// BenchmarkEndToEnd measures readings/s through a real Mosquitto at QoS 1
// for our client (queue, decode, convert, validate, Sink, in-order
// acknowledgements) and, in the same run, for a bare paho subscriber that
// only counts (auto-ack), and reports the ratio.
//
// Each iteration, for each subscriber in turn: the subscriber is offline,
// 20,000 messages are published at QoS 1 into its persistent session (the
// broker queues them), then the subscriber connects and the time until it
// has every message is measured. This measures the subscriber's capacity,
// not the publisher's speed. Targets: ingest ≥ 50,000 readings/s and
// ≥ 0.8 of the bare subscriber.
func BenchmarkEndToEnd(b *testing.B) {
	const n = 20000
	const nSensors = 100
	const nPub = 4
	m := testenv.StartMosquitto(b)

	var sensors []telemetry.Sensor
	for i := 0; i < nSensors; i++ {
		sensors = append(sensors, telemetry.Sensor{ID: fmt.Sprintf("P-%03d", i), Quantity: telemetry.Pressure, Topic: "bench/ingest/+/{sensor}", Unit: "bar"})
	}
	pipe, err := decode.NewPipeline(sensors, decode.Options{Log: zerolog.Nop(), MaxPast: 1000 * 24 * time.Hour})
	if err != nil {
		b.Fatal(err)
	}
	var got atomic.Int64
	sink := SinkFunc(func(_ context.Context, rs []telemetry.Reading) error {
		got.Add(int64(len(rs)))
		return nil
	})
	// ingestOnline connects our client (same id: the same session) and
	// returns its stop function.
	ingestOnline := func() func() {
		c, err := New(Config{URL: m.URL(), ClientID: "bench-ingest"}, pipe, sink, zerolog.Nop())
		if err != nil {
			b.Fatal(err)
		}
		stop := runClient(b, c)
		waitConnected(b, c)
		return stop
	}
	var bare atomic.Int64
	bareOnline := func() func() {
		o := paho.NewClientOptions().AddBroker(m.URL()).SetClientID("bench-bare").SetCleanSession(false).
			SetOrderMatters(true).SetStore(paho.NewMemoryStore()).
			SetDefaultPublishHandler(func(paho.Client, paho.Message) { bare.Add(1) })
		cl := paho.NewClient(o)
		if err := waitToken(cl.Connect(), 10*time.Second); err != nil {
			b.Fatal(err)
		}
		if err := waitToken(cl.Subscribe("bench/bare/#", 1, nil), 10*time.Second); err != nil {
			b.Fatal(err)
		}
		return func() { cl.Disconnect(100) }
	}
	// Create both sessions and subscriptions, then go offline.
	ingestOnline()()
	bareOnline()()

	var pubs []*publisher
	for i := 0; i < nPub; i++ {
		pubs = append(pubs, newPublisher(b, m.URL(), fmt.Sprintf("bench-pub-%d", i)))
	}
	base := time.Now().UTC().Add(-time.Hour)
	round := 0
	publish := func(prefix string) {
		round++
		errc := make(chan error, nPub)
		for p := 0; p < nPub; p++ {
			go func() {
				toks := make([]paho.Token, 0, n/nPub)
				for i := p; i < n; i += nPub {
					ts := base.Add(time.Duration(round*n+i) * time.Millisecond)
					payload := fmt.Sprintf(`{"value":%.3f,"time":%q}`, 3+float64(i%1000)/1000, ts.Format(time.RFC3339Nano))
					toks = append(toks, pubs[p].cl.Publish(fmt.Sprintf("%s/z%d/P-%03d", prefix, i%7, i%nSensors), 1, false, payload))
				}
				for _, tok := range toks {
					if err := waitToken(tok, 30*time.Second); err != nil {
						errc <- err
						return
					}
				}
				errc <- nil
			}()
		}
		for p := 0; p < nPub; p++ {
			if err := <-errc; err != nil {
				b.Fatalf("publish: %v", err)
			}
		}
	}
	drain := func(online func() func(), counter *atomic.Int64) time.Duration {
		start := counter.Load()
		t0 := time.Now()
		stop := online()
		defer stop()
		deadline := time.Now().Add(60 * time.Second)
		for counter.Load()-start < n {
			if time.Now().After(deadline) {
				b.Fatalf("%d of %d received", counter.Load()-start, n)
			}
			time.Sleep(500 * time.Microsecond)
		}
		return time.Since(t0)
	}
	var tIngest, tBare time.Duration
	rounds := 0
	b.ResetTimer()
	for b.Loop() {
		publish("bench/bare")
		tBare += drain(bareOnline, &bare)
		publish("bench/ingest")
		tIngest += drain(ingestOnline, &got)
		rounds++
	}
	ingestRate := float64(rounds*n) / tIngest.Seconds()
	bareRate := float64(rounds*n) / tBare.Seconds()
	b.ReportMetric(ingestRate, "ingest_readings/s")
	b.ReportMetric(bareRate, "bare_readings/s")
	b.ReportMetric(ingestRate/bareRate, "ratio")
	if r := pipe.Rejections(); len(r) > 0 {
		b.Fatalf("rejections in the benchmark: %+v", r)
	}
}
