package alerts

import (
	"errors"
	"os"
	"strings"
	"testing"
	"time"

	"go.yaml.in/yaml/v3"

	"plumbline/model/finding"
)

// alertsNode reads a service config file and returns its alerts: value.
func alertsNode(t testing.TB, path string) *yaml.Node {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var doc yaml.Node
	if err := yaml.Unmarshal(data, &doc); err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	root := doc.Content[0]
	for i := 0; i+1 < len(root.Content); i += 2 {
		if root.Content[i].Value == "alerts" {
			return root.Content[i+1]
		}
	}
	t.Fatalf("%s: no alerts key", path)
	return nil
}

func TestDecodeConfigService(t *testing.T) {
	cfg, err := DecodeConfig(alertsNode(t, "testdata/config/service.yaml"))
	if err != nil {
		t.Fatalf("DecodeConfig: %v", err)
	}
	if cfg.ClearAfter != 45*time.Minute || cfg.UpdateInterval != 10*time.Minute || cfg.MaxShelve != 12*time.Hour {
		t.Errorf("durations: got %s %s %s, want 45m 10m 12h", cfg.ClearAfter, cfg.UpdateInterval, cfg.MaxShelve)
	}
	if cfg.Cluster.Top != 3 || cfg.Cluster.DistanceM != 250 || cfg.HourlyCap != 8 {
		t.Errorf("cluster/cap: got %+v cap %d", cfg.Cluster, cfg.HourlyCap)
	}
	if len(cfg.Routes) != 3 || cfg.Routes[0].Levels[1].AckTimeout != 30*time.Minute || cfg.Routes[0].Repeat != 20*time.Minute {
		t.Errorf("routes: got %+v", cfg.Routes)
	}
	w := cfg.Channels.Webhook
	if w == nil || w.Attempts != 4 || w.Backoff != time.Second || w.Timeout != 5*time.Second || w.MaxBackoff != DefaultMaxBackoff {
		t.Errorf("webhook: got %+v", w)
	}
	if s := cfg.Channels.SMTP; s == nil || !s.StartTLS || s.Port != 587 || s.Attempts != DefaultAttempts {
		t.Errorf("smtp: got %+v", s)
	}
	if m := cfg.Channels.MQTT; m == nil || m.TopicPrefix != "town/alerts" || m.QoS != 1 {
		t.Errorf("mqtt: got %+v", m)
	}
	// Severity rules: a 6 L/s leak is urgent, 2 L/s high, 0.3 L/s low.
	for _, c := range []struct {
		f    finding.Finding
		want Severity
	}{
		{finding.Finding{Kind: finding.Leak, SizeLPS: 6}, Urgent},
		{finding.Finding{Kind: finding.Leak, SizeLPS: 2}, High},
		{finding.Finding{Kind: finding.Leak, SizeLPS: 0.3}, Low},
		{finding.Finding{Kind: finding.Blockage, OpenFrac: 0.2}, High},
		{finding.Finding{Kind: finding.Blockage, OpenFrac: 0.6}, Low},
		{finding.Finding{Kind: finding.SensorFault}, Low},
	} {
		if got := cfg.severityOf(c.f); got != c.want {
			t.Errorf("severity of %s %.1f L/s open %.1f: got %s, want %s", c.f.Kind, c.f.SizeLPS, c.f.OpenFrac, got, c.want)
		}
	}
	if r := cfg.routeFor("north", finding.SensorFault, Low); r == nil || r.Name != "instruments" {
		t.Errorf("sensor fault route: got %+v, want instruments", r)
	}
	if r := cfg.routeFor("north", finding.Leak, Urgent); r == nil || r.Name != "bursts" {
		t.Errorf("urgent leak route: got %+v, want bursts", r)
	}
	cfg.Resolve("/etc/plumbline")
	if cfg.APITokenFile != "/etc/plumbline/secrets/api.token" || cfg.Channels.SMTP.PasswordFile != "/etc/plumbline/secrets/smtp.pass" {
		t.Errorf("Resolve: got %s, %s", cfg.APITokenFile, cfg.Channels.SMTP.PasswordFile)
	}
}

// TestDecodeConfigBad runs the bad-input corpus: every problem of each
// file must be reported, with the line of the original document.
func TestDecodeConfigBad(t *testing.T) {
	type want struct {
		line int
		text string
	}
	cases := map[string][]want{
		"unknown_key.bad.yaml": {
			{3, "field clear_aftr not found"},
			{5, "field emial not found"},
		},
		"references.bad.yaml": {
			{3, "channels.smtp is not configured"},
			{4, `duplicate id "ana"`},
			{7, `unknown time zone "Mars/Olympus"`},
			{9, `day "funday"`},
			{9, `time "25:00" is not HH:MM`},
			{9, `unknown receiver "bob"`},
			{11, `kind "flood"`},
			{11, `severity "critical"`},
			{13, `unknown receiver or rota "nobody"`},
			{13, "needs a positive ack_timeout"},
			{15, `feed "pager"`},
		},
		"values.bad.yaml": {
			{2, "into time.Duration"},
			{3, "hourly_cap: must be at least 1"},
			{6, `severity "red"`},
			{8, "at least one level"},
			{10, `"ftp://x" is not an http(s) URL`},
			{10, "secret_file"},
			{10, "attempts: must be at least 1"},
			{11, `from "nobody"`},
			{11, "username set without password_file"},
			{11, "authentication needs starttls"},
			{12, "may not contain MQTT wildcards"},
			{12, "qos 3"},
			{13, "is not an absolute URL"},
		},
	}
	for file, wants := range cases {
		_, err := DecodeConfig(alertsNode(t, "testdata/config/"+file))
		var errs ConfigErrors
		if !errors.As(err, &errs) {
			t.Errorf("%s: got %v, want ConfigErrors", file, err)
			continue
		}
		for _, w := range wants {
			found := false
			for _, e := range errs {
				if e.Line == w.line && strings.Contains(e.Error(), w.text) {
					found = true
				}
			}
			if !found {
				t.Errorf("%s: no error at line %d containing %q; got:\n%v", file, w.line, w.text, err)
			}
		}
		if len(errs) != len(wants) {
			t.Errorf("%s: got %d errors, want %d:\n%v", file, len(errs), len(wants), err)
		}
	}
}

func TestDecodeConfigNotMapping(t *testing.T) {
	if _, err := ParseConfig([]byte("- a\n- b\n")); err == nil || !strings.Contains(err.Error(), "mapping") {
		t.Errorf("sequence: got %v, want a mapping error", err)
	}
	if _, err := DecodeConfig(nil); err == nil {
		t.Error("nil node: got nil error")
	}
	cfg, err := ParseConfig([]byte("{}"))
	if err != nil {
		t.Fatalf("empty mapping: %v", err)
	}
	if cfg.ClearAfter != DefaultClearAfter || cfg.HourlyCap != DefaultHourlyCap || len(cfg.Feeds) != 1 {
		t.Errorf("defaults: got %+v", cfg)
	}
}

// FuzzParseConfig: no input panics, and an accepted config decodes again
// to the same routes after re-marshalling.
func FuzzParseConfig(f *testing.F) {
	for _, p := range []string{"testdata/config/service.yaml", "testdata/config/values.bad.yaml", "testdata/config/references.bad.yaml"} {
		data, err := os.ReadFile(p)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(data)
	}
	f.Add([]byte("clear_after: 5m\nroutes: [{levels: [{notify: [a]}]}]\nreceivers: [{id: a}]\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		var doc yaml.Node
		if yaml.Unmarshal(data, &doc) != nil {
			return
		}
		cfg, err := DecodeConfig(&doc)
		if err != nil {
			return
		}
		for _, r := range cfg.Routes {
			if len(r.Levels) == 0 {
				t.Fatalf("accepted a route without levels: %+v", r)
			}
		}
	})
}
