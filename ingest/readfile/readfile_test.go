package readfile

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"plumbline/ingest/lineproto"
	"plumbline/model/telemetry"
)

var (
	t0  = time.Date(2026, 3, 2, 1, 10, 0, 0, time.UTC)
	all = [2]time.Time{time.Date(2000, 1, 1, 0, 0, 0, 0, time.UTC), time.Date(2100, 1, 1, 0, 0, 0, 0, time.UTC)}
)

func write(t *testing.T, name, body string) string {
	t.Helper()
	p := filepath.Join(t.TempDir(), name)
	if err := os.WriteFile(p, []byte(body), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

func read(t *testing.T, path string, opt Options, from, to time.Time, sensors []string) ([]telemetry.Reading, Stats, error) {
	t.Helper()
	f, err := Open(path, opt)
	if err != nil {
		t.Fatal(err)
	}
	var got []telemetry.Reading
	err = f.Read(context.Background(), from, to, sensors, func(r telemetry.Reading) error {
		got = append(got, r)
		return nil
	})
	return got, f.Stats(), err
}

func near(a, b float64) bool { return math.Abs(a-b) <= 1e-12*math.Max(1, math.Abs(b)) }

var config = []telemetry.Sensor{
	{ID: "P-104", Quantity: telemetry.Pressure, Unit: "bar"},
	{ID: "F-in-north", Quantity: telemetry.Flow, Unit: "m3/h"},
	{ID: "L-1", Quantity: telemetry.Level, Unit: "m"},
}

// Values are converted to canonical units with the sensor's quantity:
// 1 bar = 1e5 Pa and 1 m of water = 1000 kg/m³ × 9.80665 m/s² = 9806.65 Pa
// (NIST SP 811 (2008) Appendix B.8), so 3.41 bar = 341000/9806.65 m;
// 1 m³/h = 1000 L / 3600 s exactly. A line without unit takes the
// sensor's configured unit.
func TestCSVUnitsAndOrder(t *testing.T) {
	p := write(t, "r.csv", `# exported by the night shift
time,sensor,value,unit,quality
2026-03-02T01:10:00Z,P-104,3.41,bar,ok
2026-03-02T01:10:00Z,F-in-north,36,m3/h,
2026-03-02T01:09:59.5Z,L-1,2.5,m,ok
2026-03-02T01:10:05+01:00,P-104,3.5,,ok
2026-03-02T01:11:00Z,P-104,0.1,bar,stuck
2026-03-02T01:11:00Z,X-9,1,bar,ok
`)
	got, st, err := read(t, p, Options{Sensors: config}, all[0], all[1], nil)
	if err != nil {
		t.Fatal(err)
	}
	want := []telemetry.Reading{
		{Sensor: "P-104", Time: time.Date(2026, 3, 2, 0, 10, 5, 0, time.UTC), Value: 3.5e5 / 9806.65, Unit: "bar"},
		{Sensor: "L-1", Time: t0.Add(-500 * time.Millisecond), Value: 2.5, Unit: "m"},
		{Sensor: "F-in-north", Time: t0, Value: 36 * 1000.0 / 3600, Unit: "m3/h"},
		{Sensor: "P-104", Time: t0, Value: 3.41e5 / 9806.65, Unit: "bar"},
	}
	if len(got) != len(want) {
		t.Fatalf("got %d readings %+v, want %d", len(got), got, len(want))
	}
	for i := range want {
		g, w := got[i], want[i]
		if g.Sensor != w.Sensor || !g.Time.Equal(w.Time) || !near(g.Value, w.Value) || g.Unit != w.Unit {
			t.Errorf("reading %d: got %+v, want %+v (value tolerance 1e-12 relative)", i, g, w)
		}
	}
	if st.Flagged != 1 || st.Unknown != 1 || st.Bad != 0 || st.Lines != 8 {
		t.Errorf("Stats = %+v, want Flagged 1, Unknown 1, Bad 0, Lines 8", st)
	}
}

// Every bad line is named file:line with its reason; the good lines
// around them are all delivered.
func TestCSVBadLines(t *testing.T) {
	p := write(t, "bad.csv", `sensor,time,value,unit
P-1,2026-03-02T01:10:00Z,1.5,bar
P-1,2026-03-02 01:11:00,1.5,bar
P-1,2026-03-02T01:12:00Z,abc,bar
,2026-03-02T01:13:00Z,1,bar
P-1,2026-03-02T01:14:00Z,NaN,bar
P-1,2026-03-02T01:15:00Z,1,bar,extra
P-1,2026-03-02T01:16:00Z,1,psx
P-1,2026-03-02T01:17:00Z,2.5,bar
P-1,2026-03-02T01:18:00Z,1,bar
`)
	sensors := []telemetry.Sensor{{ID: "P-1", Quantity: telemetry.Pressure, Unit: "bar"}}
	got, st, err := read(t, p, Options{Sensors: sensors}, all[0], all[1], nil)
	var fe *FileError
	if !errors.As(err, &fe) {
		t.Fatalf("error = %v, want a *FileError", err)
	}
	wantLines := map[int]string{3: "not RFC 3339", 4: `"abc": not a number`, 5: "empty sensor", 6: "not a finite number", 7: "5 fields, the header has 4", 8: `"psx"`}
	if st.Bad != len(wantLines) || len(fe.Lines) != len(wantLines) {
		t.Fatalf("Bad = %d, listed %d, want %d:\n%v", st.Bad, len(fe.Lines), len(wantLines), err)
	}
	for _, le := range fe.Lines {
		want, ok := wantLines[le.Line]
		if !ok || !strings.Contains(le.Error(), want) || !strings.HasPrefix(le.Error(), fmt.Sprintf("%s:%d: ", p, le.Line)) {
			t.Errorf("line error %q: want prefix %s:%d: and text %q", le.Error(), p, le.Line, want)
		}
	}
	if len(got) != 3 || got[0].Time.Minute() != 10 || got[1].Time.Minute() != 17 || got[2].Time.Minute() != 18 {
		t.Fatalf("good readings = %+v, want the lines at 01:10, 01:17 and 01:18", got)
	}
}

func TestCSVHeaderErrors(t *testing.T) {
	for body, want := range map[string]string{
		"":                                   "no CSV header",
		"time,sensor,valu,unit\n":            `column 3 "valu" is not one of`,
		"time,sensor,unit\n":                 `no "value" column`,
		"time,sensor,value,value\n":          "given twice",
		"# only a comment\n":                 "no CSV header",
		"time,sensor,value,unit,quality,x\n": `"x"`,
	} {
		p := write(t, "h.csv", body)
		_, _, err := read(t, p, Options{}, all[0], all[1], nil)
		var fe *FileError
		if err == nil || errors.As(err, &fe) || !strings.Contains(err.Error(), want) {
			t.Errorf("header %q: error %v, want a stopping error containing %q", body, err, want)
		}
	}
}

// Without configured sensors values are delivered as read; a range and
// a sensor subset filter them; the end of the range is exclusive.
func TestLineProtocolFilterAndOrder(t *testing.T) {
	var b strings.Builder
	b.WriteString("# readings exported from the store\n")
	for i := 0; i < 100; i++ {
		for _, s := range []string{"B", "A", "C"} {
			// Rows of one minute arrive newest sensor first and with
			// small shuffles in time: the reorder buffer sorts them.
			ts := t0.Add(time.Duration(i)*time.Minute + time.Duration((i*7)%3)*time.Second)
			fmt.Fprintf(&b, "reading,sensor=%s,unit=L/s value=%d.25 %d\n", s, i, ts.UnixNano())
		}
		if i == 50 {
			b.WriteString("expected,sensor=A value=1 1\n")
			b.WriteString("reading,sensor=A value=\"text\" 5\n")
		}
	}
	p := write(t, "r.lp", b.String())
	from, to := t0.Add(10*time.Minute), t0.Add(20*time.Minute)
	got, st, err := read(t, p, Options{}, from, to, []string{"A", "C"})
	var fe *FileError
	if !errors.As(err, &fe) || st.Bad != 1 || fe.Lines[0].Line != 156 || st.Other != 1 {
		t.Fatalf("error %v, Stats %+v: want one bad line (156) and one other measurement", err, st)
	}
	if len(got) != 20 {
		t.Fatalf("got %d readings, want 20 (A and C, minutes 10..19)", len(got))
	}
	for i := 1; i < len(got); i++ {
		if got[i].Time.Before(got[i-1].Time) || got[i].Time.Equal(got[i-1].Time) && got[i].Sensor <= got[i-1].Sensor {
			t.Fatalf("reading %d %+v is not after %+v", i, got[i], got[i-1])
		}
	}
	if got[0].Value != 10.25 || got[0].Unit != "L/s" {
		t.Fatalf("first reading %+v, want value 10.25 L/s as read", got[0])
	}
}

// A reading more than the reorder window behind one already delivered is
// a bad line; duplicates within the window keep the later line.
func TestReorderWindowAndDuplicates(t *testing.T) {
	p := write(t, "w.csv", `time,sensor,value,unit
2026-03-02T01:00:00Z,A,1,m
2026-03-02T01:00:00Z,A,2,m
2026-03-02T03:00:00Z,A,3,m
2026-03-02T00:59:00Z,A,4,m
2026-03-02T02:45:00Z,A,5,m
`)
	got, st, err := read(t, p, Options{ReorderWindow: 30 * time.Minute}, all[0], all[1], nil)
	var fe *FileError
	if !errors.As(err, &fe) || st.Bad != 1 || fe.Lines[0].Line != 5 || !strings.Contains(err.Error(), "sort the file") {
		t.Fatalf("error %v: want line 5 named as out of order", err)
	}
	if st.Duplicates != 1 || len(got) != 3 || got[0].Value != 2 || got[1].Value != 5 || got[2].Value != 3 {
		t.Fatalf("got %+v, Stats %+v: want values 2, 5, 3 and one duplicate", got, st)
	}
}

func TestSniffAndStop(t *testing.T) {
	p := write(t, "readings.txt", "\n# c\ntime,sensor,value,unit\n2026-03-02T01:10:00Z,A,1,m\n2026-03-02T01:11:00Z,A,2,m\n")
	got, _, err := read(t, p, Options{}, all[0], all[1], nil)
	if err != nil || len(got) != 2 {
		t.Fatalf("sniffed CSV: %d readings, %v", len(got), err)
	}
	p = write(t, "readings.txt", "reading,sensor=A value=1 1772413800000000000\n")
	got, _, err = read(t, p, Options{}, all[0], all[1], nil)
	if err != nil || len(got) != 1 {
		t.Fatalf("sniffed line protocol: %d readings, %v", len(got), err)
	}
	f, _ := Open(p, Options{})
	stop := errors.New("stop")
	if err := f.Read(context.Background(), all[0], all[1], nil, func(telemetry.Reading) error { return stop }); err != stop {
		t.Fatalf("fn error came back as %v", err)
	}
	if _, err := Open(filepath.Join(t.TempDir(), "missing.csv"), Options{}); err == nil {
		t.Fatal("Open of a missing file: no error")
	}
}

// fuzzRead parses data in format and checks the invariants every read
// must keep: no panic, the same answer with a leading byte order mark,
// finite values, sensors named, time order, and that the delivered readings, written out again, read back the same.
func fuzzRead(t *testing.T, data []byte, format Format) {
	rd := newReader("fuzz", Options{ReorderWindow: time.Hour, MaxErrors: 5}, nil)
	var got []telemetry.Reading
	err := rd.run(context.Background(), bytes.NewReader(data), format, func(r telemetry.Reading) error {
		got = append(got, r)
		return nil
	})
	if err != nil && format == LineProtocol {
		t.Fatalf("line protocol reading stopped: %v", err)
	}
	if !bytes.HasPrefix(data, []byte(bom)) {
		// A leading byte order mark changes nothing, line numbers included.
		rdB := newReader("fuzz", Options{ReorderWindow: time.Hour, MaxErrors: 5}, nil)
		var gotB []telemetry.Reading
		errB := rdB.run(context.Background(), bytes.NewReader(append([]byte(bom), data...)), format, func(r telemetry.Reading) error {
			gotB = append(gotB, r)
			return nil
		})
		if fmt.Sprint(gotB, rdB.stats, rdB.errs, errB) != fmt.Sprint(got, rd.stats, rd.errs, err) {
			t.Fatalf("with a byte order mark: %v %+v %v %v\nwant %v %+v %v %v", gotB, rdB.stats, rdB.errs, errB, got, rd.stats, rd.errs, err)
		}
	}
	if err != nil {
		return // a CSV header error stops the read
	}
	if rd.stats.Readings != len(got) {
		t.Fatalf("Stats.Readings %d, delivered %d", rd.stats.Readings, len(got))
	}
	for i, r := range got {
		if r.Sensor == "" || math.IsNaN(r.Value) || math.IsInf(r.Value, 0) {
			t.Fatalf("reading %d %+v: empty sensor or value not finite", i, r)
		}
		if i > 0 && !(got[i-1].Time.Before(r.Time) || got[i-1].Time.Equal(r.Time) && got[i-1].Sensor < r.Sensor) {
			t.Fatalf("reading %d %+v is not after %+v", i, r, got[i-1])
		}
	}
	// Round trip through line protocol.
	var b bytes.Buffer
	for _, r := range got {
		line, err := lineproto.FromReading(r, 0, "").Line()
		if err != nil {
			return // e.g. a sensor id with a backslash, fine in CSV
		}
		b.WriteString(line)
		b.WriteByte('\n')
	}
	rd2 := newReader("again", Options{ReorderWindow: time.Hour}, nil)
	var again []telemetry.Reading
	if err := rd2.run(context.Background(), &b, LineProtocol, func(r telemetry.Reading) error {
		again = append(again, r)
		return nil
	}); err != nil {
		t.Fatal(err)
	}
	if len(again) != len(got) || rd2.stats.Bad != 0 {
		t.Fatalf("round trip: %d readings (%d bad), want %d", len(again), rd2.stats.Bad, len(got))
	}
	for i := range got {
		if again[i] != got[i] {
			t.Fatalf("round trip reading %d: got %+v, want %+v", i, again[i], got[i])
		}
	}
}

func FuzzCSV(f *testing.F) {
	f.Add([]byte("time,sensor,value,unit\n2026-03-02T01:10:00Z,P-1,3.41,bar\n"))
	f.Add([]byte("time,sensor,value,unit,quality\n2026-03-02T01:10:00.5+02:00,\"a,b\",1e3,m3/h,ok\nbad\n"))
	f.Fuzz(func(t *testing.T, data []byte) { fuzzRead(t, data, CSV) })
}

func FuzzLineProtocol(f *testing.F) {
	f.Add([]byte("reading,sensor=P-1,unit=bar value=3.41 1772413800000000000\n"))
	f.Add([]byte("# c\nreading,sensor=a\\ b value=1i 5\nexpected,sensor=x value=1 1\nreading value=1 1\n"))
	f.Fuzz(func(t *testing.T, data []byte) { fuzzRead(t, data, LineProtocol) })
}

// BenchmarkCSV measures reading a CSV readings file (50 sensors, a day at
// one minute, with unit conversion).
func BenchmarkCSV(b *testing.B) {
	var sb strings.Builder
	sb.WriteString("time,sensor,value,unit\n")
	var sensors []telemetry.Sensor
	for s := 0; s < 50; s++ {
		sensors = append(sensors, telemetry.Sensor{ID: fmt.Sprintf("P-%d", s), Quantity: telemetry.Pressure, Unit: "bar"})
	}
	n := 0
	for i := 0; i < 1440; i++ {
		for s := 0; s < 50; s++ {
			fmt.Fprintf(&sb, "%s,P-%d,%.3f,bar\n", t0.Add(time.Duration(i)*time.Minute).Format(time.RFC3339), s, 3+float64(i%100)/100)
			n++
		}
	}
	p := filepath.Join(b.TempDir(), "b.csv")
	os.WriteFile(p, []byte(sb.String()), 0o644)
	f, _ := Open(p, Options{Sensors: sensors})
	b.SetBytes(int64(sb.Len()))
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		got := 0
		if err := f.Read(context.Background(), all[0], all[1], nil, func(telemetry.Reading) error { got++; return nil }); err != nil || got != n {
			b.Fatalf("read %d of %d: %v", got, n, err)
		}
	}
	b.ReportMetric(float64(b.N*n)/b.Elapsed().Seconds(), "readings/s")
}
