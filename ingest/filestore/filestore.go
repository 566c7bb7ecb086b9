package filestore

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"sync"
	"time"

	"plumbline/ingest/lineproto"
	"plumbline/ingest/source"
	"plumbline/model/telemetry"
)

const hourLayout = "2006-01-02T15"

// Options tune a store. Zero values mean the documented defaults.
type Options struct {
	// NoSync skips the fsync after Add (tests and benchmarks only).
	NoSync bool
	// MaxOpen is the number of hour files kept open for appending
	// (default 8); older ones are closed and reopened when needed.
	MaxOpen int
}

// Store is the embedded file store. See the package doc.
type Store struct {
	dir string
	opt Options

	mu     sync.Mutex
	open   map[string]*os.File // path → append handle
	order  []string            // paths in open, least recently used first
	closed bool
}

// Open opens (creating it when needed) the store in dir.
func Open(dir string, opt Options) (*Store, error) {
	if opt.MaxOpen <= 0 {
		opt.MaxOpen = 8
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, fmt.Errorf("filestore %s: %w", dir, err)
	}
	return &Store{dir: dir, opt: opt, open: map[string]*os.File{}}, nil
}

// Dir returns the store's folder.
func (s *Store) Dir() string { return s.dir }

// hourPath returns the file of measurement m for the hour holding t.
func (s *Store) hourPath(m string, t time.Time) string {
	return filepath.Join(s.dir, dirName(m), t.UTC().Format(hourLayout)+".lp")
}

// dirName makes a measurement name safe as a folder name.
func dirName(m string) string {
	return strings.Map(func(r rune) rune {
		if r == '/' || r == '\\' || r == 0 || r == ':' {
			return '_'
		}
		return r
	}, m)
}

// Add stores points, durable when it returns (unless NoSync). Points
// without a timestamp or that cannot be encoded are left out and named in
// the returned error; the others are stored.
func (s *Store) Add(points ...lineproto.Point) error {
	type chunk struct {
		path string
		buf  []byte
	}
	var chunks []*chunk
	byPath := map[string]*chunk{}
	var bad []error
	for i := range points {
		p := &points[i]
		if p.Time.IsZero() {
			bad = append(bad, fmt.Errorf("%s: no timestamp", p.Measurement))
			continue
		}
		path := s.hourPath(p.Measurement, p.Time)
		c := byPath[path]
		if c == nil {
			c = &chunk{path: path}
			byPath[path] = c
			chunks = append(chunks, c)
		}
		n := len(c.buf)
		b, err := p.Append(c.buf)
		if err != nil {
			c.buf = c.buf[:n]
			bad = append(bad, err)
			continue
		}
		c.buf = append(b, '\n')
	}
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.closed {
		return errors.New("filestore: closed")
	}
	for _, c := range chunks {
		if len(c.buf) == 0 {
			continue
		}
		f, err := s.appendHandle(c.path)
		if err != nil {
			return err
		}
		if _, err := f.Write(c.buf); err != nil {
			return fmt.Errorf("filestore: %s: %w", c.path, err)
		}
		if !s.opt.NoSync {
			if err := f.Sync(); err != nil {
				return fmt.Errorf("filestore: %s: fsync: %w", c.path, err)
			}
		}
	}
	if len(bad) > 0 {
		return fmt.Errorf("filestore: %d of %d points rejected: %w", len(bad), len(points), errors.Join(bad...))
	}
	return nil
}

// appendHandle returns the open append handle of path, opening it (and
// repairing a torn last line) when needed. Called with s.mu held.
func (s *Store) appendHandle(path string) (*os.File, error) {
	if f, ok := s.open[path]; ok {
		i := slices.Index(s.order, path)
		s.order = append(slices.Delete(s.order, i, i+1), path)
		return f, nil
	}
	if len(s.order) >= s.opt.MaxOpen {
		old := s.order[0]
		s.order = s.order[1:]
		s.open[old].Close()
		delete(s.open, old)
	}
	dir := filepath.Dir(path)
	newDir := false
	if _, err := os.Stat(dir); errors.Is(err, os.ErrNotExist) {
		newDir = true
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, fmt.Errorf("filestore: %w", err)
	}
	if err := repairTail(path); err != nil {
		return nil, fmt.Errorf("filestore: %s: %w", path, err)
	}
	f, err := os.OpenFile(path, os.O_CREATE|os.O_WRONLY|os.O_APPEND, 0o644)
	if err != nil {
		return nil, fmt.Errorf("filestore: %w", err)
	}
	if !s.opt.NoSync {
		// Make the new file's (and folder's) name durable too.
		if err := syncDir(dir); err != nil {
			f.Close()
			return nil, fmt.Errorf("filestore: %w", err)
		}
		if newDir {
			if err := syncDir(filepath.Dir(dir)); err != nil {
				f.Close()
				return nil, fmt.Errorf("filestore: %w", err)
			}
		}
	}
	s.open[path] = f
	s.order = append(s.order, path)
	return f, nil
}

// repairTail cuts a partial last line (no newline) left by a crash.
func repairTail(path string) error {
	f, err := os.OpenFile(path, os.O_RDWR, 0)
	if errors.Is(err, os.ErrNotExist) {
		return nil
	}
	if err != nil {
		return err
	}
	defer f.Close()
	fi, err := f.Stat()
	if err != nil || fi.Size() == 0 {
		return err
	}
	// Look back in chunks for the last newline.
	end := fi.Size()
	buf := make([]byte, 64<<10)
	for pos := end; pos > 0; {
		n := int64(len(buf))
		if pos < n {
			n = pos
		}
		pos -= n
		if _, err := f.ReadAt(buf[:n], pos); err != nil && err != io.EOF {
			return err
		}
		if i := bytes.LastIndexByte(buf[:n], '\n'); i >= 0 {
			keep := pos + int64(i) + 1
			if keep == end {
				return nil
			}
			return f.Truncate(keep)
		}
	}
	return f.Truncate(0)
}

func syncDir(dir string) error {
	d, err := os.Open(dir)
	if err != nil {
		return err
	}
	defer d.Close()
	return d.Sync()
}

// Close closes the open files. Close is idempotent.
func (s *Store) Close() error {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.closed {
		return nil
	}
	s.closed = true
	var first error
	for _, f := range s.open {
		if err := f.Close(); err != nil && first == nil {
			first = err
		}
	}
	s.open, s.order = nil, nil
	if first != nil {
		return fmt.Errorf("filestore: close: %w", first)
	}
	return nil
}

// hours returns the existing hour files of measurement m that may hold
// points in [from, to), oldest first.
func (s *Store) hours(m string, from, to time.Time) ([]string, error) {
	entries, err := os.ReadDir(filepath.Join(s.dir, dirName(m)))
	if errors.Is(err, os.ErrNotExist) {
		return nil, nil
	}
	if err != nil {
		return nil, fmt.Errorf("filestore: %w", err)
	}
	first := from.UTC().Truncate(time.Hour)
	var out []string
	for _, e := range entries {
		name := e.Name()
		if e.IsDir() || !strings.HasSuffix(name, ".lp") {
			continue
		}
		h, err := time.Parse(hourLayout, strings.TrimSuffix(name, ".lp"))
		if err != nil {
			continue // not one of ours
		}
		if h.Before(first) || !h.Before(to) {
			continue
		}
		out = append(out, filepath.Join(s.dir, dirName(m), name))
	}
	slices.Sort(out) // the layout sorts by time
	return out, nil
}

// Files returns the hour files of measurement m that may hold points in
// [from, to), oldest first, for bulk loading into InfluxDB.
func (s *Store) Files(m string, from, to time.Time) ([]string, error) {
	return s.hours(m, from, to)
}

// Prune deletes every hour file (of every measurement) that ends before
// cutoff, and returns how many it deleted.
func (s *Store) Prune(cutoff time.Time) (int, error) {
	ms, err := os.ReadDir(s.dir)
	if err != nil {
		return 0, fmt.Errorf("filestore: %w", err)
	}
	n := 0
	for _, m := range ms {
		if !m.IsDir() {
			continue
		}
		files, err := s.hours(m.Name(), time.Time{}, cutoff.Add(-time.Hour+1))
		if err != nil {
			return n, err
		}
		for _, f := range files {
			s.mu.Lock()
			if h, ok := s.open[f]; ok {
				h.Close()
				delete(s.open, f)
				i := slices.Index(s.order, f)
				s.order = slices.Delete(s.order, i, i+1)
			}
			err := os.Remove(f)
			s.mu.Unlock()
			if err != nil {
				return n, fmt.Errorf("filestore: %w", err)
			}
			n++
		}
	}
	return n, nil
}

// LineError is a line of a store file that could not be read.
type LineError struct {
	File string
	Line int
	Err  error
}

// Error names the file and line of the bad point.
func (e *LineError) Error() string { return fmt.Sprintf("%s:%d: %v", e.File, e.Line, e.Err) }

// Unwrap returns the parse error.
func (e *LineError) Unwrap() error { return e.Err }

// ReadPoints calls fn for every point of measurement m with time in
// [from, to), ordered by time and then series (tags), each series and
// time once (the last added wins). Unreadable lines are skipped and
// reported together at the end as an error joining *LineError values.
func (s *Store) ReadPoints(ctx context.Context, m string, from, to time.Time, fn func(lineproto.Point) error) error {
	return s.read(ctx, m, from, to, func(*lineproto.Point) bool { return true }, seriesKey, fn)
}

// Read implements source.Source over the reading measurement: readings of
// sensors (all when empty) in [from, to), by time then sensor.
func (s *Store) Read(ctx context.Context, from, to time.Time, sensors []string, fn func(telemetry.Reading) error) error {
	want := source.SensorSet(sensors)
	var bad []error
	err := s.read(ctx, lineproto.MeasurementReading, from, to,
		func(p *lineproto.Point) bool { return want(p.Tag(lineproto.TagSensor)) },
		func(p *lineproto.Point) string { return p.Tag(lineproto.TagSensor) },
		func(p lineproto.Point) error {
			r, err := lineproto.ToReading(&p)
			if err != nil {
				bad = append(bad, fmt.Errorf("filestore: reading at %s: %w", p.Time.Format(time.RFC3339Nano), err))
				return nil
			}
			return fn(r)
		})
	if len(bad) > 0 {
		err = errors.Join(append([]error{err}, bad...)...)
	}
	return err
}

// seriesKey is the identity of a point's series: its tags in key order.
func seriesKey(p *lineproto.Point) string {
	tags := slices.Clone(p.Tags)
	slices.SortFunc(tags, func(a, b lineproto.Tag) int { return strings.Compare(a.Key, b.Key) })
	var b strings.Builder
	for _, t := range tags {
		b.WriteString(t.Key)
		b.WriteByte('=')
		b.WriteString(t.Value)
		b.WriteByte(0)
	}
	return b.String()
}

type keyed struct {
	p   lineproto.Point
	key string
	seq int // order added, for last-wins
}

func (s *Store) read(ctx context.Context, m string, from, to time.Time,
	keep func(*lineproto.Point) bool, key func(*lineproto.Point) string, fn func(lineproto.Point) error) error {
	if !from.Before(to) {
		return nil
	}
	files, err := s.hours(m, from, to)
	if err != nil {
		return err
	}
	var bad []error
	var hour []keyed
	for _, path := range files {
		if err := ctx.Err(); err != nil {
			return err
		}
		hour = hour[:0]
		errs, err := scanFile(path, func(p lineproto.Point) {
			if p.Time.Before(from) || !p.Time.Before(to) || !keep(&p) {
				return
			}
			hour = append(hour, keyed{p: p, key: key(&p), seq: len(hour)})
		})
		if err != nil {
			return err
		}
		bad = append(bad, errs...)
		slices.SortFunc(hour, func(a, b keyed) int {
			if c := a.p.Time.Compare(b.p.Time); c != 0 {
				return c
			}
			if c := strings.Compare(a.key, b.key); c != 0 {
				return c
			}
			return a.seq - b.seq
		})
		for i := range hour {
			if i+1 < len(hour) && hour[i+1].p.Time.Equal(hour[i].p.Time) && hour[i+1].key == hour[i].key {
				continue // a later write of the same series and time wins
			}
			if err := fn(hour[i].p); err != nil {
				return err
			}
		}
	}
	return errors.Join(bad...)
}

// scanFile parses every complete line of a store file. A last line
// without newline is a write in progress (or torn) and is ignored.
func scanFile(path string, fn func(lineproto.Point)) ([]error, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("filestore: %w", err)
	}
	defer f.Close()
	r := bufio.NewReaderSize(f, 256<<10)
	var bad []error
	for n := 1; ; n++ {
		line, err := r.ReadSlice('\n')
		if err == bufio.ErrBufferFull {
			// A line longer than the buffer: collect it whole.
			long := append([]byte(nil), line...)
			for err == bufio.ErrBufferFull {
				line, err = r.ReadSlice('\n')
				long = append(long, line...)
			}
			line = long
		}
		if err == io.EOF {
			return bad, nil // no newline: incomplete last line
		}
		if err != nil {
			return bad, fmt.Errorf("filestore: %s: %w", path, err)
		}
		if lineproto.IsBlankOrComment(line) {
			continue
		}
		p, perr := lineproto.Parse(line)
		if perr != nil {
			if len(bad) < 100 {
				bad = append(bad, &LineError{File: path, Line: n, Err: perr})
			}
			continue
		}
		fn(p)
	}
}
