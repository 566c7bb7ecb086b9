package testenv

import (
	"context"
	"fmt"
	"net/http"
	"os"
	"path/filepath"
	"strconv"
	"syscall"
	"testing"
	"time"
)

// InfluxOptions adjust a private InfluxDB server.
type InfluxOptions struct {
	// MaxBodySize is the largest write request body in bytes the server
	// accepts before answering 413; 0 keeps the server default (25 MB).
	MaxBodySize int
	// DB is the database created at start; empty means "plumbline_test".
	DB string
	// NoFlux turns Flux off. InfluxDB 1.8 spends several CPU seconds
	// compiling the Flux library at every start; a test that only writes
	// and uses InfluxQL starts much faster without it.
	NoFlux bool
}

// InfluxProcess is a private InfluxDB 1.8 server owned by one test. Its
// port and data folder stay the same across Stop, Start and Restart.
type InfluxProcess struct {
	t        testing.TB
	httpPort int
	dir      string
	db       string
	proc     *process
}

// StartInflux starts a private InfluxDB 1.8 server with default options.
func StartInflux(t testing.TB) *InfluxProcess {
	t.Helper()
	return StartInfluxWith(t, InfluxOptions{})
}

// StartInfluxWith starts a private InfluxDB 1.8 server on free loopback
// ports (HTTP and RPC), waits until /ping answers and creates the
// database. The server is stopped when the test ends.
func StartInfluxWith(t testing.TB, opt InfluxOptions) *InfluxProcess {
	t.Helper()
	bin := binary(t, EnvInfluxd, ".testenv/bin/influxd")
	if opt.DB == "" {
		opt.DB = "plumbline_test"
	}
	dir := t.TempDir()
	p := &InfluxProcess{t: t, httpPort: FreePort(t), dir: dir, db: opt.DB}
	rpc := FreePort(t)
	for rpc == p.httpPort {
		rpc = FreePort(t)
	}
	conf := filepath.Join(dir, "influxdb.conf")
	if err := os.WriteFile(conf, []byte(InfluxConfig(p.httpPort, rpc, dir, opt.MaxBodySize, !opt.NoFlux)), 0o644); err != nil {
		t.Fatalf("testenv: influxdb config: %v", err)
	}
	p.proc = &process{
		name:    "influxd",
		bin:     bin,
		args:    []string{"run", "-config", conf},
		logPath: filepath.Join(dir, "influxd.log"),
		ready:   func() error { return ping(p.URL()) },
	}
	p.proc.register(t)
	p.Start()
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	if err := CreateDatabase(ctx, p.URL(), "", p.db); err != nil {
		t.Fatalf("testenv: %v", err)
	}
	return p
}

// InfluxConfig returns the server configuration used for tests: reporting
// off, HTTP on 127.0.0.1:httpPort with Flux on and authentication off,
// the RPC (backup) listener on 127.0.0.1:rpcPort instead of the default
// 8088, the internal monitor store off, data under dir and quiet logs.
// maxBody 0 keeps the default request body limit; flux false turns Flux
// off.
func InfluxConfig(httpPort, rpcPort int, dir string, maxBody int, flux bool) string {
	body := ""
	if maxBody > 0 {
		body = "  max-body-size = " + strconv.Itoa(maxBody) + "\n"
	}
	return fmt.Sprintf(`reporting-disabled = true
bind-address = "127.0.0.1:%d"
[meta]
  dir = %q
  logging-enabled = false
[data]
  dir = %q
  wal-dir = %q
  query-log-enabled = false
  trace-logging-enabled = false
[monitor]
  store-enabled = false
[http]
  enabled = true
  bind-address = "127.0.0.1:%d"
  auth-enabled = false
  log-enabled = false
  suppress-write-log = true
  flux-enabled = %t
  flux-log-enabled = false
  pprof-enabled = false
%s[logging]
  level = "warn"
  suppress-logo = true
[continuous_queries]
  enabled = false
`, rpcPort, filepath.Join(dir, "meta"), filepath.Join(dir, "data"), filepath.Join(dir, "wal"), httpPort, flux, body)
}

// URL returns http://127.0.0.1:PORT.
func (p *InfluxProcess) URL() string { return "http://127.0.0.1:" + strconv.Itoa(p.httpPort) }

// Server describes the private server and its database like Influx does
// for the shared one.
func (p *InfluxProcess) Server() InfluxServer {
	return InfluxServer{URL: p.URL(), Org: "-", DB: p.db, Bucket: p.db + "/autogen"}
}

// Dir returns the server's folder (configuration, data, WAL, log).
func (p *InfluxProcess) Dir() string { return p.dir }

// Start starts the stopped server on the same port and data folder and
// waits until /ping answers.
func (p *InfluxProcess) Start() {
	p.t.Helper()
	if err := p.proc.start(); err != nil {
		p.t.Fatalf("testenv: %v", err)
	}
}

// Stop stops the server gracefully (SIGTERM). Stopping a stopped server
// does nothing.
func (p *InfluxProcess) Stop() { p.proc.stop(syscall.SIGTERM) }

// Kill stops the server with SIGKILL, like a crash; InfluxDB recovers
// acknowledged writes from its WAL on the next start.
func (p *InfluxProcess) Kill() { p.proc.stop(syscall.SIGKILL) }

// Restart stops the server gracefully and starts it again.
func (p *InfluxProcess) Restart() {
	p.t.Helper()
	p.Stop()
	p.Start()
}

// Running reports whether the server process is up.
func (p *InfluxProcess) Running() bool { return p.proc.running() }

func ping(base string) error {
	c := http.Client{Timeout: 2 * time.Second}
	resp, err := c.Get(base + "/ping")
	if err != nil {
		return err
	}
	resp.Body.Close()
	if resp.StatusCode != http.StatusNoContent {
		return fmt.Errorf("ping: %s", resp.Status)
	}
	return nil
}
