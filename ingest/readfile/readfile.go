package readfile

import (
	"bufio"
	"bytes"
	"container/heap"
	"context"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
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

	buf      readingHeap
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
		s, ok := rd.sensors[r.Sensor]
		if !ok {
			rd.stats.Unknown++
			return nil
		}
		if r.Unit == "" {
			r.Unit = s.Unit
		}
		v, err := units.ToCanonical(s.Quantity, r.Unit, r.Value)
		if err != nil {
			rd.bad(line, fmt.Errorf("sensor %s: %w", r.Sensor, err))
			return nil
		}
		r.Value = v
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
	heap.Push(&rd.buf, item{r: r, seq: rd.seq})
	if r.Time.After(rd.maxSeen) {
		rd.maxSeen = r.Time
	}
	return rd.flush(rd.maxSeen.Add(-rd.opt.ReorderWindow), fn, false)
}

// flush delivers buffered readings older than before (all when final).
func (rd *reader) flush(before time.Time, fn func(telemetry.Reading) error, final bool) error {
	for rd.buf.Len() > 0 {
		top := rd.buf[0]
		if !final && !top.r.Time.Before(before) {
			return nil
		}
		it := heap.Pop(&rd.buf).(item)
		// Same sensor and time again in the buffer: the later line wins.
		for rd.buf.Len() > 0 && rd.buf[0].r.Sensor == it.r.Sensor && rd.buf[0].r.Time.Equal(it.r.Time) {
			it = heap.Pop(&rd.buf).(item)
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
func (rd *reader) csv(ctx context.Context, br *bufio.Reader, emit func(int, telemetry.Reading, string) error) error {
	sc := bufio.NewScanner(br)
	sc.Buffer(make([]byte, 64*1024), 1<<20)
	col := map[string]int{}
	headerLine := 0
	line := 0
	var lr strings.Reader
	for sc.Scan() {
		line++
		rd.stats.Lines = line
		text := strings.TrimRight(sc.Text(), "\r")
		if t := strings.TrimSpace(text); t == "" || strings.HasPrefix(t, "#") {
			continue
		}
		lr.Reset(text)
		cr := csv.NewReader(&lr)
		cr.FieldsPerRecord = -1
		cr.TrimLeadingSpace = true
		rec, err := cr.Read()
		if err == nil {
			if _, err2 := cr.Read(); err2 != io.EOF {
				err = errors.New("a quoted field runs past the end of the line")
			}
		}
		if headerLine == 0 {
			if err != nil {
				return errStop{fmt.Errorf("%s:%d: header: %w", rd.name, line, unwrapCSV(err))}
			}
			if err := parseHeader(rec, col); err != nil {
				return errStop{fmt.Errorf("%s:%d: header: %w", rd.name, line, err)}
			}
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
		r, quality, err := csvRecord(rec, col)
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

func csvRecord(rec []string, col map[string]int) (telemetry.Reading, string, error) {
	get := func(name string) string {
		i, ok := col[name]
		if !ok || i >= len(rec) {
			return ""
		}
		return strings.TrimSpace(rec[i])
	}
	var r telemetry.Reading
	if len(rec) < len(col) {
		return r, "", fmt.Errorf("%d fields, the header has %d", len(rec), len(col))
	}
	if len(rec) > len(col) {
		return r, "", fmt.Errorf("%d fields, the header has %d", len(rec), len(col))
	}
	r.Sensor = get("sensor")
	if r.Sensor == "" {
		return r, "", errors.New("empty sensor")
	}
	ts := get("time")
	t, err := time.Parse(time.RFC3339Nano, ts)
	if err != nil {
		return r, "", fmt.Errorf("sensor %s: time %q is not RFC 3339 (2026-03-02T01:10:00Z)", r.Sensor, ts)
	}
	r.Time = t.UTC()
	vs := get("value")
	v, err := parseValue(vs)
	if err != nil {
		return r, "", fmt.Errorf("sensor %s: value %q: %w", r.Sensor, vs, err)
	}
	r.Value = v
	r.Unit = get("unit")
	return r, get("quality"), nil
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

// item is a buffered reading; seq keeps file order among equals.
type item struct {
	r   telemetry.Reading
	seq int
}

type readingHeap []item

func (h readingHeap) Len() int { return len(h) }
func (h readingHeap) Less(i, j int) bool {
	if source.Less(h[i].r, h[j].r) {
		return true
	}
	if source.Less(h[j].r, h[i].r) {
		return false
	}
	return h[i].seq < h[j].seq
}
func (h readingHeap) Swap(i, j int) { h[i], h[j] = h[j], h[i] }
func (h *readingHeap) Push(x any)   { *h = append(*h, x.(item)) }
func (h *readingHeap) Pop() any {
	old := *h
	it := old[len(old)-1]
	*h = old[:len(old)-1]
	return it
}
