package testenv

import (
	"context"
	"fmt"
	"io"
	"net"
	"net/http"
	"net/url"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// Environment variable names exported by scripts/testenv.sh.
const (
	EnvMQTTURL     = "PLUMBLINE_TEST_MQTT_URL"
	EnvInfluxURL   = "PLUMBLINE_TEST_INFLUX_URL"
	EnvInfluxToken = "PLUMBLINE_TEST_INFLUX_TOKEN"
	EnvInfluxOrg   = "PLUMBLINE_TEST_INFLUX_ORG"
	EnvInfluxDB    = "PLUMBLINE_TEST_INFLUX_DB"
	EnvMosquitto   = "PLUMBLINE_MOSQUITTO_BIN"
	EnvInfluxd     = "PLUMBLINE_INFLUXD_BIN"
)

const howToRun = "run the tests under `make test` or `scripts/testenv.sh go test ...`, which start the real Mosquitto and InfluxDB servers"

// MQTT returns the URL (tcp://127.0.0.1:PORT) of the shared test broker.
// It fails the test when the broker is not configured.
func MQTT(t testing.TB) string {
	t.Helper()
	return mustEnv(t, EnvMQTTURL)
}

// InfluxServer says how to reach an InfluxDB 1.8 server through the v2
// client API: Token is empty or "user:password", Org is "-" and Bucket is
// DB + "/autogen".
type InfluxServer struct {
	URL    string
	Token  string
	Org    string
	DB     string
	Bucket string
}

// Influx returns the shared test InfluxDB server. Its database already
// exists. It fails the test when the server is not configured.
func Influx(t testing.TB) InfluxServer {
	t.Helper()
	s := InfluxServer{
		URL:   mustEnv(t, EnvInfluxURL),
		Token: os.Getenv(EnvInfluxToken),
		Org:   os.Getenv(EnvInfluxOrg),
		DB:    mustEnv(t, EnvInfluxDB),
	}
	if s.Org == "" {
		s.Org = "-"
	}
	s.Bucket = s.DB + "/autogen"
	return s
}

func mustEnv(t testing.TB, name string) string {
	t.Helper()
	v := os.Getenv(name)
	if v == "" {
		t.Fatalf("testenv: %s is not set: %s", name, howToRun)
	}
	return v
}

// FreePort returns a TCP port on 127.0.0.1 that nothing listened on a
// moment ago. Another process may still take it before the caller does;
// that is rare on a test machine and shows as a clear start failure.
func FreePort(t testing.TB) int {
	t.Helper()
	p, err := freePort()
	if err != nil {
		t.Fatalf("testenv: %v", err)
	}
	return p
}

func freePort() (int, error) {
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		return 0, fmt.Errorf("free port: %w", err)
	}
	defer l.Close()
	return l.Addr().(*net.TCPAddr).Port, nil
}

// CreateDatabase creates database db on the InfluxDB 1.8 server at
// baseURL (POST /query, CREATE DATABASE; creating an existing database
// is not an error). token is empty or "user:password".
func CreateDatabase(ctx context.Context, baseURL, token, db string) error {
	form := url.Values{"q": {fmt.Sprintf("CREATE DATABASE %q", db)}}
	req, err := http.NewRequestWithContext(ctx, http.MethodPost,
		strings.TrimRight(baseURL, "/")+"/query", strings.NewReader(form.Encode()))
	if err != nil {
		return fmt.Errorf("create database %s: %w", db, err)
	}
	req.Header.Set("Content-Type", "application/x-www-form-urlencoded")
	if token != "" {
		req.Header.Set("Authorization", "Token "+token)
	}
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		return fmt.Errorf("create database %s: %w", db, err)
	}
	defer resp.Body.Close()
	body, _ := io.ReadAll(io.LimitReader(resp.Body, 4096))
	if resp.StatusCode != http.StatusOK || strings.Contains(string(body), `"error"`) {
		return fmt.Errorf("create database %s: %s: %s", db, resp.Status, strings.TrimSpace(string(body)))
	}
	return nil
}

// NewDatabase creates a database of its own for the calling test on the
// shared server and returns the server description pointing at it, so a
// test can count exactly what it wrote. The name is derived from the test
// name and the current time.
func NewDatabase(t testing.TB) InfluxServer {
	t.Helper()
	s := Influx(t)
	name := strings.Map(func(r rune) rune {
		if r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9' {
			return r
		}
		return '_'
	}, t.Name())
	s.DB = fmt.Sprintf("t_%s_%d", name, time.Now().UnixNano())
	s.Bucket = s.DB + "/autogen"
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	if err := CreateDatabase(ctx, s.URL, s.Token, s.DB); err != nil {
		t.Fatalf("testenv: %v", err)
	}
	return s
}

// binary finds a server binary: the environment variable first, then the
// given fallback paths (relative ones against the repository root).
func binary(t testing.TB, env string, fallbacks ...string) string {
	t.Helper()
	if p := os.Getenv(env); p != "" {
		if st, err := os.Stat(p); err == nil && !st.IsDir() {
			return p
		}
		t.Fatalf("testenv: %s=%s is not a file: %s", env, p, howToRun)
	}
	root := repoRoot()
	for _, f := range fallbacks {
		if !filepath.IsAbs(f) {
			if root == "" {
				continue
			}
			f = filepath.Join(root, f)
		}
		if st, err := os.Stat(f); err == nil && !st.IsDir() {
			return f
		}
	}
	t.Fatalf("testenv: %s is not set and no binary was found: %s", env, howToRun)
	return ""
}

// repoRoot walks up from the working directory to the folder holding
// go.mod, or returns "".
func repoRoot() string {
	dir, err := os.Getwd()
	if err != nil {
		return ""
	}
	for {
		if _, err := os.Stat(filepath.Join(dir, "go.mod")); err == nil {
			return dir
		}
		up := filepath.Dir(dir)
		if up == dir {
			return ""
		}
		dir = up
	}
}
