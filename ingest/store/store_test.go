package store

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/http"
	"net/url"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"sort"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"plumbline/ingest/lineproto"
	"plumbline/ingest/source"
	"plumbline/ingest/spool"
	"plumbline/internal/testenv"
	"plumbline/model/telemetry"
)

var t0 = time.Date(2026, 3, 2, 0, 0, 0, 0, time.UTC)

func serverConfig(s testenv.InfluxServer) Config {
	return Config{URL: s.URL, Token: s.Token, Org: s.Org, Bucket: s.Bucket, CreateDatabase: true,
		MinBackoff: 20 * time.Millisecond, MaxBackoff: 300 * time.Millisecond, RequestTimeout: 5 * time.Second}
}

// harness runs a writer over its own spool until the test ends.
type harness struct {
	w      *Writer
	sp     *spool.Spool
	cancel context.CancelFunc
	done   chan error
}

func startWriter(t testing.TB, cfg Config, dir string) *harness {
	t.Helper()
	sp, _, err := spool.Open(dir, spool.Options{})
	if err != nil {
		t.Fatalf("spool: %v", err)
	}
	w, err := NewWriter(cfg, sp, zerolog.Nop())
	if err != nil {
		t.Fatalf("NewWriter: %v", err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	h := &harness{w: w, sp: sp, cancel: cancel, done: make(chan error, 1)}
	go func() { h.done <- w.Run(ctx) }()
	t.Cleanup(h.stop)
	return h
}

func (h *harness) stop() {
	if h.cancel == nil {
		return
	}
	h.cancel()
	<-h.done
	h.cancel = nil
	h.w.Close()
	h.sp.Close()
}

func (h *harness) drain(t testing.TB, d time.Duration) {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), d)
	defer cancel()
	if err := h.w.Drain(ctx); err != nil {
		t.Fatalf("Drain: %v (stats %+v)", err, h.w.Stats())
	}
}

// readings makes n readings of nSensors sensors, one instant per round,
// every sensor at every instant, values with many significant digits so
// that any loss of precision shows.
func readings(n, nSensors int, step time.Duration) []telemetry.Reading {
	out := make([]telemetry.Reading, 0, n)
	for i := 0; len(out) < n; i++ {
		for s := 0; s < nSensors && len(out) < n; s++ {
			out = append(out, telemetry.Reading{
				Sensor: fmt.Sprintf("P-%03d", s),
				Time:   t0.Add(time.Duration(i) * step),
				Value:  30 + float64(i%977)/7 + float64(s)*1e-9,
				Unit:   "bar",
			})
		}
	}
	return out
}

func points(rs []telemetry.Reading) []lineproto.Point {
	ps := make([]lineproto.Point, len(rs))
	for i, r := range rs {
		ps[i] = lineproto.FromReading(r, telemetry.Pressure, "north")
	}
	return ps
}

func readAll(t testing.TB, src source.Source, from, to time.Time, sensors []string) []telemetry.Reading {
	t.Helper()
	var got []telemetry.Reading
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	err := src.Read(ctx, from, to, sensors, func(r telemetry.Reading) error {
		got = append(got, r)
		return nil
	})
	if err != nil {
		t.Fatalf("Read: %v", err)
	}
	return got
}

func sameReadings(t testing.TB, got, want []telemetry.Reading) {
	t.Helper()
	if len(got) != len(want) {
		for i := 0; i < len(got) && i < len(want); i++ {
			if got[i] != want[i] {
				t.Fatalf("got %d readings, want %d; first difference at %d: got %+v, want %+v", len(got), len(want), i, got[i], want[i])
			}
		}
		if len(got) > len(want) {
			t.Fatalf("got %d readings, want %d; extra: %+v", len(got), len(want), got[len(want):min(len(got), len(want)+3)])
		}
		t.Fatalf("got %d readings, want %d; missing: %+v", len(got), len(want), want[len(got):min(len(want), len(got)+3)])
	}
	for i := range want {
		g, w := got[i], want[i]
		if g.Sensor != w.Sensor || !g.Time.Equal(w.Time) || g.Value != w.Value || g.Unit != w.Unit {
			t.Fatalf("reading %d: got %+v, want %+v", i, g, w)
		}
	}
}

func sortedCopy(rs []telemetry.Reading) []telemetry.Reading {
	out := append([]telemetry.Reading(nil), rs...)
	sort.SliceStable(out, func(i, j int) bool { return source.Less(out[i], out[j]) })
	return out
}

// Points written through spool and writer come back from Flux exactly:
// same sensors, nanosecond times, bit-identical values, in time then
// sensor order, across several query windows and for a sensor subset.
func TestWriteReadBack(t *testing.T) {
	srv := testenv.NewDatabase(t)
	cfg := serverConfig(srv)
	h := startWriter(t, cfg, t.TempDir())
	rs := readings(3000, 6, 7*time.Second+123*time.Nanosecond) // see step below
	// Add them in shuffled chunks: the store sorts, the writer does not.
	for i := len(rs); i > 0; i -= 250 {
		lo := max(i-250, 0)
		if err := h.w.Add(points(rs[lo:i])...); err != nil {
			t.Fatal(err)
		}
	}
	h.drain(t, 60*time.Second)

	cfg.ReadWindow = 37 * time.Minute
	src, err := NewSource(cfg)
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	end := rs[len(rs)-1].Time.Add(time.Nanosecond)
	sameReadings(t, readAll(t, src, t0, end, nil), sortedCopy(rs))

	// Windows whose edges fall exactly on reading times neither lose nor
	// repeat the readings at the edges.
	step := 7*time.Second + 123*time.Nanosecond
	edged, _ := NewSource(Config{URL: cfg.URL, Bucket: cfg.Bucket, ReadWindow: 10 * step})
	defer edged.Close()
	sameReadings(t, readAll(t, edged, t0, end, nil), sortedCopy(rs))

	// A subset of sensors over a sub-range; the end is exclusive.
	from, to := rs[600].Time, rs[1800].Time
	var want []telemetry.Reading
	for _, r := range sortedCopy(rs) {
		if (r.Sensor == "P-001" || r.Sensor == "P-004") && !r.Time.Before(from) && r.Time.Before(to) {
			want = append(want, r)
		}
	}
	sameReadings(t, readAll(t, src, from, to, []string{"P-004", "P-001"}), want)

	st := h.w.Stats()
	if st.Written != uint64(len(rs)) || st.SpoolPoints != 0 || st.DeadLettered != 0 {
		t.Fatalf("Stats = %+v, want Written %d, empty spool, nothing dead-lettered", st, len(rs))
	}
	var sb strings.Builder
	if err := st.WritePrometheus(&sb); err != nil || !strings.Contains(sb.String(), fmt.Sprintf("plumbline_store_points_written_total %d", len(rs))) {
		t.Fatalf("WritePrometheus: %v\n%s", err, sb.String())
	}
}

// The fn error stops Read and comes back unchanged.
func TestReadStops(t *testing.T) {
	srv := testenv.NewDatabase(t)
	cfg := serverConfig(srv)
	h := startWriter(t, cfg, t.TempDir())
	if err := h.w.Add(points(readings(10, 2, time.Second))...); err != nil {
		t.Fatal(err)
	}
	h.drain(t, 30*time.Second)
	src, _ := NewSource(cfg)
	defer src.Close()
	stop := errors.New("enough")
	n := 0
	err := src.Read(context.Background(), t0, t0.Add(time.Hour), nil, func(telemetry.Reading) error {
		n++
		if n == 3 {
			return stop
		}
		return nil
	})
	if !errors.Is(err, stop) || n != 3 {
		t.Fatalf("Read returned %v after %d readings, want the fn error after 3", err, n)
	}
}

// A private InfluxDB is killed while 50,000 points stream in at a high
// rate and comes back later. Every point ends up in the store exactly
// once, in order, and meanwhile they waited on disk.
func TestOutageUnderLoad(t *testing.T) {
	inf := testenv.StartInfluxWith(t, testenv.InfluxOptions{NoFlux: true})
	cfg := serverConfig(inf.Server())
	h := startWriter(t, cfg, t.TempDir())

	const total = 50000
	rs := readings(total, 10, time.Second)
	var wg sync.WaitGroup
	progress := make(chan int, 1000)
	wg.Add(1)
	go func() {
		defer wg.Done()
		defer close(progress)
		for i := 0; i < total; i += 500 {
			if err := h.w.Add(points(rs[i : i+500])...); err != nil {
				t.Errorf("Add: %v", err)
				return
			}
			progress <- i + 500
			time.Sleep(2 * time.Millisecond)
		}
	}()
	var maxSpooled int64
	stopped, restarted := false, false
	var stoppedAt time.Time
	for n := range progress {
		if !stopped && n >= 10000 {
			// SIGKILL, like a crash: what InfluxDB acknowledged is in its
			// WAL, what it did not is still in our spool.
			inf.Kill()
			stopped, stoppedAt = true, time.Now()
		}
		if stopped && !restarted && n >= 40000 {
			if d := h.w.Stats().SpoolPoints; d > maxSpooled {
				maxSpooled = d
			}
			// Keep the outage going for at least 1.5 s of retries.
			time.Sleep(time.Until(stoppedAt.Add(1500 * time.Millisecond)))
			inf.Start()
			restarted = true
		}
	}
	wg.Wait()
	if !restarted {
		t.Fatal("the producer stopped before the outage ended")
	}
	h.drain(t, 120*time.Second)

	st := h.w.Stats()
	if st.Retried == 0 || maxSpooled < 20000 {
		t.Fatalf("outage not seen: Retried %d, spool depth at restart %d (want > 0 and >= 20000)", st.Retried, maxSpooled)
	}
	if st.DeadLettered != 0 {
		t.Fatalf("DeadLettered = %d, want 0", st.DeadLettered)
	}
	sameReadings(t, influxQLReadings(t, inf.Server()), rs) // rs is already in time, sensor order
}

// A writer stopped in the middle leaves the rest in the spool; a new
// writer over the reopened spool finishes the job, and repeats of the
// batch that was in flight collapse in the store.
func TestResumeAfterStop(t *testing.T) {
	srv := testenv.NewDatabase(t)
	cfg := serverConfig(srv)
	cfg.BatchPoints = 300
	dir := t.TempDir()
	rs := readings(6000, 3, time.Second)
	h := startWriter(t, cfg, dir)
	if err := h.w.Add(points(rs)...); err != nil {
		t.Fatal(err)
	}
	for h.w.Stats().Written < 1000 {
		time.Sleep(time.Millisecond)
	}
	h.stop()

	h2 := startWriter(t, cfg, dir)
	h2.drain(t, 60*time.Second)
	src, _ := NewSource(cfg)
	defer src.Close()
	sameReadings(t, readAll(t, src, t0, t0.Add(24*time.Hour), nil), rs)
}

// A field type conflict makes InfluxDB 1.8 answer 400 "partial write".
// The writer isolates the offending point, dead-letters it with the
// server's reason and writes every other point of the batch.
func TestPartialWriteDeadLetter(t *testing.T) {
	srv := testenv.NewDatabase(t)
	cfg := serverConfig(srv)
	dir := t.TempDir()
	h := startWriter(t, cfg, dir)
	rs := readings(200, 4, time.Second)
	ps := points(rs)
	// Point 117 carries an integer value where every other is a float.
	ps[117].Fields = []lineproto.Field{{Key: "value", Value: int64(5)}}
	if err := h.w.Add(ps...); err != nil {
		t.Fatal(err)
	}
	h.drain(t, 60*time.Second)
	if st := h.w.Stats(); st.DeadLettered != 1 {
		t.Fatalf("DeadLettered = %d, want 1 (stats %+v)", st.DeadLettered, st)
	}
	dl, err := os.ReadFile(filepath.Join(dir, "deadletter.lp"))
	if err != nil {
		t.Fatal(err)
	}
	bad, _ := ps[117].Line()
	if !strings.Contains(string(dl), bad+"\n") || !strings.Contains(string(dl), "type") {
		t.Fatalf("dead-letter file lacks the point or the reason:\n%s", dl)
	}
	src, _ := NewSource(cfg)
	defer src.Close()
	want := append(append([]telemetry.Reading(nil), rs[:117]...), rs[118:]...)
	sameReadings(t, readAll(t, src, t0, t0.Add(time.Hour), nil), want)
}

// A server with a small body limit answers 413; the writer halves the
// batch until it fits and loses nothing.
func TestBodyTooLargeSplits(t *testing.T) {
	inf := testenv.StartInfluxWith(t, testenv.InfluxOptions{MaxBodySize: 4000, NoFlux: true})
	cfg := serverConfig(inf.Server())
	h := startWriter(t, cfg, t.TempDir())
	rs := readings(2000, 5, time.Second) // about 180 kB of line protocol
	if err := h.w.Add(points(rs)...); err != nil {
		t.Fatal(err)
	}
	h.drain(t, 60*time.Second)
	st := h.w.Stats()
	if st.Batches < 2000*90/4000 || st.DeadLettered != 0 {
		t.Fatalf("Stats = %+v: want the batch split into many requests and nothing dead-lettered", st)
	}
	sameReadings(t, influxQLReadings(t, inf.Server()), rs)
}

// influxQLReadings returns every reading in the server's database with
// InfluxQL (for private servers started without Flux), sorted by time
// and sensor.
func influxQLReadings(t testing.TB, srv testenv.InfluxServer) []telemetry.Reading {
	t.Helper()
	q := url.Values{"db": {srv.DB}, "epoch": {"ns"}, "q": {`SELECT "value", "sensor", "unit" FROM "reading"`}}
	resp, err := http.Get(srv.URL + "/query?" + q.Encode())
	if err != nil {
		t.Fatalf("InfluxQL query: %v", err)
	}
	defer resp.Body.Close()
	var res struct {
		Results []struct {
			Error  string
			Series []struct {
				Columns []string
				Values  [][]any
			}
		}
	}
	dec := json.NewDecoder(resp.Body)
	dec.UseNumber()
	if err := dec.Decode(&res); err != nil {
		t.Fatalf("InfluxQL answer: %v", err)
	}
	var out []telemetry.Reading
	for _, r := range res.Results {
		if r.Error != "" {
			t.Fatalf("InfluxQL: %s", r.Error)
		}
		for _, s := range r.Series {
			if !slices.Equal(s.Columns, []string{"time", "value", "sensor", "unit"}) {
				t.Fatalf("InfluxQL columns %v", s.Columns)
			}
			for _, row := range s.Values {
				tn, ok1 := row[0].(json.Number)
				vn, ok2 := row[1].(json.Number)
				sensor, ok3 := row[2].(string)
				unit, _ := row[3].(string)
				ns, err1 := tn.Int64()
				v, err2 := strconv.ParseFloat(string(vn), 64)
				if !ok1 || !ok2 || !ok3 || err1 != nil || err2 != nil {
					t.Fatalf("InfluxQL row %v: %v %v", row, err1, err2)
				}
				out = append(out, telemetry.Reading{Sensor: sensor, Time: time.Unix(0, ns).UTC(), Value: v, Unit: unit})
			}
		}
	}
	return sortedCopy(out)
}

// Result measurements go through the same path as generic points.
func TestResultPoints(t *testing.T) {
	srv := testenv.NewDatabase(t)
	cfg := serverConfig(srv)
	h := startWriter(t, cfg, t.TempDir())
	p := lineproto.Stamp(lineproto.MeasurementZoneBalance, t0,
		[]lineproto.Field{{Key: "inflow_lps", Value: 12.5}, {Key: "expected_lps", Value: 11.0}, {Key: "imbalance_lps", Value: 1.5}},
		lineproto.TagZone, "north")
	bad := lineproto.Point{Measurement: "finding", Fields: []lineproto.Field{{Key: "size_lps", Value: 1}}, Time: t0}
	err := h.w.Add(lineproto.WithRun(p, "replay-1"), bad)
	if err == nil || !strings.Contains(err.Error(), "1 of 2 points rejected") || !strings.Contains(err.Error(), "finding") {
		t.Fatalf("Add error = %v, want the bad point named", err)
	}
	h.drain(t, 30*time.Second)
	if st := h.w.Stats(); st.Written != 1 || st.Rejected != 1 {
		t.Fatalf("Stats = %+v, want Written 1 and Rejected 1", st)
	}
}

func TestFluxString(t *testing.T) {
	for in, want := range map[string]string{
		`plain`:     `"plain"`,
		`a"b\c`:     `"a\"b\\c"`,
		`x${y}`:     `"x\${y}"`,
		"tab\tnl\n": `"tab\tnl\n"`,
		`cost$5`:    `"cost$5"`,
	} {
		if got := fluxString(in); got != want {
			t.Errorf("fluxString(%q) = %s, want %s", in, got, want)
		}
	}
}

// BenchmarkWrite measures points per second from Add to InfluxDB
// acknowledging them (spool fsync per Add of 1,000 points, 5,000-point
// write requests), against the shared real server.
func BenchmarkWrite(b *testing.B) {
	srv := testenv.NewDatabase(b)
	h := startWriter(b, serverConfig(srv), b.TempDir())
	rs := readings(1000, 50, time.Second)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		// Shift each round in time so every point is a new one.
		for j := range rs {
			rs[j].Time = rs[j].Time.Add(time.Hour)
		}
		if err := h.w.Add(points(rs)...); err != nil {
			b.Fatal(err)
		}
	}
	h.drain(b, 10*time.Minute)
	b.ReportMetric(float64(b.N*len(rs))/b.Elapsed().Seconds(), "points/s")
}

// BenchmarkOutageMemory adds points while the (private, stopped) InfluxDB
// is down and reports the live heap growth per 100,000 spooled points:
// flat memory means this stays near zero however long the outage.
func BenchmarkOutageMemory(b *testing.B) {
	inf := testenv.StartInfluxWith(b, testenv.InfluxOptions{NoFlux: true})
	cfg := serverConfig(inf.Server())
	inf.Stop()
	h := startWriter(b, cfg, b.TempDir())
	rs := readings(1000, 50, time.Second)
	heap := func() uint64 {
		runtime.GC()
		var m runtime.MemStats
		runtime.ReadMemStats(&m)
		return m.HeapAlloc
	}
	// Warm up: the writer holds its first batch from here on.
	if err := h.w.Add(points(rs)...); err != nil {
		b.Fatal(err)
	}
	time.Sleep(100 * time.Millisecond)
	before := heap()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		for j := range rs {
			rs[j].Time = rs[j].Time.Add(time.Hour)
		}
		if err := h.w.Add(points(rs)...); err != nil {
			b.Fatal(err)
		}
	}
	b.StopTimer()
	after := heap()
	spooled := h.w.Stats().SpoolPoints
	growth := float64(int64(after) - int64(before))
	b.ReportMetric(growth/float64(spooled)*1e5/1e6, "MB-heap/100k-points")
	b.ReportMetric(float64(spooled), "spooled-points")
}

// The writer creates a missing database before writing (InfluxDB 1.8),
// and again when the database disappears under it (404 on write).
func TestCreatesMissingDatabase(t *testing.T) {
	shared := testenv.Influx(t)
	db := fmt.Sprintf("fresh_%d", time.Now().UnixNano())
	cfg := serverConfig(testenv.InfluxServer{URL: shared.URL, Token: shared.Token, Org: shared.Org, DB: db, Bucket: db + "/autogen"})
	h := startWriter(t, cfg, t.TempDir())
	rs := readings(100, 2, time.Second)
	if err := h.w.Add(points(rs[:50])...); err != nil {
		t.Fatal(err)
	}
	h.drain(t, 30*time.Second)

	resp, err := http.PostForm(shared.URL+"/query", url.Values{"q": {`DROP DATABASE "` + db + `"`}})
	if err != nil {
		t.Fatal(err)
	}
	body, _ := io.ReadAll(resp.Body)
	resp.Body.Close()
	if resp.StatusCode != http.StatusOK || strings.Contains(string(body), "error") {
		t.Fatalf("DROP DATABASE: %s %s", resp.Status, body)
	}
	if err := h.w.Add(points(rs[50:])...); err != nil {
		t.Fatal(err)
	}
	h.drain(t, 30*time.Second)
	if st := h.w.Stats(); st.Retried == 0 || !strings.Contains(st.LastError, "database not found") {
		t.Fatalf("Stats = %+v: want a retried 404 database not found", st)
	}
	src, _ := NewSource(cfg)
	defer src.Close()
	sameReadings(t, readAll(t, src, t0, t0.Add(time.Hour), nil), rs[50:])
}

// BenchmarkRead measures streaming 100,000 readings back with Flux from
// the shared real server (6 h query windows).
func BenchmarkRead(b *testing.B) {
	srv := testenv.NewDatabase(b)
	cfg := serverConfig(srv)
	h := startWriter(b, cfg, b.TempDir())
	rs := readings(100000, 50, 10*time.Second) // about 5.6 h
	if err := h.w.Add(points(rs)...); err != nil {
		b.Fatal(err)
	}
	h.drain(b, 5*time.Minute)
	src, _ := NewSource(cfg)
	defer src.Close()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		n := 0
		err := src.Read(context.Background(), t0, t0.Add(24*time.Hour), nil, func(telemetry.Reading) error { n++; return nil })
		if err != nil || n != len(rs) {
			b.Fatalf("read %d of %d: %v", n, len(rs), err)
		}
	}
	b.ReportMetric(float64(b.N*len(rs))/b.Elapsed().Seconds(), "readings/s")
}
