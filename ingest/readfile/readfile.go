package readfile

import (
	"bufio"
	"bytes"
	"context"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"time"

	"plumbline/ingest/lineproto"
	"plumbline/ingest/source"
	"plumbline/model/telemetry"
	"plumbline/model/units"
)

// Format is the syntax of a readings file.
type Format uint8

const (
	// Auto picks the format from the extension or the first line.
	Auto Format = iota
	// CSV with a header line.
	CSV
	// LineProtocol is InfluxDB line protocol.
	LineProtocol
)

// String returns the format's name.
func (f Format) String() string {
	switch f {
	case CSV:
		return "csv"
	case LineProtocol:
		return "line protocol"
	}
	return "auto"
}

// Options tune reading. Zero values mean the documented defaults.
type Options struct {
	// Format of the file; Auto by default.
	Format Format
	// Sensors are the configured sensors; when given, values are converted
	// to canonical units and readings of other sensors are skipped.
	Sensors []telemetry.Sensor
	// ReorderWindow is the span of file time held back to sort readings
	// (default 1 h).
	ReorderWindow time.Duration
	// MaxErrors is how many bad lines the FileError lists (default 100);
	// all are counted.
	MaxErrors int
}

// Stats count what one Read saw.
type Stats struct {
	Lines      int // lines read, comments and header included
	Readings   int // readings delivered
	Bad        int // lines skipped as bad (see FileError)
	Flagged    int // readings skipped for a quality other than ok
	Unknown    int // readings of sensors not in Options.Sensors
	Other      int // line protocol lines of other measurements
	Duplicates int // repeated (sensor, time) pairs; the later line won
}

// LineError is one bad line.
type LineError struct {
	File string
	Line int
	Err  error
}

// Error names the file and line of the bad reading.
func (e *LineError) Error() string { return fmt.Sprintf("%s:%d: %v", e.File, e.Line, e.Err) }

// Unwrap returns the cause.
func (e *LineError) Unwrap() error { return e.Err }

// FileError reports the bad lines of a read that otherwise completed.
type FileError struct {
	File  string
	Stats Stats
	// Lines are the first Options.MaxErrors bad lines.
	Lines []*LineError
}

// Error lists the counts and the first bad lines.
func (e *FileError) Error() string {
	var b strings.Builder
	fmt.Fprintf(&b, "%s: %d bad lines skipped, %d readings read", e.File, e.Stats.Bad, e.Stats.Readings)
	for _, l := range e.Lines {
		b.WriteString("\n  ")
		b.WriteString(l.Error())
	}
	if n := e.Stats.Bad - len(e.Lines); n > 0 {
		fmt.Fprintf(&b, "\n  ... and %d more", n)
	}
	return b.String()
}

// File is a readings file; it implements source.Source.
type File struct {
	path    string
	opt     Options
	sensors map[string]telemetry.Sensor
	last    Stats
}

// sensorEntry is a configured sensor with the unit its readings came in
// last and that unit's conversion (units.Lookup once per sensor and
// spelling, not per reading).
type sensorEntry struct {
	s    telemetry.Sensor
	unit string
	conv units.Unit
	have bool
}

// Open checks that path can be read and returns the file's reader.
func Open(path string, opt Options) (*File, error) {
	if opt.ReorderWindow <= 0 {
		opt.ReorderWindow = time.Hour
	}
	if opt.MaxErrors <= 0 {
		opt.MaxErrors = 100
	}
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("readings file: %w", err)
	}
	f.Close()
	rf := &File{path: path, opt: opt}
	if opt.Sensors != nil {
		rf.sensors = make(map[string]telemetry.Sensor, len(opt.Sensors))
		for _, s := range opt.Sensors {
			rf.sensors[s.ID] = s
		}
	}
	return rf, nil
}

// Stats returns the counts of the last completed Read.
func (f *File) Stats() Stats { return f.last }

// Read streams the file's readings of sensors (all when empty) with time
// in [from, to), by time then sensor. See the package doc for errors.
func (f *File) Read(ctx context.Context, from, to time.Time, sensors []string, fn func(telemetry.Reading) error) error {
	fh, err := os.Open(f.path)
	if err != nil {
		return fmt.Errorf("readings file: %w", err)
	}
	defer fh.Close()
	format := f.opt.Format
	if format == Auto {
		format = byExtension(f.path)
	}
	name := f.path
	rd := newReader(name, f.opt, f.sensors)
	if f.sensors != nil {
		rd.entries = make(map[string]*sensorEntry, len(f.sensors))
		for id, s := range f.sensors {
			rd.entries[id] = &sensorEntry{s: s}
		}
	}
	want := source.SensorSet(sensors)
	rd.keep = func(r telemetry.Reading) bool {
		return want(r.Sensor) && !r.Time.Before(from) && r.Time.Before(to)
	}
	err = rd.run(ctx, fh, format, fn)
	f.last = rd.stats
	if err != nil {
		return err
	}
	if rd.stats.Bad > 0 {
		return &FileError{File: name, Stats: rd.stats, Lines: rd.errs}
	}
	return nil
}

func byExtension(path string) Format {
	switch strings.ToLower(filepath.Ext(path)) {
	case ".csv":
		return CSV
	case ".lp", ".line", ".influx":
		return LineProtocol
	}
	return Auto
}

// reader is the state of one pass over a file.
type reader struct {
	name    string
	opt     Options
	sensors map[string]telemetry.Sensor
	keep    func(telemetry.Reading) bool
	stats   Stats
	errs    []*LineError
	// entries are the sensors with their last unit's conversion (nil
	// when sensors is nil; built on first use otherwise).
	entries map[string]*sensorEntry

	buf      orderBuffer
	seq      int
	maxSeen  time.Time
	last     telemetry.Reading // last delivered
	haveLast bool
}

func newReader(name string, opt Options, sensors map[string]telemetry.Sensor) *reader {
	return &reader{name: name, opt: opt, sensors: sensors, keep: func(telemetry.Reading) bool { return true }}
}

func (rd *reader) bad(line int, err error) {
	rd.stats.Bad++
	if len(rd.errs) < rd.opt.MaxErrors {
		rd.errs = append(rd.errs, &LineError{File: rd.name, Line: line, Err: err})
	}
}

// errStop wraps an error that ends the read at once.
type errStop struct{ err error }

func (e errStop) Error() string { return e.err.Error() }

func (rd *reader) run(ctx context.Context, r io.Reader, format Format, fn func(telemetry.Reading) error) error {
	br := bufio.NewReaderSize(r, 256<<10)
	skipBOM(br)
	if format == Auto {
		format = sniff(br)
	}
	var err error
	emit := func(line int, rec telemetry.Reading, quality string) error {
		return rd.accept(line, rec, quality, fn)
	}
	switch format {
	case CSV:
		err = rd.csv(ctx, br, emit)
	default:
		err = rd.lineProtocol(ctx, br, emit)
	}
	if err == nil {
		err = rd.flush(time.Time{}, fn, true)
	}
	var stop errStop
	if errors.As(err, &stop) {
		return stop.err
	}
	return err
}

// utf8BOM is the UTF-8 encoding of the byte order mark U+FEFF.
const utf8BOM = "\xef\xbb\xbf"

// skipBOM drops a byte order mark at the start of the file: spreadsheet
// and desktop tools often write one, and left in it would hide a first
// comment, break a quoted CSV header, or rename the first line
// protocol measurement (so that the reading on it was skipped as
// another measurement). It holds no line break: line numbers stay those
// of the file.
func skipBOM(br *bufio.Reader) {
	if b, err := br.Peek(len(utf8BOM)); err == nil && string(b) == utf8BOM {
		_, _ = br.Discard(len(utf8BOM))
	}
}

// sniff looks at the first line that is not blank or a comment: a CSV
// header has a comma before any space or equals sign.
func sniff(br *bufio.Reader) Format {
	peek, _ := br.Peek(64 << 10)
	for len(peek) > 0 {
		line := peek
		if i := bytes.IndexByte(peek, '\n'); i >= 0 {
			line, peek = peek[:i], peek[i+1:]
		} else {
			peek = nil
		}
		if lineproto.IsBlankOrComment(line) {
			continue
		}
		i := bytes.IndexAny(line, ", =")
		if i >= 0 && line[i] == ',' && bytes.IndexByte(line, '=') < 0 {
			return CSV
		}
		return LineProtocol
	}
	return LineProtocol
}

// accept converts, checks and buffers one parsed reading.
func (rd *reader) accept(line int, r telemetry.Reading, quality string, fn func(telemetry.Reading) error) error {
	switch strings.ToLower(quality) {
	case "", "ok":
	case "missing", "stale", "stuck", "spike", "out-of-range":
		rd.stats.Flagged++
		return nil
	default:
		rd.bad(line, fmt.Errorf("sensor %s: quality %q is not one of ok, missing, stale, stuck, spike, out-of-range", r.Sensor, quality))
		return nil
	}
	if rd.sensors != nil {
		if rd.entries == nil {
			rd.entries = make(map[string]*sensorEntry, len(rd.sensors))
			for id, s := range rd.sensors {
				rd.entries[id] = &sensorEntry{s: s}
			}
		}
		e, ok := rd.entries[r.Sensor]
		if !ok {
			rd.stats.Unknown++
			return nil
		}
		s := &e.s
		r.Sensor = s.ID // the configured string, not a piece of the line
		if r.Unit == "" {
			r.Unit = s.Unit
		}
		if !e.have || e.unit != r.Unit {
			u, err := units.Lookup(s.Quantity, r.Unit)
			if err != nil {
				rd.bad(line, fmt.Errorf("sensor %s: %w", r.Sensor, err))
				return nil
			}
			e.unit, e.conv, e.have = r.Unit, u, true
		}
		r.Value = e.conv.ToCanonical(r.Value)
	}
	if !rd.keep(r) {
		return nil
	}
	if rd.haveLast && source.Less(r, rd.last) {
		rd.bad(line, fmt.Errorf("sensor %s: time %s is earlier than a reading already delivered (%s, more than the reorder window %v out of order); sort the file by time",
			r.Sensor, r.Time.Format(time.RFC3339Nano), rd.last.Time.Format(time.RFC3339Nano), rd.opt.ReorderWindow))
		return nil
	}
	rd.seq++
	rd.buf.push(newItem(r, rd.seq))
	if r.Time.After(rd.maxSeen) {
		rd.maxSeen = r.Time
	}
	return rd.flush(rd.maxSeen.Add(-rd.opt.ReorderWindow), fn, false)
}

// flush delivers buffered readings older than before (all when final).
func (rd *reader) flush(before time.Time, fn func(telemetry.Reading) error, final bool) error {
	for rd.buf.len() > 0 {
		top := rd.buf.min()
		if !final && !top.r.Time.Before(before) {
			return nil
		}
		it := rd.buf.pop()
		// Same sensor and time again in the buffer: the later line wins.
		for rd.buf.len() > 0 && rd.buf.min().r.Sensor == it.r.Sensor && rd.buf.min().r.Time.Equal(it.r.Time) {
			it = rd.buf.pop()
			rd.stats.Duplicates++
		}
		if rd.haveLast && rd.last.Sensor == it.r.Sensor && rd.last.Time.Equal(it.r.Time) {
			rd.stats.Duplicates++ // a repeat of what was delivered; it cannot be recalled
			continue
		}
		if err := fn(it.r); err != nil {
			return errStop{err}
		}
		rd.stats.Readings++
		rd.last, rd.haveLast = it.r, true
	}
	return nil
}

// csv parses a CSV readings file one line at a time: a field quoted
// across a line break is a bad line, not a licence to swallow the lines
// after it (a stray quote in one reading must cost that reading only).
// A line without a quote character is split at its commas directly,
// which is what encoding/csv does with such a line (every field
// unquoted; the leading space it trims is trimmed from every field used
// anyway); a line with one goes through encoding/csv.
func (rd *reader) csv(ctx context.Context, br *bufio.Reader, emit func(int, telemetry.Reading, string) error) error {
	sc := bufio.NewScanner(br)
	sc.Buffer(make([]byte, 64*1024), 1<<20)
	col := map[string]int{}
	var cols csvColumns
	headerLine := 0
	line := 0
	var lr strings.Reader
	var fields []string
	for sc.Scan() {
		line++
		rd.stats.Lines = line
		text := strings.TrimRight(sc.Text(), "\r")
		if t := strings.TrimSpace(text); t == "" || strings.HasPrefix(t, "#") {
			continue
		}
		var rec []string
		var err error
		if strings.IndexByte(text, '"') < 0 {
			fields = splitCommas(text, fields)
			rec = fields
		} else {
			lr.Reset(text)
			cr := csv.NewReader(&lr)
			cr.FieldsPerRecord = -1
			cr.TrimLeadingSpace = true
			rec, err = cr.Read()
			if err == nil {
				if _, err2 := cr.Read(); err2 != io.EOF {
					err = errors.New("a quoted field runs past the end of the line")
				}
			}
		}
		if headerLine == 0 {
			if err != nil {
				return errStop{fmt.Errorf("%s:%d: header: %w", rd.name, line, unwrapCSV(err))}
			}
			if err := parseHeader(rec, col); err != nil {
				return errStop{fmt.Errorf("%s:%d: header: %w", rd.name, line, err)}
			}
			cols = columnsOf(col)
			headerLine = line
			continue
		}
		if err != nil {
			rd.bad(line, unwrapCSV(err))
			continue
		}
		if line%4096 == 0 {
			if err := ctx.Err(); err != nil {
				return errStop{err}
			}
		}
		r, quality, err := csvRecord(rec, &cols)
		if err != nil {
			rd.bad(line, err)
			continue
		}
		if err := emit(line, r, quality); err != nil {
			return err
		}
	}
	if err := sc.Err(); err != nil {
		return errStop{fmt.Errorf("%s:%d: %w", rd.name, line+1, err)}
	}
	if headerLine == 0 {
		return errStop{fmt.Errorf("%s: no CSV header (want time,sensor,value,unit)", rd.name)}
	}
	return nil
}

// splitCommas splits a line without quote characters at its commas into
// dst (reused).
func splitCommas(text string, dst []string) []string {
	dst = dst[:0]
	for {
		i := strings.IndexByte(text, ',')
		if i < 0 {
			return append(dst, text)
		}
		dst = append(dst, text[:i])
		text = text[i+1:]
	}
}

// lineCounter counts the lines passing through it.
type lineCounter struct {
	r       io.Reader
	n       int
	partial bool // bytes after the last newline
}

func (c *lineCounter) Read(p []byte) (int, error) {
	n, err := c.r.Read(p)
	if n > 0 {
		c.n += bytes.Count(p[:n], []byte{'\n'})
		c.partial = p[n-1] != '\n'
	}
	return n, err
}

func (c *lineCounter) lines() int {
	if c.partial {
		return c.n + 1
	}
	return c.n
}

func unwrapCSV(err error) error {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		return fmt.Errorf("column %d: %w", pe.Column, pe.Err)
	}
	return err
}

var columns = []string{"time", "sensor", "value", "unit", "quality"}

func parseHeader(rec []string, col map[string]int) error {
	for i, h := range rec {
		h = strings.ToLower(strings.TrimSpace(h))
		known := false
		for _, c := range columns {
			if h == c {
				known = true
			}
		}
		if !known {
			return fmt.Errorf("column %d %q is not one of time, sensor, value, unit, quality", i+1, h)
		}
		if _, dup := col[h]; dup {
			return fmt.Errorf("column %q given twice", h)
		}
		col[h] = i
	}
	for _, c := range columns[:3] {
		if _, ok := col[c]; !ok {
			return fmt.Errorf("no %q column (want time,sensor,value,unit[,quality])", c)
		}
	}
	return nil
}

// csvColumns are the field positions of the header's columns (-1 for
// one it does not have) and its number of columns.
type csvColumns struct {
	time, sensor, value, unit, quality, n int
}

func columnsOf(col map[string]int) csvColumns {
	at := func(name string) int {
		if i, ok := col[name]; ok {
			return i
		}
		return -1
	}
	return csvColumns{time: at("time"), sensor: at("sensor"), value: at("value"), unit: at("unit"), quality: at("quality"), n: len(col)}
}

func csvRecord(rec []string, col *csvColumns) (telemetry.Reading, string, error) {
	get := func(i int) string {
		if i < 0 || i >= len(rec) {
			return ""
		}
		return strings.TrimSpace(rec[i])
	}
	var r telemetry.Reading
	if len(rec) < col.n {
		return r, "", fmt.Errorf("%d fields, the header has %d", len(rec), col.n)
	}
	if len(rec) > col.n {
		return r, "", fmt.Errorf("%d fields, the header has %d", len(rec), col.n)
	}
	r.Sensor = get(col.sensor)
	if r.Sensor == "" {
		return r, "", errors.New("empty sensor")
	}
	ts := get(col.time)
	t, err := parseTime(ts)
	if err != nil {
		return r, "", fmt.Errorf("sensor %s: time %q is not RFC 3339 (2026-03-02T01:10:00Z)", r.Sensor, ts)
	}
	r.Time = t.UTC()
	vs := get(col.value)
	v, err := parseValue(vs)
	if err != nil {
		return r, "", fmt.Errorf("sensor %s: value %q: %w", r.Sensor, vs, err)
	}
	r.Value = v
	r.Unit = get(col.unit)
	return r, get(col.quality), nil
}

// parseTime is time.Parse(time.RFC3339Nano, s). The form almost every
// file uses, whole seconds in UTC (2026-03-02T01:10:00Z), is read
// directly; anything else, valid or not, goes to time.Parse.
func parseTime(s string) (time.Time, error) {
	if t, ok := parseUTCSeconds(s); ok {
		return t, nil
	}
	return time.Parse(time.RFC3339Nano, s)
}

// parseUTCSeconds reads YYYY-MM-DDTHH:MM:SSZ with a valid date and
// time; ok is false for anything else (left to time.Parse, which gives
// the same time for what this accepts).
func parseUTCSeconds(s string) (time.Time, bool) {
	if len(s) != 20 || s[4] != '-' || s[7] != '-' || s[10] != 'T' || s[13] != ':' || s[16] != ':' || s[19] != 'Z' {
		return time.Time{}, false
	}
	num := func(a, b int) int {
		n := 0
		for i := a; i < b; i++ {
			c := s[i]
			if c < '0' || c > '9' {
				return -1
			}
			n = n*10 + int(c-'0')
		}
		return n
	}
	y, mo, d, h, mi, sec := num(0, 4), num(5, 7), num(8, 10), num(11, 13), num(14, 16), num(17, 19)
	if y < 1 || mo < 1 || mo > 12 || d < 1 || h < 0 || h > 23 || mi < 0 || mi > 59 || sec < 0 || sec > 59 {
		return time.Time{}, false
	}
	if d > daysIn(time.Month(mo), y) {
		return time.Time{}, false
	}
	return time.Date(y, time.Month(mo), d, h, mi, sec, 0, time.UTC), true
}

// daysIn is the number of days of month m of year y (Gregorian).
func daysIn(m time.Month, y int) int {
	return time.Date(y, m+1, 0, 0, 0, 0, 0, time.UTC).Day()
}

func parseValue(s string) (float64, error) {
	if s == "" {
		return 0, errors.New("empty")
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		return 0, errors.New("not a number")
	}
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, errors.New("not a finite number")
	}
	return v, nil
}

// lineProtocol parses a line protocol readings file.
func (rd *reader) lineProtocol(ctx context.Context, br *bufio.Reader, emit func(int, telemetry.Reading, string) error) error {
	for n := 1; ; n++ {
		line, err := br.ReadSlice('\n')
		if err == bufio.ErrBufferFull {
			long := append([]byte(nil), line...)
			for err == bufio.ErrBufferFull {
				line, err = br.ReadSlice('\n')
				long = append(long, line...)
			}
			line = long
		}
		if len(line) == 0 && err == io.EOF {
			return nil
		}
		if err != nil && err != io.EOF {
			return errStop{fmt.Errorf("%s:%d: %w", rd.name, n, err)}
		}
		rd.stats.Lines = n
		if n%4096 == 0 {
			if err := ctx.Err(); err != nil {
				return errStop{err}
			}
		}
		if !lineproto.IsBlankOrComment(line) {
			if r, quality, ok := rd.lpRecord(n, line); ok {
				if err := emit(n, r, quality); err != nil {
					return err
				}
			}
		}
		if err == io.EOF {
			return nil
		}
	}
}

func (rd *reader) lpRecord(n int, line []byte) (telemetry.Reading, string, bool) {
	p, err := lineproto.Parse(line)
	if err != nil {
		rd.bad(n, err)
		return telemetry.Reading{}, "", false
	}
	if p.Measurement != lineproto.MeasurementReading {
		rd.stats.Other++
		return telemetry.Reading{}, "", false
	}
	r, err := lineproto.ToReading(&p)
	if err != nil {
		rd.bad(n, err)
		return telemetry.Reading{}, "", false
	}
	if math.IsNaN(r.Value) || math.IsInf(r.Value, 0) {
		rd.bad(n, fmt.Errorf("sensor %s: value is not a finite number", r.Sensor))
		return telemetry.Reading{}, "", false
	}
	return r, p.Tag("quality"), true
}

// item is a buffered reading; seq keeps file order among equals. sec
// and nsec are its time as Unix seconds and nanoseconds, compared
// faster than time.Time and in the same order.
type item struct {
	r    telemetry.Reading
	seq  int
	sec  int64
	nsec int32
}

func newItem(r telemetry.Reading, seq int) item {
	return item{r: r, seq: seq, sec: r.Time.Unix(), nsec: int32(r.Time.Nanosecond())}
}

// sameTime reports whether two items have the same time.
func sameTime(a, b *item) bool { return a.sec == b.sec && a.nsec == b.nsec }

// itemLess orders buffered readings as Read delivers them (by time, then
// sensor id: source.Less), and in file order among readings of the same
// sensor and time.
func itemLess(a, b *item) bool {
	if a.sec != b.sec {
		return a.sec < b.sec
	}
	if a.nsec != b.nsec {
		return a.nsec < b.nsec
	}
	if a.r.Sensor != b.r.Sensor {
		return a.r.Sensor < b.r.Sensor
	}
	return a.seq < b.seq
}

func itemCmp(a, b item) int {
	if itemLess(&a, &b) {
		return -1
	}
	if itemLess(&b, &a) {
		return 1
	}
	return 0
}

// orderBuffer holds the readings of the reorder window and gives them
// back least first (itemLess), as one binary heap over all of them
// would, at a fraction of the cost for the usual file: in time order,
// the sensors of one time in any order.
//
// Readings not earlier than the last one held go to a run kept in time
// order, each time's readings in arrival order; others go to a binary
// heap. The readings of the run's first time are sorted fully when that
// time comes to be delivered, once. Invariant: run[head:] is in time
// order; run[head:sorted] is in itemLess order, and each of its
// readings is less than every reading of run[sorted:]. The least reading
// held is then the lesser of run[head] and the heap's top.
type orderBuffer struct {
	run    []item
	head   int
	sorted int
	late   []item // binary heap (itemLess) of readings that came out of time order
}

func (b *orderBuffer) len() int { return len(b.run) - b.head + len(b.late) }

func (b *orderBuffer) push(it item) {
	n := len(b.run)
	if n == b.head {
		clear(b.run[:n])
		b.run, b.head, b.sorted = append(b.run[:0], it), 0, 0
		return
	}
	last := &b.run[n-1]
	switch {
	case it.sec > last.sec || it.sec == last.sec && it.nsec > last.nsec:
		// A new time: greater than everything held in the run.
	case sameTime(&it, last) && b.sorted < n:
		// The last time is not sorted yet: its readings in any order.
	case sameTime(&it, last) && !itemLess(&it, last):
		// The last time is sorted and this one comes after it all.
		b.sorted++
	default:
		b.pushLate(it)
		return
	}
	if b.head >= 1024 && 2*b.head >= n {
		// Move the held part down; drop what was delivered.
		m := copy(b.run, b.run[b.head:])
		clear(b.run[m:n])
		b.run, b.sorted, b.head = b.run[:m], b.sorted-b.head, 0
	}
	b.run = append(b.run, it)
}

func (b *orderBuffer) pushLate(it item) {
	b.late = append(b.late, it)
	h := b.late
	for j := len(h) - 1; j > 0; {
		i := (j - 1) / 2
		if !itemLess(&h[j], &h[i]) {
			break
		}
		h[i], h[j] = h[j], h[i]
		j = i
	}
}

// fromRun says whether the least held reading is the run's first,
// sorting the run's first time first if it is not sorted yet.
func (b *orderBuffer) fromRun() bool {
	n := len(b.run)
	if b.head == n {
		return false
	}
	if b.sorted == b.head {
		end := b.head + 1
		for end < n && sameTime(&b.run[end], &b.run[b.head]) {
			end++
		}
		slices.SortFunc(b.run[b.head:end], itemCmp)
		b.sorted = end
	}
	return len(b.late) == 0 || itemLess(&b.run[b.head], &b.late[0])
}

// min returns the least held reading; the buffer must not be empty.
func (b *orderBuffer) min() *item {
	if b.fromRun() {
		return &b.run[b.head]
	}
	return &b.late[0]
}

// pop removes and returns the least held reading.
func (b *orderBuffer) pop() item {
	if b.fromRun() {
		it := b.run[b.head]
		b.run[b.head] = item{}
		b.head++
		return it
	}
	h := b.late
	it := h[0]
	n := len(h) - 1
	h[0] = h[n]
	h[n] = item{}
	h = h[:n]
	for i := 0; ; {
		l := 2*i + 1
		if l >= n {
			break
		}
		j := l
		if r := l + 1; r < n && itemLess(&h[r], &h[l]) {
			j = r
		}
		if !itemLess(&h[j], &h[i]) {
			break
		}
		h[i], h[j] = h[j], h[i]
		i = j
	}
	b.late = h
	return it
}
