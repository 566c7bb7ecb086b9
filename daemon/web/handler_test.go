package web

import (
	"bufio"
	"encoding/json"
	"io"
	"math"
	"net/http"
	"net/http/httptest"
	"regexp"
	"strings"
	"testing"

	"github.com/rs/zerolog"

	"plumbline/alerts"
	"plumbline/model/finding"
)

// ingestText is exposition text as the ingest client writes it (the
// families the service concatenates before the web layer's own).
const ingestText = `# HELP plumbline_readings_accepted_total Readings accepted.
# TYPE plumbline_readings_accepted_total counter
plumbline_readings_accepted_total 1204
# TYPE plumbline_readings_rejected_total counter
plumbline_readings_rejected_total{reason="unknown-topic"} 3
plumbline_readings_rejected_total{reason="out-of-range"} 1
# TYPE plumbline_ingest_lag_seconds gauge
plumbline_ingest_lag_seconds 0.42
# TYPE plumbline_spool_points gauge
plumbline_spool_points 0
# TYPE plumbline_step_seconds gauge
plumbline_step_seconds 0.031
`

func newTestServer(t *testing.T) (*httptest.Server, *demoProvider, *demo) {
	t.Helper()
	d := loadDemo(t)
	api := d.openAlerts(t, "tok-web")
	p := &demoProvider{d: d, ready: true, metrics: ingestText}
	srv := httptest.NewServer(NewHandler(d.cfg.Network, p, api, zerolog.Nop()))
	t.Cleanup(srv.Close)
	return srv, p, d
}

func get(t *testing.T, url string) (*http.Response, []byte) {
	t.Helper()
	resp, err := http.Get(url)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	body, err := io.ReadAll(resp.Body)
	if err != nil {
		t.Fatal(err)
	}
	return resp, body
}

func decode(t *testing.T, path string, body []byte, v any) {
	t.Helper()
	if err := json.Unmarshal(body, v); err != nil {
		t.Fatalf("%s: not JSON (%v): %.300s", path, err, body)
	}
}

func TestProbes(t *testing.T) {
	srv, p, _ := newTestServer(t)
	resp, body := get(t, srv.URL+"/healthz")
	var h map[string]string
	decode(t, "/healthz", body, &h)
	if resp.StatusCode != 200 || h["status"] != "live" {
		t.Errorf("/healthz: got %d %v, want 200 status live", resp.StatusCode, h)
	}
	resp, body = get(t, srv.URL+"/readyz")
	var r struct {
		Ready   bool     `json:"ready"`
		Reasons []string `json:"reasons"`
	}
	decode(t, "/readyz", body, &r)
	if resp.StatusCode != 200 || !r.Ready || r.Reasons == nil || len(r.Reasons) != 0 {
		t.Errorf("/readyz ready: got %d %s, want 200 ready with reasons []", resp.StatusCode, body)
	}
	p.mu.Lock()
	p.ready, p.reasons = false, []string{"MQTT broker not connected", "store not writable: disk full"}
	p.mu.Unlock()
	resp, body = get(t, srv.URL+"/readyz")
	r.Reasons = nil
	decode(t, "/readyz", body, &r)
	if resp.StatusCode != http.StatusServiceUnavailable || r.Ready || strings.Join(r.Reasons, "|") != "MQTT broker not connected|store not writable: disk full" {
		t.Errorf("/readyz not ready: got %d %s, want 503 with both reasons", resp.StatusCode, body)
	}
	p.mu.Lock()
	p.reasons = nil
	p.mu.Unlock()
	resp, body = get(t, srv.URL+"/readyz")
	decode(t, "/readyz", body, &r)
	if resp.StatusCode != 503 || len(r.Reasons) != 1 {
		t.Errorf("/readyz not ready without reasons: got %d %s, want 503 and one reason", resp.StatusCode, body)
	}
}

func TestViewJSON(t *testing.T) {
	srv, _, d := newTestServer(t)
	resp, body := get(t, srv.URL+"/api/view")
	if ct := resp.Header.Get("Content-Type"); resp.StatusCode != 200 || ct != "application/json" {
		t.Fatalf("/api/view: got %d %q", resp.StatusCode, ct)
	}
	var v map[string]any
	decode(t, "/api/view", body, &v)
	for _, k := range []string{"updated", "step", "zones", "sensors", "findings", "alerts"} {
		if _, ok := v[k]; !ok {
			t.Errorf("/api/view: no key %q in %v", k, keys(v))
		}
	}
	zones := v["zones"].([]any)
	if len(zones) != len(d.cfg.Zones) {
		t.Errorf("zones: got %d, want %d", len(zones), len(d.cfg.Zones))
	}
	z0 := zones[0].(map[string]any)
	for _, k := range []string{"id", "inflow_lps", "expected_lps", "imbalance_lps", "nights"} {
		if _, ok := z0[k]; !ok {
			t.Errorf("zone: no key %q in %v", k, keys(z0))
		}
	}
	n0 := z0["nights"].([]any)[0].(map[string]any)
	for _, k := range []string{"night", "min_lps", "allow_lps", "excess_lps"} {
		if _, ok := n0[k]; !ok {
			t.Errorf("night: no key %q in %v", k, keys(n0))
		}
	}
	sensors := v["sensors"].([]any)
	if len(sensors) != len(d.cfg.Sensors) {
		t.Errorf("sensors: got %d, want %d", len(sensors), len(d.cfg.Sensors))
	}
	// The missing sensor (index 5): NaN value and residual are null, the
	// expected value a number.
	s5 := sensors[5].(map[string]any)
	if s5["quality"] != "missing" || s5["value"] != nil || s5["residual"] != nil {
		t.Errorf("missing sensor: got %v, want quality missing, value and residual null", s5)
	}
	if x, ok := s5["expected"].(float64); !ok || math.Abs(x-d.view.Sensors[5].Expected) > 1e-9 {
		t.Errorf("missing sensor expected: got %v, want %v", s5["expected"], d.view.Sensors[5].Expected)
	}
	for _, k := range []string{"id", "quantity", "at", "zone", "unit", "quality", "value", "expected", "residual"} {
		if _, ok := s5[k]; !ok {
			t.Errorf("sensor: no key %q", k)
		}
	}
	findings := v["findings"].([]any)
	f0 := findings[0].(map[string]any)
	c0 := f0["candidates"].([]any)[0].(map[string]any)
	if len(findings) != 2 || f0["kind"] != "leak" || c0["id"] != d.leak || findings[1].(map[string]any)["kind"] != "blockage" {
		t.Errorf("findings: got %v, want a leak with best candidate %s and a blockage", findings, d.leak)
	}
	al := v["alerts"].([]any)
	if len(al) != 2 || al[0].(map[string]any)["state"] != "unacknowledged" || al[1].(map[string]any)["state"] != "unacknowledged" {
		t.Errorf("alerts: got %v, want two unacknowledged", al)
	}

	// The parts, each a list equal to the view's.
	for _, part := range []string{"zones", "sensors", "findings"} {
		_, body := get(t, srv.URL+"/api/"+part)
		var list []any
		decode(t, "/api/"+part, body, &list)
		if len(list) != len(v[part].([]any)) {
			t.Errorf("/api/%s: %d entries, the view has %d", part, len(list), len(v[part].([]any)))
		}
	}
}

func TestNaNAndEmpty(t *testing.T) {
	nan := math.NaN()
	p := &demoProvider{d: &demo{view: View{
		Zones:    []ZoneView{{ID: "z", InflowLPS: nan, ExpectedLPS: 1, ImbalanceLPS: math.Inf(1), Nights: []NightView{{MinLPS: nan, AllowLPS: 1, ExcessLPS: nan}}}},
		Sensors:  []SensorView{{ID: "s", Value: nan, Expected: math.Inf(-1), Residual: nan}},
		Findings: []finding.Finding{{Kind: finding.Leak, SizeLPS: nan, Candidates: []finding.Candidate{{ID: "J", Score: nan}}}},
		Alerts:   []alerts.Alert{{ID: "AL-1", SizeLPS: nan, MaxSizeLPS: math.Inf(1)}},
	}}}
	srv := httptest.NewServer(NewHandler(nil, p, nil, zerolog.Nop()))
	defer srv.Close()
	resp, body := get(t, srv.URL+"/api/view")
	if resp.StatusCode != 200 {
		t.Fatalf("/api/view with NaN: got %d %s, want 200", resp.StatusCode, body)
	}
	want := `"zones":[{"id":"z","inflow_lps":null,"expected_lps":1,"imbalance_lps":null,"nights":[{"night":"0001-01-01T00:00:00Z","min_lps":null,"allow_lps":1,"excess_lps":null}]}],` +
		`"sensors":[{"id":"s","quantity":"","at":"","zone":"","unit":"","quality":"","value":null,"expected":null,"residual":null}]`
	if !strings.Contains(string(body), want) {
		t.Errorf("/api/view:\n got %s\nwant it to contain %s", body, want)
	}
	if strings.Contains(string(body), "size_lps") || !strings.Contains(string(body), `"score":0`) {
		t.Errorf("/api/view: non-finite sizes should be omitted and scores 0: %s", body)
	}
	if !strings.HasPrefix(string(body), `{"zones":`) {
		t.Errorf("/api/view: zero updated time should be omitted: %s", body)
	}

	// An empty view has empty lists, never null.
	p.d.view = View{}
	_, body = get(t, srv.URL+"/api/view")
	if got := string(body); got != `{"zones":[],"sensors":[],"findings":[],"alerts":[]}` {
		t.Errorf("empty view: got %s", got)
	}
	for _, part := range []string{"zones", "sensors", "findings"} {
		if _, body := get(t, srv.URL+"/api/"+part); string(body) != "[]" {
			t.Errorf("/api/%s of an empty view: got %s, want []", part, body)
		}
	}
	// Without a network the map is empty but well-formed; without an alerts
	// API the actions answer 503.
	_, body = get(t, srv.URL+"/api/network")
	var md MapData
	decode(t, "/api/network", body, &md)
	if md.Nodes == nil || md.Links == nil || len(md.Nodes) != 0 {
		t.Errorf("/api/network without a network: got %s", body)
	}
	if resp, _ := get(t, srv.URL+"/api/alerts/"); resp.StatusCode != http.StatusServiceUnavailable {
		t.Errorf("/api/alerts/ without an API: got %d, want 503", resp.StatusCode)
	}
}

func TestNetworkJSON(t *testing.T) {
	srv, _, d := newTestServer(t)
	_, body := get(t, srv.URL+"/api/network")
	var md MapData
	decode(t, "/api/network", body, &md)
	net := d.cfg.Network
	if len(md.Nodes) != len(net.Nodes) || len(md.Links) != len(net.Links) {
		t.Fatalf("/api/network: %d nodes %d links, want %d and %d", len(md.Nodes), len(md.Links), len(net.Nodes), len(net.Links))
	}
	for i, n := range md.Nodes {
		nd := net.Nodes[i]
		if n.ID != nd.ID || n.Kind != nd.Kind.String() || n.Zone != nd.Zone || n.Lon == nil || *n.Lon != nd.Coord.Lon || *n.Lat != nd.Coord.Lat {
			t.Fatalf("node %d: got %+v, want %s %s zone %s at %v", i, n, nd.ID, nd.Kind, nd.Zone, nd.Coord)
		}
		if *n.X < md.Bounds.MinX || *n.X > md.Bounds.MaxX || *n.Y < md.Bounds.MinY || *n.Y > md.Bounds.MaxY {
			t.Fatalf("node %s at (%v, %v) outside the bounds %+v", n.ID, *n.X, *n.Y, md.Bounds)
		}
	}
	for i, l := range md.Links {
		nl := net.Links[i]
		if l.ID != nl.ID || l.From != net.Nodes[nl.From].ID || l.To != net.Nodes[nl.To].ID || len(l.XY) < 2 || len(l.XY) != len(l.LonLat) {
			t.Fatalf("link %d: got %+v, want %s from %s to %s with a polyline", i, l, nl.ID, net.Nodes[nl.From].ID, net.Nodes[nl.To].ID)
		}
	}
	if len(md.Zones) != len(net.Zones()) {
		t.Errorf("zones: got %d, want %d", len(md.Zones), len(net.Zones()))
	}
}

func TestMetrics(t *testing.T) {
	srv, p, _ := newTestServer(t)
	get(t, srv.URL+"/api/view")
	get(t, srv.URL+"/nowhere")
	resp, body := get(t, srv.URL+"/metrics")
	if ct := resp.Header.Get("Content-Type"); resp.StatusCode != 200 || !strings.HasPrefix(ct, "text/plain; version=0.0.4") {
		t.Fatalf("/metrics: got %d %q", resp.StatusCode, ct)
	}
	text := string(body)
	checkExposition(t, text)
	// The contract's names (shared/CONTRACT.md "Service HTTP").
	for _, name := range []string{"plumbline_readings_accepted_total", "plumbline_readings_rejected_total{reason=", "plumbline_ingest_lag_seconds",
		"plumbline_spool_points", "plumbline_step_seconds", "plumbline_findings_total{kind=", "plumbline_alerts{state="} {
		if !strings.Contains(text, "\n"+name) {
			t.Errorf("/metrics: no %s", name)
		}
	}
	// Computed from the view: one leak and one blockage finding, two
	// unacknowledged alerts;
	// the request counter saw the view and the unmatched path.
	for _, line := range []string{`plumbline_findings_total{kind="leak"} 1`, `plumbline_findings_total{kind="blockage"} 1`,
		`plumbline_findings_total{kind="sensor-fault"} 0`, `plumbline_alerts{state="unacknowledged"} 2`, `plumbline_alerts{state="acknowledged"} 0`,
		`plumbline_http_requests_total{route="GET /api/view",code="200"} 1`, `plumbline_http_requests_total{route="unmatched",code="404"} 1`} {
		if !strings.Contains(text, "\n"+line+"\n") {
			t.Errorf("/metrics: no line %q in\n%s", line, text)
		}
	}
	// The same finding in later views is not counted again.
	get(t, srv.URL+"/api/view")
	_, body = get(t, srv.URL+"/metrics")
	if !strings.Contains(string(body), "\n"+`plumbline_findings_total{kind="leak"} 1`+"\n") {
		t.Errorf("/metrics: the leak finding was counted again:\n%s", body)
	}

	// A provider that writes the families itself: the handler adds none.
	p.mu.Lock()
	p.metrics = ingestText + "# TYPE plumbline_findings_total counter\nplumbline_findings_total{kind=\"leak\"} 7\n# TYPE plumbline_alerts gauge\nplumbline_alerts{state=\"shelved\"} 2"
	p.mu.Unlock()
	_, body = get(t, srv.URL+"/metrics")
	checkExposition(t, string(body))
	if strings.Count(string(body), "# TYPE plumbline_findings_total") != 1 || strings.Count(string(body), "# TYPE plumbline_alerts ") != 1 ||
		!strings.Contains(string(body), `plumbline_findings_total{kind="leak"} 7`) {
		t.Errorf("/metrics with provider's families:\n%s", body)
	}
}

var (
	sampleLine = regexp.MustCompile(`^([a-zA-Z_:][a-zA-Z0-9_:]*)(\{[a-zA-Z_][a-zA-Z0-9_]*="(?:[^"\\\n]|\\.)*"(?:,[a-zA-Z_][a-zA-Z0-9_]*="(?:[^"\\\n]|\\.)*")*\})? (-?[0-9.eE+-]+|NaN|\+Inf|-Inf)$`)
	typeLine   = regexp.MustCompile(`^# TYPE ([a-zA-Z_:][a-zA-Z0-9_:]*) (counter|gauge|histogram|summary|untyped)$`)
)

// checkExposition checks the text against the Prometheus text format
// 0.0.4 (prometheus.io, "Exposition formats"): every line a comment or a
// sample; each family typed at most once, before its samples, and its
// samples together.
func checkExposition(t *testing.T, text string) {
	t.Helper()
	typed := map[string]bool{}
	done := map[string]bool{}
	current := ""
	sc := bufio.NewScanner(strings.NewReader(text))
	for n := 1; sc.Scan(); n++ {
		line := sc.Text()
		if m := typeLine.FindStringSubmatch(line); m != nil {
			if typed[m[1]] {
				t.Errorf("metrics line %d: family %s typed twice", n, m[1])
			}
			typed[m[1]] = true
			continue
		}
		if strings.HasPrefix(line, "# HELP ") || line == "" {
			continue
		}
		m := sampleLine.FindStringSubmatch(line)
		if m == nil {
			t.Errorf("metrics line %d: not a sample: %q", n, line)
			continue
		}
		if m[1] != current {
			if done[m[1]] {
				t.Errorf("metrics line %d: samples of %s not together", n, m[1])
			}
			done[current] = true
			current = m[1]
		}
	}
}

func TestRoutesAndHeaders(t *testing.T) {
	srv, _, _ := newTestServer(t)
	resp, body := get(t, srv.URL+"/")
	if resp.StatusCode != 200 || !strings.HasPrefix(resp.Header.Get("Content-Type"), "text/html") {
		t.Fatalf("/: got %d %q", resp.StatusCode, resp.Header.Get("Content-Type"))
	}
	if csp := resp.Header.Get("Content-Security-Policy"); !strings.Contains(csp, "default-src 'none'") || !strings.Contains(csp, "script-src 'self'") {
		t.Errorf("/: Content-Security-Policy %q", csp)
	}
	page := string(body)
	// No outside resources and no secret in the page.
	if strings.Contains(page, "http://") && !strings.Contains(page, `xmlns="http://www.w3.org/2000/svg"`) || strings.Contains(page, "https://") || strings.Contains(page, "tok-web") {
		t.Errorf("/: page refers outside or carries the token:\n%s", page)
	}
	if !strings.Contains(page, "hypotheses for field confirmation") || !strings.Contains(page, "local codes") {
		t.Errorf("/: no cautions line")
	}
	for _, f := range []string{"/static/app.js", "/static/style.css", "/static/icon.svg"} {
		resp, body := get(t, srv.URL+f)
		if resp.StatusCode != 200 || len(body) == 0 {
			t.Errorf("%s: got %d, %d bytes", f, resp.StatusCode, len(body))
		}
		if strings.Contains(string(body), "https://") {
			t.Errorf("%s refers to an outside address", f)
		}
	}
	cases := []struct {
		method, path string
		code         int
	}{
		{"GET", "/nowhere", 404},
		{"GET", "/api/nowhere", 404},
		{"POST", "/api/view", 405},
		{"DELETE", "/healthz", 405},
		{"POST", "/metrics", 405},
		{"HEAD", "/api/view", 200},
		{"GET", "/api/alerts/", 401}, // the alerts API without its token
	}
	for _, c := range cases {
		req, _ := http.NewRequest(c.method, srv.URL+c.path, nil)
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		if resp.StatusCode != c.code {
			t.Errorf("%s %s: got %d, want %d", c.method, c.path, resp.StatusCode, c.code)
		}
	}
}

func TestAlertsDelegated(t *testing.T) {
	srv, _, d := newTestServer(t)
	do := func(method, path, token, body string) (int, map[string]any) {
		t.Helper()
		req, _ := http.NewRequest(method, srv.URL+path, strings.NewReader(body))
		req.Header.Set("Authorization", "Bearer "+token)
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		defer resp.Body.Close()
		data, _ := io.ReadAll(resp.Body)
		var v map[string]any
		decode(t, path, data, &v)
		return resp.StatusCode, v
	}
	code, v := do("GET", "/api/alerts/", "tok-web", "")
	list, _ := v["alerts"].([]any)
	if code != 200 || len(list) != 2 {
		t.Fatalf("GET /api/alerts/: got %d %v, want 200 and two alerts", code, v)
	}
	id := list[0].(map[string]any)["id"].(string)
	if code, _ := do("POST", "/api/alerts/"+id+"/ack", "wrong", `{"by":"ana"}`); code != 401 {
		t.Errorf("ack with a wrong token: got %d, want 401", code)
	}
	code, v = do("POST", "/api/alerts/"+id+"/ack", "tok-web", `{"by":"ana","comment":"crew out"}`)
	if code != 200 {
		t.Fatalf("ack: got %d %v", code, v)
	}
	// The view shows the new state.
	_, body := get(t, srv.URL+"/api/view")
	var view struct {
		Alerts []alerts.Alert `json:"alerts"`
	}
	decode(t, "/api/view", body, &view)
	states := map[string]alerts.State{}
	for _, a := range view.Alerts {
		states[a.ID] = a.State
		if a.ID == id && a.AckedBy != "ana" {
			t.Errorf("view after ack: %s acked by %q, want ana", id, a.AckedBy)
		}
	}
	if len(view.Alerts) != 2 || states[id] != alerts.Acknowledged {
		t.Errorf("view after ack: got %v, want %s acknowledged among 2", states, id)
	}
	if n := len(d.view.Findings); n != 2 {
		t.Errorf("demo findings: %d, want 2", n)
	}
}

func TestHasFamily(t *testing.T) {
	cases := []struct {
		text, name string
		want       bool
	}{
		{"plumbline_alerts{state=\"x\"} 1\n", "plumbline_alerts", true},
		{"# TYPE plumbline_alerts gauge\n", "plumbline_alerts", true},
		{"plumbline_alerts_dropped_total 1\n", "plumbline_alerts", false},
		{"# HELP plumbline_alerts something\n", "plumbline_alerts", false},
		{"plumbline_alerts 3", "plumbline_alerts", true},
		{"", "plumbline_alerts", false},
	}
	for _, c := range cases {
		if got := hasFamily(c.text, c.name); got != c.want {
			t.Errorf("hasFamily(%q, %q) = %v, want %v", c.text, c.name, got, c.want)
		}
	}
}

func keys(m map[string]any) []string {
	var out []string
	for k := range m {
		out = append(out, k)
	}
	return out
}
