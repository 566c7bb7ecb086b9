package main

import (
	"bufio"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"net/http"
	"net/http/httptest"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"
	influxdb2 "github.com/influxdata/influxdb-client-go/v2"
	"github.com/rs/zerolog"

	"plumbline/alerts"
	"plumbline/daemon/config"
	"plumbline/daemon/service"
	"plumbline/internal/testenv"
	"plumbline/model/finding"
	"plumbline/model/sim"
	"plumbline/model/telemetry"
)

// The service's robustness beside the real Mosquitto and InfluxDB: a stop
// under load loses no accepted reading, and a crash (SIGKILL) of the
// plumbline binary neither loses readings nor raises a second alert for a
// leak it already knew. Each test runs its own Mosquitto (testenv.
// StartMosquitto) so that nobody else's messages reach its session, and
// its own InfluxDB database, so that it can count exactly what it wrote.

// simulateReadings runs the simulator over [start, end) on the
// configuration's network and sensors and returns the readings in arrival
// order, each in its sensor's unit (as a logger publishes it).
func simulateReadings(t *testing.T, cfg *config.Config, start, end time.Time, seed uint64, events []sim.Event) []sim.Reading {
	t.Helper()
	var out []sim.Reading
	_, err := sim.Run(context.Background(), cfg.Network, sim.Settings{Start: start, Duration: end.Sub(start), Step: cfg.Step, Seed: seed,
		Sensors: cfg.Sensors, Events: events}, func(r sim.Reading) error {
		out = append(out, r)
		return nil
	}, sim.Options{})
	if err != nil {
		t.Fatalf("simulate: %v", err)
	}
	return out
}

// readingPayload is the JSON payload of shared/CONTRACT.md "MQTT
// payloads" with the reading's own time and unit.
func readingPayload(r telemetry.Reading) []byte {
	b := []byte(`{"value":`)
	b = strconv.AppendFloat(b, r.Value, 'g', -1, 64)
	b = append(b, `,"time":"`...)
	b = r.Time.UTC().AppendFormat(b, time.RFC3339Nano)
	b = append(b, `","unit":`...)
	b = strconv.AppendQuote(b, r.Unit)
	return append(b, '}')
}

// fastPublisher publishes readings at QoS 1 as fast as the broker takes
// them: up to window publications wait for their PUBACK at once.
type fastPublisher struct {
	client paho.Client
	topics map[string]string
}

func newFastPublisher(t *testing.T, url string, sensors []telemetry.Sensor) *fastPublisher {
	t.Helper()
	opts := paho.NewClientOptions().AddBroker(url).SetClientID(fmt.Sprintf("plumbline-load-%d", time.Now().UnixNano())).
		SetCleanSession(true).SetAutoReconnect(true).SetKeepAlive(30 * time.Second)
	c := paho.NewClient(opts)
	tok := c.Connect()
	if !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
		t.Fatalf("publisher: connect %s: %v", url, tok.Error())
	}
	p := &fastPublisher{client: c, topics: map[string]string{}}
	for _, s := range sensors {
		p.topics[s.ID] = topicFor(s)
	}
	t.Cleanup(func() { c.Disconnect(250) })
	return p
}

// publish sends rs in order until they are all sent or ctx ends, then
// waits for every outstanding PUBACK. It returns how many readings from
// the start of rs the broker has acknowledged: when it returns, exactly
// rs[:n] are in the broker's hands. rate > 0 paces the sending to that
// many readings a second; 0 sends as fast as the window allows.
func (p *fastPublisher) publish(ctx context.Context, rs []sim.Reading, window int, rate float64) (int, error) {
	t0 := time.Now()
	toks := make([]paho.Token, 0, len(rs))
	wait := func(tok paho.Token) error {
		if !tok.WaitTimeout(30 * time.Second) {
			return fmt.Errorf("publish: no PUBACK within 30 s")
		}
		return tok.Error()
	}
	for i, r := range rs {
		if ctx.Err() != nil {
			break
		}
		if rate > 0 {
			if d := time.Until(t0.Add(time.Duration(float64(i) / rate * float64(time.Second)))); d > time.Millisecond {
				time.Sleep(d)
			}
		}
		if i >= window {
			if err := wait(toks[i-window]); err != nil {
				return i - window, err
			}
		}
		toks = append(toks, p.client.Publish(p.topics[r.Sensor], 1, false, readingPayload(r.Reading)))
	}
	for i, tok := range toks {
		if err := wait(tok); err != nil {
			return i, err
		}
	}
	return len(toks), nil
}

// readingKey is a reading's identity: the sensor and the timestamp.
type readingKey struct {
	sensor string
	time   int64 // Unix nanoseconds
}

// storedReading is what the store holds under one key: how many points
// (across series) and the last value seen.
type storedReading struct {
	n     int
	value float64
}

// storedReadings reads every `reading` point in [from, to) back from the
// test's InfluxDB database.
func storedReadings(t *testing.T, db testenv.InfluxServer, from, to time.Time) map[readingKey]storedReading {
	t.Helper()
	cl := influxdb2.NewClient(db.URL, db.Token)
	defer cl.Close()
	flux := fmt.Sprintf(`from(bucket: %q) |> range(start: %s, stop: %s)
  |> filter(fn: (r) => r._measurement == "reading" and r._field == "value")
  |> keep(columns: ["_time", "_value", "sensor"])`, db.Bucket, from.Format(time.RFC3339Nano), to.Format(time.RFC3339Nano))
	res, err := cl.QueryAPI(db.Org).Query(context.Background(), flux)
	if err != nil {
		t.Fatalf("query readings: %v", err)
	}
	out := map[readingKey]storedReading{}
	for res.Next() {
		rec := res.Record()
		sensor, _ := rec.ValueByKey("sensor").(string)
		v, _ := rec.Value().(float64)
		k := readingKey{sensor, rec.Time().UnixNano()}
		s := out[k]
		s.n++
		s.value = v
		out[k] = s
	}
	if res.Err() != nil {
		t.Fatalf("query readings: %v", res.Err())
	}
	return out
}

// compareStored checks that the store holds every reading of want exactly
// once, with its canonical value, and nothing else in the range.
func compareStored(t *testing.T, cfg *config.Config, want []sim.Reading, got map[readingKey]storedReading) {
	t.Helper()
	missing, dup, wrong := 0, 0, 0
	seen := map[readingKey]bool{}
	for _, r := range want {
		k := readingKey{r.Sensor, r.Time.UnixNano()}
		seen[k] = true
		s, ok := got[k]
		switch {
		case !ok:
			if missing < 5 {
				t.Errorf("reading %s at %s is not in the store", r.Sensor, r.Time.Format(time.RFC3339))
			}
			missing++
			continue
		case s.n != 1:
			if dup < 5 {
				t.Errorf("reading %s at %s is in the store %d times, want once", r.Sensor, r.Time.Format(time.RFC3339), s.n)
			}
			dup++
		}
		c, err := toCanonical(cfg, r.Reading)
		if err != nil {
			t.Fatal(err)
		}
		// The decoder's unit conversion is the one toCanonical uses, and
		// decimal float text round-trips exactly; 1e-9 only covers the
		// store's float formatting.
		if math.Abs(s.value-c.Value) > 1e-9*math.Max(1, math.Abs(c.Value)) {
			if wrong < 5 {
				t.Errorf("reading %s at %s: stored %v, want %v (±1e-9 relative)", r.Sensor, r.Time.Format(time.RFC3339), s.value, c.Value)
			}
			wrong++
		}
	}
	extra := 0
	for k := range got {
		if !seen[k] {
			extra++
		}
	}
	if missing+dup+wrong+extra > 0 {
		t.Errorf("store against %d published readings: %d missing, %d duplicated, %d with a wrong value, %d never published",
			len(want), missing, dup, wrong, extra)
	}
}

// metricValue reads one sample (name with its labels, exactly as written)
// from Prometheus text.
func metricValue(text, name string) (float64, bool) {
	for _, line := range strings.Split(text, "\n") {
		if v, ok := strings.CutPrefix(line, name+" "); ok {
			f, err := strconv.ParseFloat(strings.TrimSpace(v), 64)
			return f, err == nil
		}
	}
	return 0, false
}

func acceptedCount(svc *service.Service) int {
	var b strings.Builder
	svc.WriteMetrics(&b)
	v, _ := metricValue(b.String(), "plumbline_pipeline_readings_total")
	return int(v)
}

// waitSubscribed waits until the service takes in readings, and returns
// how many it has counted. Ready does not mean subscribed: the MQTT
// client subscribes once connected, a moment later, and a broker keeps
// nothing for a session that has no subscription yet, so what is
// published before that moment on a fresh broker is lost to the service
// (as it is to any MQTT subscriber). The probe reading, published until
// it arrives, lies outside the test's time range.
func waitSubscribed(t *testing.T, svc *service.Service, pub *fastPublisher, probe sim.Reading) int {
	t.Helper()
	deadline := time.Now().Add(20 * time.Second)
	for acceptedCount(svc) == 0 {
		if time.Now().After(deadline) {
			t.Fatal("the service took in no probe reading within 20 s")
		}
		if _, err := pub.publish(context.Background(), []sim.Reading{probe}, 1, 0); err != nil {
			t.Fatal(err)
		}
		time.Sleep(100 * time.Millisecond)
	}
	time.Sleep(300 * time.Millisecond) // an earlier probe still on its way
	return acceptedCount(svc)
}

// startService runs an in-process service on the configuration at path
// until the returned stop is called; stop returns Run's error.
func startService(t *testing.T, path string, opt service.Options) (*service.Service, func() error) {
	t.Helper()
	cfg, err := config.LoadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	svc, err := service.New(cfg, opt)
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
	var stopped bool
	var runErr error
	stop := func() error {
		if !stopped {
			stopped = true
			cancel()
			runErr = <-done
		}
		return runErr
	}
	t.Cleanup(func() { stop() })
	return svc, stop
}

// A stop in the middle of a fast MQTT feed loses no accepted reading:
// everything the service counted as accepted before it stopped is in
// InfluxDB once Run returns, and after a restart on the same persistent
// session (same client id) every reading the broker acknowledged to the
// publisher is in the store exactly once.
func TestServiceStopUnderLoad(t *testing.T) {
	broker := testenv.StartMosquitto(t)
	db := testenv.NewDatabase(t)
	hook := httptest.NewServer(&webhookReceiver{secret: []byte("test-secret-1")})
	defer hook.Close()
	dir := t.TempDir()
	path := serviceConfig(t, dir, broker.URL(), db, hook.URL)
	cfg, err := config.LoadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	end := time.Now().UTC().Truncate(cfg.Step).Add(-time.Hour)
	start := end.Add(-2 * 24 * time.Hour)
	rs := simulateReadings(t, cfg, start, end, 11, nil)
	total := len(rs)
	pub := newFastPublisher(t, broker.URL(), cfg.Sensors)

	opt := service.Options{Logger: zerolog.New(io.Discard), NoWallClock: true}
	svc1, stop1 := startService(t, path, opt)
	base := waitSubscribed(t, svc1, pub, sim.Reading{Reading: telemetry.Reading{Sensor: rs[0].Sensor, Time: start.Add(-time.Hour), Value: rs[0].Value, Unit: rs[0].Unit}})
	type result struct {
		n   int
		err error
	}
	pubDone := make(chan result, 1)
	go func() {
		n, err := pub.publish(context.Background(), rs, 500, 5000)
		pubDone <- result{n, err}
	}()
	// Stop the service once a third of the feed is in, while the
	// publisher is still sending.
	deadline := time.Now().Add(30 * time.Second)
	for acceptedCount(svc1)-base < total/3 {
		if time.Now().After(deadline) {
			t.Fatalf("the service accepted %d of %d readings in 30 s", acceptedCount(svc1), total)
		}
		time.Sleep(2 * time.Millisecond)
	}
	stopAt := time.Now()
	atStop := acceptedCount(svc1) - base
	if err := stop1(); err != nil {
		t.Fatalf("first run stopped with %v", err)
	}
	if d := time.Since(stopAt); d > 10*time.Second {
		t.Errorf("stop under load took %v, want under 10 s", d)
	}
	accepted1 := acceptedCount(svc1) - base
	if accepted1 >= total {
		t.Fatalf("the service had accepted all %d readings before it stopped (%d when told to stop): the stop was not under load", total, atStop)
	}
	// Every reading accepted by the first run is durable in InfluxDB
	// (Run drains the spool before it returns), and nothing else is.
	after1 := storedReadings(t, db, start, end)
	if len(after1) < accepted1 {
		t.Errorf("after the stop the store holds %d readings, the service accepted %d", len(after1), accepted1)
	}
	t.Logf("first run: accepted %d of %d readings when told to stop, %d when stopped (%v later); %d in the store",
		atStop, total, accepted1, time.Since(stopAt).Round(time.Millisecond), len(after1))

	r := <-pubDone
	if r.err != nil || r.n != total {
		t.Fatalf("publisher: %d of %d acknowledged by the broker: %v", r.n, total, r.err)
	}

	// The restart takes over the session: the broker delivers what the
	// first run had not acknowledged.
	svc2, stop2 := startService(t, path, opt)
	deadline = time.Now().Add(30 * time.Second)
	last, lastChange := -1, time.Now()
	for {
		n := acceptedCount(svc2)
		if n != last {
			last, lastChange = n, time.Now()
		}
		if accepted1+n >= total && time.Since(lastChange) > time.Second {
			break
		}
		if time.Now().After(deadline) {
			t.Errorf("second run: accepted %d, with the first run's %d short of %d", n, accepted1, total)
			break
		}
		time.Sleep(50 * time.Millisecond)
	}
	if err := stop2(); err != nil {
		t.Fatalf("second run stopped with %v", err)
	}
	t.Logf("second run: accepted %d readings", acceptedCount(svc2))
	compareStored(t, cfg, rs, storedReadings(t, db, start, end))
}

// buildPlumbline builds the daemon binary into a temporary folder.
func buildPlumbline(t *testing.T) string {
	t.Helper()
	bin := filepath.Join(t.TempDir(), "plumbline")
	cmd := exec.Command("go", "build", "-o", bin, ".")
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("go build: %v\n%s", err, out)
	}
	return bin
}

// child is one `plumbline run` process with its log file.
type child struct {
	cmd  *exec.Cmd
	log  string
	done chan error
}

func startChild(t *testing.T, bin, config, listen, log string) *child {
	t.Helper()
	f, err := os.Create(log)
	if err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(bin, "run", "--config", config, "--listen", listen, "--log-level", "debug")
	cmd.Stdout, cmd.Stderr = f, f
	if err := cmd.Start(); err != nil {
		f.Close()
		t.Fatalf("start plumbline: %v", err)
	}
	c := &child{cmd: cmd, log: log, done: make(chan error, 1)}
	// The waiter belongs to the child; it ends when the process does,
	// which the cleanup below guarantees.
	go func() { c.done <- cmd.Wait(); f.Close() }()
	t.Cleanup(func() { c.signal(syscall.SIGKILL) })
	// Ready: /readyz answers 200 (configuration loaded, broker connected).
	deadline := time.Now().Add(30 * time.Second)
	for {
		resp, err := http.Get("http://" + listen + "/readyz")
		if err == nil {
			resp.Body.Close()
			if resp.StatusCode == http.StatusOK {
				return c
			}
		}
		select {
		case err := <-c.done:
			c.done <- err
			t.Fatalf("plumbline run exited during start-up (%v):\n%s", err, c.tail())
		default:
		}
		if time.Now().After(deadline) {
			t.Fatalf("plumbline run not ready within 30 s:\n%s", c.tail())
		}
		time.Sleep(50 * time.Millisecond)
	}
}

// signal sends sig and waits up to 15 s for the process to end. It
// reports whether it ended, and its exit error (nil on exit code 0).
func (c *child) signal(sig syscall.Signal) (bool, error) {
	select {
	case err := <-c.done:
		c.done <- err
		return true, err
	default:
	}
	_ = c.cmd.Process.Signal(sig)
	select {
	case err := <-c.done:
		c.done <- err
		return true, err
	case <-time.After(15 * time.Second):
		_ = c.cmd.Process.Kill()
		return false, nil
	}
}

func (c *child) tail() string {
	b, _ := os.ReadFile(c.log)
	if len(b) > 4000 {
		b = b[len(b)-4000:]
	}
	return string(b)
}

// logHas reports whether the child logged a line with the message msg.
func (c *child) logHas(msg string) bool {
	f, err := os.Open(c.log)
	if err != nil {
		return false
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	sc.Buffer(make([]byte, 1<<20), 1<<20)
	for sc.Scan() {
		var line struct {
			Message string `json:"message"`
		}
		if json.Unmarshal(sc.Bytes(), &line) == nil && line.Message == msg {
			return true
		}
	}
	return false
}

// operator calls the service's HTTP surface as an operator would.
type operator struct {
	base, token string
}

// alerts lists every stored alert through the alerts API.
func (o operator) alerts(t *testing.T) []alerts.Alert {
	t.Helper()
	req, _ := http.NewRequest(http.MethodGet, o.base+"/api/alerts/?all=1", nil)
	req.Header.Set("Authorization", "Bearer "+o.token)
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatalf("alerts API: %v", err)
	}
	defer resp.Body.Close()
	if resp.StatusCode != http.StatusOK {
		b, _ := io.ReadAll(resp.Body)
		t.Fatalf("alerts API: %s: %s", resp.Status, b)
	}
	var body struct {
		Alerts []alerts.Alert `json:"alerts"`
	}
	if err := json.NewDecoder(resp.Body).Decode(&body); err != nil {
		t.Fatalf("alerts API: %v", err)
	}
	return body.Alerts
}

func (o operator) metrics(t *testing.T) string {
	t.Helper()
	resp, err := http.Get(o.base + "/metrics")
	if err != nil {
		t.Fatalf("metrics: %v", err)
	}
	defer resp.Body.Close()
	b, _ := io.ReadAll(resp.Body)
	return string(b)
}

// newLeakAlerts returns the leak alerts whose id is not in before.
func newLeakAlerts(all []alerts.Alert, before map[string]bool) []alerts.Alert {
	var out []alerts.Alert
	for _, a := range all {
		if a.Kind == finding.Leak && !before[a.ID] {
			out = append(out, a)
		}
	}
	return out
}

// raisedNotices returns the distinct notification numbers of "raised"
// notices the receiver got for alert id, and how many requests carried
// them (a delivery repeated after a crash carries the same number).
func raisedNotices(t *testing.T, recv *webhookReceiver, id string) (map[uint64]bool, int) {
	t.Helper()
	bodies, _ := recv.got()
	distinct, n := map[uint64]bool{}, 0
	for _, b := range bodies {
		var p alerts.Payload
		if err := json.Unmarshal([]byte(b), &p); err != nil {
			t.Fatalf("webhook body: %v\n%s", err, b)
		}
		if p.Notice == alerts.NoticeRaised && p.Alert != nil && p.Alert.ID == id {
			distinct[p.Notification] = true
			n++
		}
	}
	return distinct, n
}

// `plumbline run` killed with SIGKILL right after it raised a leak alert,
// then started again with the same configuration and data_dir while the
// leak goes on: the restarted process restores its detector (the leak is
// known, nothing is learned again: it raises no new leak finding and the
// open alert keeps receiving its evidence), raises no second alert and
// sends no second "raised" notice for it, and every reading the broker
// took, before, during and after the outage, ends up in InfluxDB.
//
// The detector learns for 7 days before it tests (model/detect
// LearnNights), longer than the 7 days a reading may be late over MQTT
// (ingest/decode MaxPast), so the history is learned by an in-process
// service first, as an earlier run of the service would have: it leaves
// the detector's state in data_dir, where `plumbline run` takes it up.
func TestServiceKillAndRestart(t *testing.T) {
	bin := buildPlumbline(t)
	broker := testenv.StartMosquitto(t)
	db := testenv.NewDatabase(t)
	recv := &webhookReceiver{secret: []byte("test-secret-1")}
	hook := httptest.NewServer(recv)
	defer hook.Close()
	dir := t.TempDir()
	path := serviceConfig(t, dir, broker.URL(), db, hook.URL)
	// One alert per leak in the zone, wherever its candidates go. An
	// uninterrupted run of this scenario refines the leak's best candidate
	// by more than the default cluster distance (250 m) with no top
	// candidate in common, and the alerts package then opens a second
	// alert for the same finding, crash or not; that is not what this
	// test is about, so the cluster spans the zone here.
	yml, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	yml = []byte(strings.Replace(string(yml), "  clear_after: 2h\n", "  clear_after: 2h\n  cluster: {top: 5, distance_m: 5000}\n", 1))
	if err := os.WriteFile(path, yml, 0o644); err != nil {
		t.Fatal(err)
	}
	cfg, err := config.LoadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	events, err := demoEvents(cfg.Network, cfg.Sensors)
	if err != nil {
		t.Fatal(err)
	}
	// The span ends half an hour ago so that no reading is from the
	// future; a child must have taken its readings within a minute of its
	// start, before its wall clock closes the steps up to now.
	end := time.Now().UTC().Truncate(cfg.Step).Add(-30 * time.Minute)
	start := end.Add(-10 * 24 * time.Hour)
	live := end.Add(-12 * time.Hour)
	leak := events[0]
	leak.SizeLPS, leak.Start = 5, live.Add(time.Hour)
	all := simulateReadings(t, cfg, start, end, 5, []sim.Event{leak})
	split := 0
	for split < len(all) && all[split].Arrival.Before(live) {
		split++
	}
	history, liveRs := all[:split], all[split:]

	// 1. The history, learned in-process.
	svc0, stop0 := startService(t, path, service.Options{Logger: zerolog.New(io.Discard), NoWallClock: true, MaxPast: 30 * 24 * time.Hour})
	for i := 0; i < len(history); i += 4096 {
		batch := make([]telemetry.Reading, 0, 4096)
		for _, r := range history[i:min(i+4096, len(history))] {
			c, err := toCanonical(cfg, r.Reading)
			if err != nil {
				t.Fatal(err)
			}
			batch = append(batch, c)
		}
		if err := svc0.Accept(context.Background(), batch); err != nil {
			t.Fatal(err)
		}
	}
	before := map[string]bool{}
	as, err := svc0.Alerts().Alerts(true)
	if err != nil {
		t.Fatal(err)
	}
	for _, a := range as {
		before[a.ID] = true
	}
	if err := stop0(); err != nil {
		t.Fatalf("history run stopped with %v", err)
	}
	if hasLeak(svc0.Findings()) {
		t.Fatalf("a leak was found in the history, before the leak began: %+v", svc0.Findings())
	}

	// 2. `plumbline run` takes the live feed until it raises the leak alert.
	listen := fmt.Sprintf("127.0.0.1:%d", testenv.FreePort(t))
	op := operator{base: "http://" + listen, token: "operator-token"}
	pub := newFastPublisher(t, broker.URL(), cfg.Sensors)
	c1 := startChild(t, bin, path, listen, filepath.Join(dir, "run-1.log"))
	if !c1.logHas("detector state restored") {
		t.Fatalf("the first run did not take up the learned state:\n%s", c1.tail())
	}
	pubCtx, stopPub := context.WithCancel(context.Background())
	type result struct {
		n   int
		err error
	}
	pubDone := make(chan result, 1)
	go func() {
		// Paced (a simulated hour in about 1.2 s) so that the alert comes
		// while the leak still has hours to run after the crash.
		n, err := pub.publish(pubCtx, liveRs, 50, 300)
		pubDone <- result{n, err}
	}()
	var raised alerts.Alert
	deadline := time.Now().Add(40 * time.Second)
	for raised.ID == "" {
		if time.Now().After(deadline) {
			stopPub()
			t.Fatalf("no leak alert within 40 s; alerts %+v\n%s", op.alerts(t), c1.tail())
		}
		time.Sleep(100 * time.Millisecond)
		if na := newLeakAlerts(op.alerts(t), before); len(na) > 0 {
			if ids, _ := raisedNotices(t, recv, na[0].ID); len(ids) > 0 {
				raised = na[0]
			}
		}
	}
	stopPub()
	r := <-pubDone
	if r.err != nil {
		t.Fatalf("publisher: %v", r.err)
	}
	if ok, err := c1.signal(syscall.SIGKILL); !ok {
		t.Fatalf("the first run did not die on SIGKILL: %v", err)
	}
	killedAt := time.Now()
	sent := r.n
	if left := len(liveRs) - sent; left < 2*12*len(cfg.Sensors) {
		t.Fatalf("only %d live readings left after the alert; the leak must go on for at least two hours after the crash", left)
	}
	t.Logf("alert %s raised after %d of %d live readings (leak from %s, alert onset %s)", raised.ID, sent, len(liveRs),
		leak.Start.Format(time.RFC3339), raised.Onset.Format(time.RFC3339))

	// 3. While the service is down the loggers go on: an hour of readings
	// waits in the broker for the persistent session.
	n, err := pub.publish(context.Background(), liveRs[sent:sent+12*len(cfg.Sensors)], 500, 0)
	if err != nil {
		t.Fatalf("publish during the outage: %v", err)
	}
	sent += n

	// 4. The restart, on the same configuration and data_dir.
	c2 := startChild(t, bin, path, listen, filepath.Join(dir, "run-2.log"))
	restartedAt := time.Now()
	if !c2.logHas("detector state restored") {
		t.Fatalf("the restarted run did not restore the detector's state:\n%s", c2.tail())
	}
	if n, err = pub.publish(context.Background(), liveRs[sent:], 500, 0); err != nil {
		t.Fatalf("publish after the restart: %v", err)
	}
	// The restarted detector knows the leak: each step it processes
	// observes it again, and the open alert's evidence time moves on.
	deadline = time.Now().Add(30 * time.Second)
	for {
		var cur alerts.Alert
		for _, a := range op.alerts(t) {
			if a.ID == raised.ID {
				cur = a
			}
		}
		if cur.LastEvidence.After(restartedAt) {
			break
		}
		if time.Now().After(deadline) {
			t.Fatalf("alert %s got no evidence from the restarted run (last %s, restart %s):\n%s", raised.ID,
				cur.LastEvidence.Format(time.RFC3339Nano), restartedAt.Format(time.RFC3339Nano), c2.tail())
		}
		time.Sleep(100 * time.Millisecond)
	}
	// Every live reading reaches the store, whatever the crash interrupted.
	deadline = time.Now().Add(30 * time.Second)
	for len(storedReadings(t, db, live, end)) < len(liveRs) && time.Now().Before(deadline) {
		time.Sleep(250 * time.Millisecond)
	}
	time.Sleep(time.Second) // a repeated "raised" delivery from the outbox would come by now

	m := op.metrics(t)
	if v, ok := metricValue(m, `plumbline_findings_total{kind="leak"}`); !ok || v != 0 {
		t.Errorf("the restarted run raised %v leak findings (metric found: %t), want 0: it should resume with the leak known", v, ok)
	}
	if v, _ := metricValue(m, "plumbline_steps_total"); v == 0 {
		t.Error("the restarted run processed no step")
	}
	if na := newLeakAlerts(op.alerts(t), before); len(na) != 1 || na[0].ID != raised.ID {
		t.Errorf("leak alerts after the restart: %+v, want only %s", na, raised.ID)
	}
	ids, deliveries := raisedNotices(t, recv, raised.ID)
	if len(ids) != 1 {
		t.Errorf("webhook got %d distinct raised notices for %s, want 1", len(ids), raised.ID)
	}
	t.Logf("webhook: %d raised notice(s) for %s in %d deliveries; the service was down %v", len(ids), raised.ID, deliveries, restartedAt.Sub(killedAt).Round(time.Millisecond))
	bodies, bad := recv.got()
	if bad > 0 {
		t.Errorf("%d webhook requests with a bad signature", bad)
	}
	for _, b := range bodies {
		var p alerts.Payload
		if json.Unmarshal([]byte(b), &p) == nil && p.Notice == alerts.NoticeRaised && p.Alert != nil && p.Alert.Kind == finding.Leak && p.Alert.ID != raised.ID {
			t.Errorf("webhook got a raised notice for another leak alert %s", p.Alert.ID)
		}
	}
	compareStored(t, cfg, liveRs, storedReadings(t, db, live, end))

	// A graceful stop ends the restarted run within the 10 s a service
	// manager allows, with exit code 0.
	stopAt := time.Now()
	ok, err := c2.signal(syscall.SIGTERM)
	if !ok || err != nil {
		t.Errorf("SIGTERM: exited %t, %v:\n%s", ok, err, c2.tail())
	}
	if d := time.Since(stopAt); d > 10*time.Second {
		t.Errorf("graceful stop took %v, want under 10 s", d)
	}
}
