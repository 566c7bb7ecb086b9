package testenv

import (
	"fmt"
	"net"
	"os"
	"os/user"
	"path/filepath"
	"strconv"
	"syscall"
	"testing"
	"time"
)

// Mosquitto is a private Mosquitto broker owned by one test. Its port and
// persistence folder stay the same across Stop, Start and Restart, so
// persistent sessions and queued QoS 1 messages survive a restart.
type Mosquitto struct {
	t    testing.TB
	port int
	dir  string
	proc *process
}

// StartMosquitto starts a private broker on a free loopback port and
// waits until it accepts connections. The broker is stopped when the test
// ends.
func StartMosquitto(t testing.TB) *Mosquitto {
	t.Helper()
	bin := binary(t, EnvMosquitto, "/usr/sbin/mosquitto", "/usr/local/sbin/mosquitto", "/usr/bin/mosquitto")
	dir := t.TempDir()
	m := &Mosquitto{t: t, port: FreePort(t), dir: dir}
	conf := filepath.Join(dir, "mosquitto.conf")
	if err := os.WriteFile(conf, []byte(MosquittoConfig(m.port, dir)), 0o644); err != nil {
		t.Fatalf("testenv: mosquitto config: %v", err)
	}
	m.proc = &process{
		name:    "mosquitto",
		bin:     bin,
		args:    []string{"-c", conf},
		logPath: filepath.Join(dir, "mosquitto.out"),
		ready:   func() error { return dialOnce(m.Addr()) },
	}
	m.proc.register(t)
	m.Start()
	return m
}

// MosquittoConfig returns the broker configuration used for tests:
// persistence in dir, no queue limit (max_queued_messages 0, whose
// default of 1000 drops silently), 1000 QoS 1 messages in flight per
// client instead of 20, anonymous access on 127.0.0.1:port only.
func MosquittoConfig(port int, dir string) string {
	u := "root"
	if cur, err := user.Current(); err == nil {
		u = cur.Username
	}
	return fmt.Sprintf(`user %s
persistence true
persistence_location %s/
autosave_interval 1
max_queued_messages 0
max_inflight_messages 1000
listener %d 127.0.0.1
allow_anonymous true
log_dest file %s
log_type error
log_type warning
`, u, filepath.Clean(dir), port, filepath.Join(dir, "mosquitto.log"))
}

// URL returns tcp://127.0.0.1:PORT.
func (m *Mosquitto) URL() string { return "tcp://" + m.Addr() }

// Addr returns 127.0.0.1:PORT.
func (m *Mosquitto) Addr() string { return net.JoinHostPort("127.0.0.1", strconv.Itoa(m.port)) }

// Dir returns the broker's folder (configuration, persistence, log).
func (m *Mosquitto) Dir() string { return m.dir }

// Start starts the stopped broker on the same port and waits until it
// accepts connections.
func (m *Mosquitto) Start() {
	m.t.Helper()
	if err := m.proc.start(); err != nil {
		m.t.Fatalf("testenv: %v", err)
	}
}

// Stop stops the broker gracefully (SIGTERM); Mosquitto saves its
// persistence file on the way out. Stopping a stopped broker does nothing.
func (m *Mosquitto) Stop() { m.proc.stop(syscall.SIGTERM) }

// Kill stops the broker with SIGKILL, like a crash: only what the last
// autosave (every second) wrote survives.
func (m *Mosquitto) Kill() { m.proc.stop(syscall.SIGKILL) }

// Restart stops the broker gracefully and starts it again on the same
// port with the same persistence folder.
func (m *Mosquitto) Restart() {
	m.t.Helper()
	m.Stop()
	m.Start()
}

// Running reports whether the broker process is up.
func (m *Mosquitto) Running() bool { return m.proc.running() }

func dialOnce(addr string) error {
	c, err := net.DialTimeout("tcp", addr, time.Second)
	if err != nil {
		return err
	}
	return c.Close()
}
