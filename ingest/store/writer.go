package store

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math/rand/v2"
	nethttp "net/http"
	"net/url"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	influxdb2 "github.com/influxdata/influxdb-client-go/v2"
	"github.com/influxdata/influxdb-client-go/v2/api"
	"github.com/influxdata/influxdb-client-go/v2/api/http"
	"github.com/rs/zerolog"

	"plumbline/ingest/lineproto"
	"plumbline/ingest/spool"
)

// Config says where the InfluxDB server is and how to write to it. Zero
// values mean the documented defaults.
type Config struct {
	// URL of the server, e.g. http://127.0.0.1:8086.
	URL string
	// Token is "user:password" or empty for InfluxDB 1.8, an API token for 2.x.
	Token string
	// Org is "-" for InfluxDB 1.8.
	Org string
	// Bucket is "db/retention-policy" for InfluxDB 1.8 (e.g. telemetry/autogen).
	Bucket string
	// CreateDatabase makes the writer create the database (the bucket's
	// part before "/") with CREATE DATABASE before writing: InfluxDB 1.8.
	CreateDatabase bool
	// BatchPoints is the most points per write request (default 5,000).
	BatchPoints int
	// BatchBytes is the most line protocol bytes per write request
	// (default 4 MiB, well under InfluxDB's default 25 MB body limit).
	BatchBytes int
	// MinBackoff and MaxBackoff bound the wait between retries (defaults
	// 100 ms and 30 s).
	MinBackoff, MaxBackoff time.Duration
	// RequestTimeout bounds one HTTP request (default 30 s).
	RequestTimeout time.Duration
	// DeadLetterPath is the file rejected points are appended to
	// (default: deadletter.lp in the spool folder).
	DeadLetterPath string
	// DeadLetterMaxBytes caps the dead-letter file (default 64 MiB);
	// points beyond it are only counted.
	DeadLetterMaxBytes int64
	// ReadWindow is the time span of one Flux query of Source (default 6 h).
	ReadWindow time.Duration
}

func (c *Config) defaults() {
	if c.Org == "" {
		c.Org = "-"
	}
	if c.BatchPoints <= 0 {
		c.BatchPoints = 5000
	}
	if c.BatchBytes <= 0 {
		c.BatchBytes = 4 << 20
	}
	if c.MinBackoff <= 0 {
		c.MinBackoff = 100 * time.Millisecond
	}
	if c.MaxBackoff <= 0 {
		c.MaxBackoff = 30 * time.Second
	}
	if c.MaxBackoff < c.MinBackoff {
		c.MaxBackoff = c.MinBackoff
	}
	if c.RequestTimeout <= 0 {
		c.RequestTimeout = 30 * time.Second
	}
	if c.DeadLetterMaxBytes <= 0 {
		c.DeadLetterMaxBytes = 64 << 20
	}
	if c.ReadWindow <= 0 {
		c.ReadWindow = 6 * time.Hour
	}
}

// Database returns the database part of the bucket (before "/").
func (c *Config) Database() string {
	db, _, _ := strings.Cut(c.Bucket, "/")
	return db
}

func (c *Config) check() error {
	if c.URL == "" {
		return errors.New("store: no url")
	}
	if _, err := url.Parse(c.URL); err != nil {
		return fmt.Errorf("store: url %q: %w", c.URL, err)
	}
	if c.Bucket == "" {
		return errors.New("store: no bucket")
	}
	return nil
}

// Stats are the writer's counters.
type Stats struct {
	// SpoolPoints is the number of points on disk waiting for the store.
	SpoolPoints int64
	// SpoolBytes is the disk the spool's segments take.
	SpoolBytes int64
	// Written counts points InfluxDB accepted (a point written again after
	// a split or crash counts again).
	Written uint64
	// Batches counts successful write requests.
	Batches uint64
	// Retried counts write requests that failed and were retried.
	Retried uint64
	// DeadLettered counts points InfluxDB refused for good.
	DeadLettered uint64
	// Rejected counts points Add could not encode.
	Rejected uint64
	// LastError is the most recent write error ("" when none yet).
	LastError string
	// LastErrorTime is when it happened.
	LastErrorTime time.Time
}

// WritePrometheus writes the counters in Prometheus text format.
func (s Stats) WritePrometheus(w io.Writer) error {
	_, err := fmt.Fprintf(w, `# HELP plumbline_spool_points Points on disk waiting for the time-series store.
# TYPE plumbline_spool_points gauge
plumbline_spool_points %d
# HELP plumbline_spool_bytes Disk used by the spool.
# TYPE plumbline_spool_bytes gauge
plumbline_spool_bytes %d
# HELP plumbline_store_points_written_total Points the time-series store accepted.
# TYPE plumbline_store_points_written_total counter
plumbline_store_points_written_total %d
# HELP plumbline_store_write_retries_total Write requests retried after an error.
# TYPE plumbline_store_write_retries_total counter
plumbline_store_write_retries_total %d
# HELP plumbline_store_points_dead_lettered_total Points the store refused for good, kept in the dead-letter file.
# TYPE plumbline_store_points_dead_lettered_total counter
plumbline_store_points_dead_lettered_total %d
`, s.SpoolPoints, s.SpoolBytes, s.Written, s.Retried, s.DeadLettered)
	return err
}

// Writer moves points from the spool into InfluxDB. See the package doc.
type Writer struct {
	cfg    Config
	sp     *spool.Spool
	log    zerolog.Logger
	client influxdb2.Client
	api    api.WriteAPIBlocking
	hc     *nethttp.Client

	written, batches, retried, dead, rejected atomic.Uint64

	errMu   sync.Mutex
	lastErr string
	lastAt  time.Time

	dbReady bool // Run goroutine only
}

// NewWriter returns a writer feeding InfluxDB from sp. It does not
// contact the server; Run does.
func NewWriter(cfg Config, sp *spool.Spool, log zerolog.Logger) (*Writer, error) {
	cfg.defaults()
	if err := cfg.check(); err != nil {
		return nil, err
	}
	if cfg.DeadLetterPath == "" {
		cfg.DeadLetterPath = filepath.Join(sp.Dir(), "deadletter.lp")
	}
	opts := influxdb2.DefaultOptions().
		SetHTTPRequestTimeout(uint(cfg.RequestTimeout / time.Second)).
		SetPrecision(time.Nanosecond).
		SetUseGZip(false)
	client := influxdb2.NewClientWithOptions(cfg.URL, cfg.Token, opts)
	return &Writer{
		cfg:    cfg,
		sp:     sp,
		log:    log.With().Str("component", "store-writer").Logger(),
		client: client,
		api:    client.WriteAPIBlocking(cfg.Org, cfg.Bucket),
		hc:     &nethttp.Client{Timeout: cfg.RequestTimeout},
	}, nil
}

// Add appends points to the spool, durable when it returns. Points that
// cannot be encoded are counted, left out and reported in the returned
// error (each named); the others are still appended. An error from the
// spool (spool.ErrFull, spool.ErrClosed, I/O) means none was appended.
func (w *Writer) Add(points ...lineproto.Point) error {
	recs := make([][]byte, 0, len(points))
	var bad []error
	for i := range points {
		b, err := points[i].Append(nil)
		if err != nil {
			bad = append(bad, err)
			continue
		}
		recs = append(recs, b)
	}
	w.rejected.Add(uint64(len(bad)))
	if err := w.sp.Append(recs...); err != nil {
		return fmt.Errorf("store: spool: %w", err)
	}
	if len(bad) > 0 {
		return fmt.Errorf("store: %d of %d points rejected: %w", len(bad), len(points), errors.Join(bad...))
	}
	return nil
}

// Stats returns the current counters.
func (w *Writer) Stats() Stats {
	w.errMu.Lock()
	le, lt := w.lastErr, w.lastAt
	w.errMu.Unlock()
	return Stats{
		SpoolPoints:   w.sp.Pending(),
		SpoolBytes:    w.sp.Bytes(),
		Written:       w.written.Load(),
		Batches:       w.batches.Load(),
		Retried:       w.retried.Load(),
		DeadLettered:  w.dead.Load(),
		Rejected:      w.rejected.Load(),
		LastError:     le,
		LastErrorTime: lt,
	}
}

// Run drains the spool into InfluxDB until ctx ends, then returns
// ctx.Err(). A batch interrupted by the stop stays in the spool for the
// next run. Run must be the spool's only reader.
func (w *Writer) Run(ctx context.Context) error {
	defer w.sp.Rewind() //nolint:errcheck // best effort: the next Open rewinds anyway
	for {
		if err := w.sp.Wait(ctx); err != nil {
			return err
		}
		b, err := w.sp.Next(w.cfg.BatchPoints, w.cfg.BatchBytes)
		if err != nil {
			return fmt.Errorf("store: spool: %w", err)
		}
		if len(b.Records) == 0 {
			continue
		}
		lines := make([]string, len(b.Records))
		for i, r := range b.Records {
			lines[i] = string(r)
		}
		if err := w.write(ctx, lines); err != nil {
			return err
		}
		if err := w.sp.Commit(b.Next); err != nil {
			return fmt.Errorf("store: spool: %w", err)
		}
	}
}

// Drain waits until the spool is empty (everything written) or ctx ends,
// for a shutdown that flushes within a deadline. Run must be running.
func (w *Writer) Drain(ctx context.Context) error {
	t := time.NewTicker(20 * time.Millisecond)
	defer t.Stop()
	for w.sp.Pending() > 0 {
		select {
		case <-ctx.Done():
			return fmt.Errorf("store: %d points still spooled: %w", w.sp.Pending(), ctx.Err())
		case <-t.C:
		}
	}
	return nil
}

// Close releases the client's connections. Call it after Run returned.
func (w *Writer) Close() { w.client.Close() }

type errClass int

const (
	classRetry errClass = iota // try the same batch again later
	classSplit                 // 413: halve the batch
	classBad                   // 400/422: isolate and dead-letter the bad points
	classNoDB                  // 404 on 1.8: create the database
)

func classify(err error) (errClass, *http.Error) {
	var he *http.Error
	if !errors.As(err, &he) {
		return classRetry, nil
	}
	switch {
	case he.StatusCode == nethttp.StatusRequestEntityTooLarge:
		return classSplit, he
	case he.StatusCode == nethttp.StatusBadRequest, he.StatusCode == nethttp.StatusUnprocessableEntity:
		return classBad, he
	case he.StatusCode == nethttp.StatusNotFound:
		return classNoDB, he
	}
	return classRetry, he // 0 (network), 401, 403, 429, 5xx and anything unknown
}

// write writes lines, retrying, splitting and dead-lettering as the
// package doc says. It returns only when the lines are dealt with or ctx
// ends.
func (w *Writer) write(ctx context.Context, lines []string) error {
	backoff := w.cfg.MinBackoff
	for {
		if !w.dbReady && w.cfg.CreateDatabase {
			if err := w.createDatabase(ctx); err != nil {
				if ctx.Err() != nil {
					return ctx.Err()
				}
				w.noteError(err)
				w.retried.Add(1)
				if err := w.sleep(ctx, &backoff, 0); err != nil {
					return err
				}
				continue
			}
			w.dbReady = true
		}
		err := w.api.WriteRecord(ctx, lines...)
		if err == nil {
			w.written.Add(uint64(len(lines)))
			w.batches.Add(1)
			return nil
		}
		if ctx.Err() != nil {
			return ctx.Err()
		}
		class, he := classify(err)
		switch class {
		case classSplit, classBad:
			if len(lines) > 1 {
				half := len(lines) / 2
				if err := w.write(ctx, lines[:half]); err != nil {
					return err
				}
				return w.write(ctx, lines[half:])
			}
			w.deadLetter(lines[0], err)
			return nil
		case classNoDB:
			w.noteError(err)
			if w.cfg.CreateDatabase {
				w.dbReady = false
			}
		default:
			w.noteError(err)
		}
		w.retried.Add(1)
		var after time.Duration
		if he != nil && he.RetryAfter > 0 {
			after = time.Duration(he.RetryAfter) * time.Second
		}
		if err := w.sleep(ctx, &backoff, after); err != nil {
			return err
		}
	}
}

// sleep waits for the backoff (or the server's Retry-After, if longer)
// with ±20 % jitter, then doubles the backoff up to MaxBackoff.
func (w *Writer) sleep(ctx context.Context, backoff *time.Duration, after time.Duration) error {
	d := *backoff
	if after > d {
		d = after
	}
	d = time.Duration(float64(d) * (0.8 + 0.4*rand.Float64()))
	*backoff *= 2
	if *backoff > w.cfg.MaxBackoff {
		*backoff = w.cfg.MaxBackoff
	}
	t := time.NewTimer(d)
	defer t.Stop()
	select {
	case <-ctx.Done():
		return ctx.Err()
	case <-t.C:
		return nil
	}
}

func (w *Writer) noteError(err error) {
	w.errMu.Lock()
	first := w.lastErr == ""
	w.lastErr, w.lastAt = err.Error(), time.Now()
	w.errMu.Unlock()
	if first {
		w.log.Warn().Err(err).Msg("store write failed, retrying")
	} else {
		w.log.Debug().Err(err).Msg("store write failed, retrying")
	}
}

// deadLetter appends a refused line to the dead-letter file, preceded by
// a comment with the time and the server's reason, and counts it.
func (w *Writer) deadLetter(line string, cause error) {
	w.dead.Add(1)
	w.noteError(cause)
	w.log.Error().Err(cause).Str("line", truncate(line, 200)).Msg("store refused a point; dead-lettered")
	if fi, err := os.Stat(w.cfg.DeadLetterPath); err == nil && fi.Size() > w.cfg.DeadLetterMaxBytes {
		return
	}
	f, err := os.OpenFile(w.cfg.DeadLetterPath, os.O_CREATE|os.O_WRONLY|os.O_APPEND, 0o644)
	if err != nil {
		w.log.Error().Err(err).Msg("dead-letter file")
		return
	}
	defer f.Close()
	reason := strings.ReplaceAll(strings.ReplaceAll(cause.Error(), "\n", " "), "\r", " ")
	if _, err := fmt.Fprintf(f, "# %s %s\n%s\n", time.Now().UTC().Format(time.RFC3339), reason, line); err != nil {
		w.log.Error().Err(err).Msg("dead-letter file")
		return
	}
	if err := f.Sync(); err != nil {
		w.log.Error().Err(err).Msg("dead-letter file")
	}
}

func truncate(s string, n int) string {
	if len(s) <= n {
		return s
	}
	return s[:n] + "..."
}

// createDatabase runs CREATE DATABASE on an InfluxDB 1.8 server (a no-op
// when it exists).
func (w *Writer) createDatabase(ctx context.Context) error {
	return CreateDatabase(ctx, w.hc, w.cfg.URL, w.cfg.Token, w.cfg.Database())
}

// CreateDatabase creates database db on the InfluxDB 1.8 server at base
// with POST /query; token is empty or "user:password". Creating an
// existing database is not an error.
func CreateDatabase(ctx context.Context, hc *nethttp.Client, base, token, db string) error {
	if db == "" {
		return errors.New("store: create database: no database name")
	}
	form := url.Values{"q": {"CREATE DATABASE " + quoteIdent(db)}}
	req, err := nethttp.NewRequestWithContext(ctx, nethttp.MethodPost, strings.TrimRight(base, "/")+"/query",
		strings.NewReader(form.Encode()))
	if err != nil {
		return fmt.Errorf("store: create database %s: %w", db, err)
	}
	req.Header.Set("Content-Type", "application/x-www-form-urlencoded")
	if token != "" {
		req.Header.Set("Authorization", "Token "+token)
	}
	resp, err := hc.Do(req)
	if err != nil {
		return fmt.Errorf("store: create database %s: %w", db, err)
	}
	defer resp.Body.Close()
	body, _ := io.ReadAll(io.LimitReader(resp.Body, 4096))
	if resp.StatusCode != nethttp.StatusOK || strings.Contains(string(body), `"error"`) {
		return fmt.Errorf("store: create database %s: %s: %s", db, resp.Status, strings.TrimSpace(string(body)))
	}
	return nil
}

// quoteIdent quotes an InfluxQL identifier.
func quoteIdent(s string) string {
	return `"` + strings.ReplaceAll(strings.ReplaceAll(s, `\`, `\\`), `"`, `\"`) + `"`
}
