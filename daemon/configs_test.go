package main

import (
	"bufio"
	"context"
	"net"
	"net/url"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"plumbline/alerts"
	"plumbline/daemon/config"
)

const (
	exampleConfig = "../configs/example.yaml"
	exampleUnit   = "../configs/plumbline.service"
)

// configs/example.yaml, the annotated deployment example, loads without
// an error; its only warnings are files (secrets, the broker's CA) that do
// not exist on a test machine; its alerts section decodes; and it shows
// what it is there to show: TLS to the broker, InfluxDB 1.8 addressing,
// SMTP and webhook channels, and the leakage figures of every zone.
func TestExampleConfig(t *testing.T) {
	data, err := os.ReadFile(exampleConfig)
	if err != nil {
		t.Fatal(err)
	}
	c, probs := config.Parse(data, exampleConfig)
	for _, p := range probs {
		if p.Severity == config.Error || !strings.Contains(p.Message, "cannot be read now") {
			t.Errorf("%s: %s, want only warnings about files missing on this machine", p.Severity, p)
		}
	}
	if c == nil {
		t.Fatal("the example does not load")
	}
	if _, err := config.LoadFile(exampleConfig); err != nil {
		t.Fatalf("LoadFile: %v", err)
	}
	ac, err := alerts.DecodeConfig(&c.Alerts)
	if err != nil {
		t.Fatalf("alerts section: %v", err)
	}
	if ac.Channels.SMTP == nil || !ac.Channels.SMTP.StartTLS || ac.Channels.SMTP.PasswordFile == "" {
		t.Errorf("smtp channel %+v, want STARTTLS with a password file", ac.Channels.SMTP)
	}
	if ac.Channels.Webhook == nil || ac.Channels.Webhook.SecretFile == "" {
		t.Errorf("webhook channel %+v, want a signing secret file", ac.Channels.Webhook)
	}
	if len(ac.Rotas) == 0 || len(ac.Routes) == 0 || ac.APITokenFile == "" {
		t.Errorf("alerts: %d rotas, %d routes, api token file %q; want a rota, routes and a token", len(ac.Rotas), len(ac.Routes), ac.APITokenFile)
	}
	escalates := false
	for _, r := range ac.Routes {
		escalates = escalates || len(r.Levels) > 1 && r.Levels[0].AckTimeout > 0
	}
	if !escalates {
		t.Error("no route escalates (a first level with an ack_timeout and a next level)")
	}

	u, err := url.Parse(c.MQTT.URL)
	if err != nil || u.Scheme != "ssl" || c.MQTT.CAFile == "" || c.MQTT.Username == "" || c.MQTT.PasswordFile == "" {
		t.Errorf("mqtt %+v, want ssl:// with a CA file, a username and a password file", c.MQTT)
	}
	if c.Store.Embedded() || c.Store.Org != "-" || !strings.Contains(c.Store.Bucket, "/") || c.Store.TokenFile == "" {
		t.Errorf("store %+v, want InfluxDB 1.8 addressing (org \"-\", bucket db/rp) with a token file", c.Store)
	}
	host, _, err := net.SplitHostPort(c.HTTP.Listen)
	if ip := net.ParseIP(host); err != nil || ip == nil || !ip.IsLoopback() {
		t.Errorf("http.listen %q, want a loopback address", c.HTTP.Listen)
	}
	for _, z := range c.Zones {
		if z.MainsLengthKm <= 0 || z.ServiceConnections <= 0 || z.ServiceLengthKm <= 0 || z.AveragePressureM <= 0 {
			t.Errorf("zone %s: mains %g km, %d connections, services %g km, pressure %g m: want all the leakage figures",
				z.ID, z.MainsLengthKm, z.ServiceConnections, z.ServiceLengthKm, z.AveragePressureM)
		}
		if z.TimeZoneName == "UTC" || z.TimeZone == nil {
			t.Errorf("zone %s: time zone %q, want a local one", z.ID, z.TimeZoneName)
		}
	}
	var out, errb strings.Builder
	if code := dispatch(context.Background(), []string{"check", "--config", exampleConfig}, &out, &errb); code != 0 {
		t.Errorf("plumbline check exit %d:\n%s%s", code, out.String(), errb.String())
	}
}

// unitSettings reads a systemd unit file: section -> key -> values (a
// key may repeat), comments and blank lines left out.
func unitSettings(t *testing.T, path string) map[string]map[string][]string {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	out := map[string]map[string][]string{}
	section := ""
	sc := bufio.NewScanner(f)
	for n := 1; sc.Scan(); n++ {
		line := strings.TrimSpace(sc.Text())
		switch {
		case line == "" || strings.HasPrefix(line, "#") || strings.HasPrefix(line, ";"):
		case strings.HasPrefix(line, "[") && strings.HasSuffix(line, "]"):
			section = line[1 : len(line)-1]
			out[section] = map[string][]string{}
		default:
			k, v, ok := strings.Cut(line, "=")
			if !ok || section == "" {
				t.Fatalf("%s:%d: not a setting: %q", path, n, line)
			}
			out[section][k] = append(out[section][k], v)
		}
	}
	return out
}

// configs/plumbline.service starts the service on the installed
// configuration with the usual hardening, gives it the 10 s its ordered
// stop needs, and agrees with configs/example.yaml: data_dir is the
// unit's state directory and every credential path the example names is
// loaded by the unit.
func TestSystemdUnit(t *testing.T) {
	u := unitSettings(t, exampleUnit)
	svc := u["Service"]
	want := map[string]string{
		"ExecStart":               "/usr/local/bin/plumbline run --config /etc/plumbline/plumbline.yaml",
		"DynamicUser":             "yes",
		"StateDirectory":          "plumbline",
		"ProtectSystem":           "strict",
		"ProtectHome":             "yes",
		"PrivateTmp":              "yes",
		"NoNewPrivileges":         "yes",
		"CapabilityBoundingSet":   "",
		"RestrictAddressFamilies": "AF_INET AF_INET6 AF_UNIX",
		"Restart":                 "on-failure",
	}
	for k, v := range want {
		if got := svc[k]; len(got) != 1 || got[0] != v {
			t.Errorf("[Service] %s = %q, want %q", k, got, v)
		}
	}
	found := false
	for _, v := range svc["SystemCallFilter"] {
		found = found || v == "@system-service"
	}
	if !found {
		t.Errorf("[Service] SystemCallFilter = %q, want @system-service among them", svc["SystemCallFilter"])
	}
	if v := svc["TimeoutStopSec"]; len(v) != 1 {
		t.Errorf("[Service] TimeoutStopSec = %q, want one value", v)
	} else if d, err := time.ParseDuration(v[0] + "s"); err != nil || d <= 10*time.Second {
		t.Errorf("[Service] TimeoutStopSec = %s, want more than the 10 s the service takes to stop", v[0])
	}
	if _, ok := u["Install"]["WantedBy"]; !ok {
		t.Error("[Install] WantedBy missing")
	}

	c, err := config.LoadFile(exampleConfig)
	if err != nil {
		t.Fatal(err)
	}
	if want := filepath.Join("/var/lib", svc["StateDirectory"][0]); c.DataDir != want {
		t.Errorf("example data_dir %s, want the unit's state directory %s", c.DataDir, want)
	}
	creds := map[string]bool{}
	for _, v := range svc["LoadCredential"] {
		name, _, _ := strings.Cut(v, ":")
		creds[name] = true
	}
	data, err := os.ReadFile(exampleConfig)
	if err != nil {
		t.Fatal(err)
	}
	re := regexp.MustCompile(`/run/credentials/plumbline\.service/([A-Za-z0-9._-]+)`)
	var settings strings.Builder // the example without its comments
	for _, line := range strings.Split(string(data), "\n") {
		line, _, _ = strings.Cut(line, "#")
		settings.WriteString(line + "\n")
	}
	names := re.FindAllStringSubmatch(settings.String(), -1)
	if len(names) == 0 {
		t.Fatal("the example names no credential")
	}
	for _, m := range names {
		if !creds[m[1]] {
			t.Errorf("example names credential %s, which the unit does not load (LoadCredential=%s:...)", m[1], m[1])
		}
	}
}
