package filestore

import (
	"context"
	"errors"
	"fmt"
	"net/http"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"plumbline/ingest/lineproto"
	"plumbline/ingest/source"
	"plumbline/ingest/store"
	"plumbline/internal/testenv"
	"plumbline/model/telemetry"
)

var t0 = time.Date(2026, 3, 2, 0, 0, 0, 0, time.UTC)

func readings(n, nSensors int, step time.Duration) []telemetry.Reading {
	out := make([]telemetry.Reading, 0, n)
	for i := 0; len(out) < n; i++ {
		for s := 0; s < nSensors && len(out) < n; s++ {
			out = append(out, telemetry.Reading{
				Sensor: fmt.Sprintf("F-%02d", s),
				Time:   t0.Add(time.Duration(i) * step),
				Value:  float64(i%1013)/3 + float64(s)*1e-7,
				Unit:   "L/s",
			})
		}
	}
	return out
}

func points(rs []telemetry.Reading) []lineproto.Point {
	ps := make([]lineproto.Point, len(rs))
	for i, r := range rs {
		ps[i] = lineproto.FromReading(r, telemetry.Flow, "east")
	}
	return ps
}

func readAll(t *testing.T, src source.Source, from, to time.Time, sensors []string) ([]telemetry.Reading, error) {
	t.Helper()
	var got []telemetry.Reading
	err := src.Read(context.Background(), from, to, sensors, func(r telemetry.Reading) error {
		got = append(got, r)
		return nil
	})
	return got, err
}

func same(t *testing.T, got, want []telemetry.Reading) {
	t.Helper()
	if len(got) != len(want) {
		t.Fatalf("got %d readings, want %d", len(got), len(want))
	}
	for i := range want {
		if got[i] != want[i] {
			t.Fatalf("reading %d: got %+v, want %+v", i, got[i], want[i])
		}
	}
}

func sorted(rs []telemetry.Reading) []telemetry.Reading {
	out := slices.Clone(rs)
	slices.SortStableFunc(out, func(a, b telemetry.Reading) int {
		if source.Less(a, b) {
			return -1
		}
		if source.Less(b, a) {
			return 1
		}
		return 0
	})
	return out
}

// Readings spread over several hours, added in reverse order and partly
// twice (the second copy with another value), come back in time and
// sensor order, each once, the last write winning, exactly as added.
func TestAddReadBack(t *testing.T) {
	dir := t.TempDir()
	s, err := Open(dir, Options{MaxOpen: 2})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	rs := readings(4000, 4, 7*time.Second+1) // about 2 h of data
	for i := len(rs); i > 0; i -= 300 {
		if err := s.Add(points(rs[max(i-300, 0):i])...); err != nil {
			t.Fatal(err)
		}
	}
	// Redeliver 100 readings with new values: those must win.
	want := sorted(rs)
	var again []telemetry.Reading
	for i := 1000; i < 1100; i++ {
		r := rs[i]
		r.Value += 1000
		again = append(again, r)
	}
	if err := s.Add(points(again)...); err != nil {
		t.Fatal(err)
	}
	for i := range want {
		for _, a := range again {
			if want[i].Sensor == a.Sensor && want[i].Time.Equal(a.Time) {
				want[i] = a
			}
		}
	}
	end := rs[len(rs)-1].Time.Add(1)
	got, err := readAll(t, s, t0, end, nil)
	if err != nil {
		t.Fatal(err)
	}
	same(t, got, want)

	files, _ := s.Files(lineproto.MeasurementReading, t0, end)
	if len(files) != 2 {
		t.Fatalf("%d hour files, want 2 (1.94 h of data): %v", len(files), files)
	}

	// A sub-range across the hour boundary and a sensor subset; the end
	// is exclusive.
	from, to := rs[1500].Time, rs[2500].Time
	var sub []telemetry.Reading
	for _, r := range want {
		if r.Sensor == "F-02" && !r.Time.Before(from) && r.Time.Before(to) {
			sub = append(sub, r)
		}
	}
	got, err = readAll(t, s, from, to, []string{"F-02"})
	if err != nil {
		t.Fatal(err)
	}
	same(t, got, sub)
}

// A crash can leave a partial last line: readers ignore it and the next
// Add cuts it off before appending.
func TestTornLastLine(t *testing.T) {
	dir := t.TempDir()
	s, _ := Open(dir, Options{})
	rs := readings(10, 2, time.Second)
	if err := s.Add(points(rs)...); err != nil {
		t.Fatal(err)
	}
	s.Close()
	path := filepath.Join(dir, "reading", "2026-03-02T00.lp")
	f, err := os.OpenFile(path, os.O_WRONLY|os.O_APPEND, 0)
	if err != nil {
		t.Fatal(err)
	}
	f.WriteString("reading,sensor=F-00,unit=L/s value=9")
	f.Close()

	s2, _ := Open(dir, Options{})
	defer s2.Close()
	got, err := readAll(t, s2, t0, t0.Add(time.Hour), nil)
	if err != nil {
		t.Fatalf("Read with a torn last line: %v", err)
	}
	same(t, got, rs)
	more := readings(20, 2, time.Second)[10:]
	if err := s2.Add(points(more)...); err != nil {
		t.Fatal(err)
	}
	got, err = readAll(t, s2, t0, t0.Add(time.Hour), nil)
	if err != nil {
		t.Fatal(err)
	}
	same(t, got, append(slices.Clone(rs), more...))
}

// A damaged line in the middle is skipped and named (file:line); the
// good lines around it are read.
func TestBadLineNamed(t *testing.T) {
	dir := t.TempDir()
	s, _ := Open(dir, Options{})
	defer s.Close()
	rs := readings(6, 1, time.Second)
	s.Add(points(rs[:3])...)
	path := filepath.Join(dir, "reading", "2026-03-02T00.lp")
	f, _ := os.OpenFile(path, os.O_WRONLY|os.O_APPEND, 0)
	f.WriteString("reading,sensor=F-00 value=oops 5\n")
	f.Close()
	s.Add(points(rs[3:])...)
	got, err := readAll(t, s, t0, t0.Add(time.Hour), nil)
	var le *LineError
	if !errors.As(err, &le) || le.Line != 4 || !strings.Contains(err.Error(), "2026-03-02T00.lp:4:") {
		t.Fatalf("error = %v, want one naming 2026-03-02T00.lp:4", err)
	}
	same(t, got, rs)
}

func TestRejectsAndResults(t *testing.T) {
	s, _ := Open(t.TempDir(), Options{})
	defer s.Close()
	good := lineproto.Stamp(lineproto.MeasurementResidual, t0.Add(time.Minute),
		[]lineproto.Field{{Key: "value", Value: -0.25}}, lineproto.TagSensor, "P-7", lineproto.TagRun, "r1")
	noTime := lineproto.Point{Measurement: "residual", Fields: []lineproto.Field{{Key: "value", Value: 1.0}}}
	err := s.Add(good, noTime)
	if err == nil || !strings.Contains(err.Error(), "1 of 2 points rejected") {
		t.Fatalf("Add error = %v, want 1 of 2 rejected", err)
	}
	var got []lineproto.Point
	if err := s.ReadPoints(context.Background(), "residual", t0, t0.Add(time.Hour), func(p lineproto.Point) error {
		got = append(got, p)
		return nil
	}); err != nil {
		t.Fatal(err)
	}
	if len(got) != 1 || got[0].String() != good.String() {
		t.Fatalf("ReadPoints = %v, want [%v]", got, good)
	}
}

func TestPrune(t *testing.T) {
	s, _ := Open(t.TempDir(), Options{})
	defer s.Close()
	rs := readings(30, 1, 10*time.Minute) // 5 hours
	s.Add(points(rs)...)
	n, err := s.Prune(t0.Add(3 * time.Hour))
	if err != nil || n != 3 {
		t.Fatalf("Prune = %d, %v; want 3 hours removed", n, err)
	}
	got, _ := readAll(t, s, t0, t0.Add(24*time.Hour), nil)
	same(t, got, rs[18:])
}

// The store's files are line protocol as InfluxDB takes it: POSTed to a
// real InfluxDB 1.8 unchanged, they read back (with Flux) exactly as the
// file store reads them.
func TestBulkLoadIntoInflux(t *testing.T) {
	srv := testenv.NewDatabase(t)
	s, _ := Open(t.TempDir(), Options{})
	defer s.Close()
	rs := readings(3000, 5, 9*time.Second)
	if err := s.Add(points(rs)...); err != nil {
		t.Fatal(err)
	}
	end := t0.Add(24 * time.Hour)
	files, err := s.Files(lineproto.MeasurementReading, t0, end)
	if err != nil || len(files) == 0 {
		t.Fatalf("Files: %v, %v", files, err)
	}
	for _, f := range files {
		body, err := os.Open(f)
		if err != nil {
			t.Fatal(err)
		}
		resp, err := http.Post(srv.URL+"/write?db="+srv.DB+"&precision=ns", "text/plain", body)
		body.Close()
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		if resp.StatusCode != http.StatusNoContent {
			t.Fatalf("bulk load %s: %s %s", f, resp.Status, resp.Header.Get("X-Influxdb-Error"))
		}
	}
	src, err := store.NewSource(store.Config{URL: srv.URL, Bucket: srv.Bucket})
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	fromInflux, err := readAll(t, src, t0, end, nil)
	if err != nil {
		t.Fatal(err)
	}
	fromFiles, err := readAll(t, s, t0, end, nil)
	if err != nil {
		t.Fatal(err)
	}
	same(t, fromFiles, rs)
	same(t, fromInflux, fromFiles)
}

// BenchmarkAdd measures durable appends of 1,000 readings per Add (one
// fsync per touched hour file).
func BenchmarkAdd(b *testing.B) {
	s, _ := Open(b.TempDir(), Options{})
	defer s.Close()
	rs := readings(1000, 50, time.Second)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		for j := range rs {
			rs[j].Time = rs[j].Time.Add(20 * time.Second)
		}
		if err := s.Add(points(rs)...); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.N*len(rs))/b.Elapsed().Seconds(), "points/s")
}

// BenchmarkRead measures reading back a day of 50 sensors at 10 s.
func BenchmarkRead(b *testing.B) {
	s, _ := Open(b.TempDir(), Options{NoSync: true})
	defer s.Close()
	rs := readings(50*8640, 50, 10*time.Second)
	if err := s.Add(points(rs)...); err != nil {
		b.Fatal(err)
	}
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		n := 0
		if err := s.Read(context.Background(), t0, t0.Add(24*time.Hour), nil, func(telemetry.Reading) error { n++; return nil }); err != nil || n != len(rs) {
			b.Fatalf("read %d, %v", n, err)
		}
	}
	b.ReportMetric(float64(b.N*len(rs))/b.Elapsed().Seconds(), "readings/s")
}
