package main

import (
	"context"
	"crypto/hmac"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"io"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	influxdb2 "github.com/influxdata/influxdb-client-go/v2"
	"github.com/rs/zerolog"

	"plumbline/alerts"
	"plumbline/daemon/config"
	"plumbline/daemon/service"
	"plumbline/internal/testenv"
	"plumbline/model/finding"
	"plumbline/model/netgen"
	"plumbline/model/network"
	"plumbline/model/sim"
	"plumbline/model/telemetry"
)

// webhookReceiver is a real HTTP receiver that checks each request's
// HMAC-SHA256 signature itself (timestamp "." body, as the alerts
// channel documents) and keeps the good ones.
type webhookReceiver struct {
	secret []byte
	mu     sync.Mutex
	bodies []string
	bad    int
}

func (w *webhookReceiver) ServeHTTP(rw http.ResponseWriter, r *http.Request) {
	body, _ := io.ReadAll(r.Body)
	mac := hmac.New(sha256.New, w.secret)
	mac.Write([]byte(r.Header.Get("X-Plumbline-Timestamp") + "."))
	mac.Write(body)
	want := "sha256=" + hex.EncodeToString(mac.Sum(nil))
	w.mu.Lock()
	defer w.mu.Unlock()
	if !hmac.Equal([]byte(want), []byte(r.Header.Get("X-Plumbline-Signature"))) {
		w.bad++
		rw.WriteHeader(http.StatusUnauthorized)
		return
	}
	w.bodies = append(w.bodies, string(body))
}

func (w *webhookReceiver) got() ([]string, int) {
	w.mu.Lock()
	defer w.mu.Unlock()
	return append([]string(nil), w.bodies...), w.bad
}

// serviceConfig writes the demo town with a real broker, a real InfluxDB
// database and webhook alerting into dir.
func serviceConfig(t *testing.T, dir, mqttURL string, db testenv.InfluxServer, hook string) string {
	t.Helper()
	net, err := netgen.DemoTown()
	if err != nil {
		t.Fatal(err)
	}
	if err := network.WriteFile(filepath.Join(dir, "demo-town.geojson"), net); err != nil {
		t.Fatal(err)
	}
	for name, v := range map[string]string{"webhook.secret": "test-secret-1", "api.token": "operator-token", "influx.token": db.Token} {
		if err := os.WriteFile(filepath.Join(dir, name), []byte(v+"\n"), 0o600); err != nil {
			t.Fatal(err)
		}
	}
	yml := demoConfigYAML(net, "data")
	yml = strings.Replace(yml, "# mqtt: omitted: the embedded broker on loopback\n",
		fmt.Sprintf("mqtt:\n  url: %s\n  client_id: plumbline-svc-%d\n", mqttURL, time.Now().UnixNano()), 1)
	yml = strings.Replace(yml, "# store: omitted: the embedded file store under data_dir\n",
		fmt.Sprintf("store:\n  url: %s\n  org: \"-\"\n  bucket: %s\n  token_file: influx.token\n", db.URL, db.Bucket), 1)
	yml = strings.Replace(yml, "http:\n  listen: 127.0.0.1:8470\n", fmt.Sprintf(`http:
  listen: 127.0.0.1:0
alerts:
  clear_after: 2h
  receivers:
    - {id: duty, name: Duty Engineer, webhook: true}
  routes:
    - name: all
      levels:
        - {notify: [duty]}
  channels:
    webhook:
      url: %s
      secret_file: webhook.secret
      timeout: 5s
  api_token_file: api.token
`, hook), 1)
	path := filepath.Join(dir, "service.yaml")
	if err := os.WriteFile(path, []byte(yml), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// The service end to end against the real Mosquitto and InfluxDB of the
// test environment: a history is fed in, the last half day is published
// over MQTT with a burst in it; the service finds the leak, the alert
// reaches a webhook receiver with a valid signature, results and readings
// are in InfluxDB, shutdown is orderly, and a restart resumes from the
// saved state without raising the alert again.
func TestServiceEndToEnd(t *testing.T) {
	mqttURL := testenv.MQTT(t)
	db := testenv.NewDatabase(t)
	recv := &webhookReceiver{secret: []byte("test-secret-1")}
	hook := httptest.NewServer(recv)
	defer hook.Close()
	dir := t.TempDir()
	path := serviceConfig(t, dir, mqttURL, db, hook.URL)
	cfg, err := config.LoadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	events, err := demoEvents(cfg.Network, cfg.Sensors)
	if err != nil {
		t.Fatal(err)
	}
	start := time.Now().UTC().Truncate(time.Hour).Add(-10 * 24 * time.Hour)
	live := start.Add(9*24*time.Hour + 12*time.Hour)
	end := start.Add(10 * 24 * time.Hour)
	leak := events[0]
	leak.SizeLPS, leak.Start = 5, live.Add(time.Hour)

	run := func(stopWhen func(*service.Service) bool) (*service.Service, error) {
		t.Helper()
		c, err := config.LoadFile(path)
		if err != nil {
			t.Fatal(err)
		}
		svc, err := service.New(c, service.Options{Logger: zerolog.New(io.Discard), NoWallClock: true, MaxPast: 30 * 24 * time.Hour})
		if err != nil {
			t.Fatal(err)
		}
		ctx, cancel := context.WithCancel(context.Background())
		done := make(chan error, 1)
		go func() { done <- svc.Run(ctx) }()
		select {
		case <-svc.Ready():
		case err := <-done:
			cancel()
			t.Fatalf("service stopped before it was ready: %v", err)
		}
		if !stopWhen(svc) {
			cancel()
			<-done
			t.FailNow()
		}
		cancel()
		stopped := time.Now()
		err = <-done
		if d := time.Since(stopped); d > 10*time.Second {
			t.Errorf("shutdown took %v, want under 10 s", d)
		}
		return svc, err
	}

	published := 0
	var firstAlerts []alerts.Alert
	_, err = run(func(svc *service.Service) bool {
		pub, err := newLivePublisher(context.Background(), svc.MQTTURL(), cfg.Sensors, 200000, live)
		if err != nil {
			t.Error(err)
			return false
		}
		defer pub.Close()
		var history []telemetry.Reading
		_, err = sim.Run(context.Background(), cfg.Network, sim.Settings{Start: start, Duration: end.Sub(start), Step: cfg.Step, Seed: 3,
			Sensors: cfg.Sensors, Events: []sim.Event{leak}}, func(r sim.Reading) error {
			if r.Arrival.Before(live) {
				v, err := toCanonical(cfg, r.Reading)
				history = append(history, v)
				if len(history) == 4096 {
					err = svc.Accept(context.Background(), history)
					history = history[:0]
				}
				return err
			}
			if len(history) > 0 {
				if err := svc.Accept(context.Background(), history); err != nil {
					return err
				}
				history = nil
			}
			published++
			return pub.Publish(r)
		}, sim.Options{})
		if err != nil {
			t.Error(err)
			return false
		}
		deadline := time.Now().Add(60 * time.Second)
		for time.Now().Before(deadline) {
			bodies, _ := recv.got()
			if hasLeak(svc.Findings()) && len(bodies) > 0 {
				firstAlerts, _ = svc.Alerts().Alerts(true)
				var m strings.Builder
				svc.WriteMetrics(&m)
				for _, line := range strings.Split(m.String(), "\n") {
					if strings.HasPrefix(line, "plumbline_readings_rejected") {
						t.Log(line)
					}
				}
				return true
			}
			time.Sleep(200 * time.Millisecond)
		}
		t.Errorf("no leak alert at the webhook within a minute: findings %+v", svc.Findings())
		return false
	})
	if err != nil {
		t.Fatalf("first run stopped with %v", err)
	}
	bodies, bad := recv.got()
	if bad > 0 {
		t.Errorf("%d webhook requests with a bad signature", bad)
	}
	if !strings.Contains(bodies[0], `"leak"`) {
		t.Errorf("first webhook body does not name the leak: %s", bodies[0])
	}
	if len(firstAlerts) == 0 {
		t.Fatal("no alert raised")
	}

	// The readings published over MQTT and the findings are in InfluxDB;
	// what the broker had not delivered at the stop comes on the next run
	// (QoS 1, persistent session), so every reading is there once both
	// runs are done.
	cl := influxdb2.NewClient(db.URL, db.Token)
	defer cl.Close()
	q := cl.QueryAPI("-")
	count := func(flux string) int64 {
		t.Helper()
		res, err := q.Query(context.Background(), flux)
		if err != nil {
			t.Fatalf("query: %v", err)
		}
		var n int64
		for res.Next() {
			if v, ok := res.Record().Value().(int64); ok {
				n += v
			}
		}
		return n
	}
	// A restart resumes from the saved state: the leak is still known, and
	// observing it again updates the alert instead of raising another.
	_, err = run(func(svc *service.Service) bool {
		if !hasLeak(svc.Findings()) {
			t.Error("the restarted service lost its findings")
			return false
		}
		time.Sleep(3 * time.Second) // the broker redelivers what the first run had not acknowledged
		return true
	})
	if err != nil {
		t.Fatalf("second run stopped with %v", err)
	}
	rng := fmt.Sprintf(`from(bucket: %q) |> range(start: %s, stop: %s)`, db.Bucket, live.Format(time.RFC3339), end.Add(time.Hour).Format(time.RFC3339))
	if n := count(rng + ` |> filter(fn: (r) => r._measurement == "reading" and r._field == "value") |> group() |> count()`); n < int64(published) {
		t.Errorf("InfluxDB holds %d readings of the live half day, %d were published", n, published)
	}
	if n := count(fmt.Sprintf(`from(bucket: %q) |> range(start: %s) |> filter(fn: (r) => r._measurement == "finding" and r._field == "size_lps") |> group() |> count()`,
		db.Bucket, start.Format(time.RFC3339))); n == 0 {
		t.Error("no finding point in InfluxDB")
	}
	// The alert's life is in the store too: measurement alert, its state over time.
	if n := count(fmt.Sprintf(`from(bucket: %q) |> range(start: %s) |> filter(fn: (r) => r._measurement == "alert" and r._field == "state") |> group() |> count()`,
		db.Bucket, start.Format(time.RFC3339))); n == 0 {
		t.Error("no alert point in InfluxDB")
	}

	c2, _ := config.LoadFile(path)
	after, err := service.New(c2, service.Options{Logger: zerolog.New(io.Discard)})
	if err != nil {
		t.Fatal(err)
	}
	again, _ := after.Alerts().Alerts(true)
	after.Alerts().Close()
	if len(again) != len(firstAlerts) {
		t.Errorf("alerts after restart: %d, before: %d", len(again), len(firstAlerts))
	}
}

func hasLeak(fs []finding.Finding) bool {
	for _, f := range fs {
		if f.Kind == finding.Leak {
			return true
		}
	}
	return false
}

// A configuration with several errors reports all of them, each with its
// line, and the service does not start.
func TestRunReportsEveryConfigError(t *testing.T) {
	dir := t.TempDir()
	bad := `network: missing.geojson
step: -5m
sensors:
  - {id: P-1, quantity: presure, at: J-1, topic: "a/#/b", unit: bar}
  - {id: P-1, quantity: flow, at: P-1, topic: a/b, unit: furlong}
zones:
  - id: z
    inlets: [nope]
    night: "25:00-04:00"
`
	path := filepath.Join(dir, "bad.yaml")
	if err := os.WriteFile(path, []byte(bad), 0o644); err != nil {
		t.Fatal(err)
	}
	var out, errb strings.Builder
	if code := dispatch(context.Background(), []string{"run", "--config", path}, &out, &errb); code == 0 {
		t.Fatal("run started on a bad configuration")
	}
	msg := errb.String()
	for _, want := range []string{"bad.yaml:1", "bad.yaml:2", "bad.yaml:4", "bad.yaml:5", "bad.yaml:9"} {
		if !strings.Contains(msg, want) {
			t.Errorf("error output lacks %q:\n%s", want, msg)
		}
	}
}
