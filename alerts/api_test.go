package alerts

import (
	"context"
	"encoding/json"
	"io"
	"net/http"
	"net/http/httptest"
	"strings"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"plumbline/model/finding"
)

func TestAPI(t *testing.T) {
	cfg, err := ParseConfig([]byte(`
receivers: [{id: ana}]
routes: [{levels: [{notify: [ana]}]}]
max_shelve: 8h
`))
	if err != nil {
		t.Fatal(err)
	}
	clock := &testClock{t: time.Date(2026, 3, 2, 4, 0, 0, 0, time.UTC)}
	m, err := Open(Options{Config: cfg, DataDir: t.TempDir(), Logger: zerolog.Nop(), Now: clock.Now, TickInterval: -1})
	if err != nil {
		t.Fatal(err)
	}
	defer m.Close()
	ctx := context.Background()
	for _, node := range []string{"J-1", "J-50"} {
		if _, err := m.Observe(ctx, finding.Finding{Kind: finding.Leak, Zone: "north", SizeLPS: 2, Candidates: []finding.Candidate{{ID: node, Score: 0.8}}}); err != nil {
			t.Fatal(err)
		}
	}
	if _, err := NewAPI(m, nil); err == nil {
		t.Error("NewAPI with an empty token: got nil error")
	}
	api, err := NewAPI(m, []byte("tok-123"))
	if err != nil {
		t.Fatal(err)
	}
	// Mounted as the daemon will mount it.
	mux := http.NewServeMux()
	mux.Handle("/api/alerts/", http.StripPrefix("/api/alerts", api))
	srv := httptest.NewServer(mux)
	defer srv.Close()

	do := func(method, path, token, body string) (int, map[string]any) {
		t.Helper()
		req, _ := http.NewRequest(method, srv.URL+path, strings.NewReader(body))
		if token != "" {
			req.Header.Set("Authorization", "Bearer "+token)
		}
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		defer resp.Body.Close()
		data, _ := io.ReadAll(resp.Body)
		var v map[string]any
		if err := json.Unmarshal(data, &v); err != nil {
			t.Fatalf("%s %s: body not JSON: %q", method, path, data)
		}
		if ct := resp.Header.Get("Content-Type"); ct != "application/json" {
			t.Errorf("%s %s: content type %q", method, path, ct)
		}
		return resp.StatusCode, v
	}
	state := func(v map[string]any) string {
		a, _ := v["alert"].(map[string]any)
		s, _ := a["state"].(string)
		return s
	}

	for _, tok := range []string{"", "tok-12", "tok-1234", "TOK-123"} {
		if code, _ := do("GET", "/api/alerts/", tok, ""); code != http.StatusUnauthorized {
			t.Errorf("token %q: got %d, want 401", tok, code)
		}
	}
	code, v := do("GET", "/api/alerts/", "tok-123", "")
	if list, _ := v["alerts"].([]any); code != 200 || len(list) != 2 {
		t.Fatalf("list: got %d %v, want 200 and 2 alerts", code, v)
	}
	clock.Set(clock.Now().Add(3 * time.Minute))
	cases := []struct {
		method, path, body string
		code               int
		state              string
	}{
		{"POST", "/api/alerts/AL-000001/ack", `{"by": "ana", "comment": "crew sent"}`, 200, "acknowledged"},
		{"POST", "/api/alerts/AL-000001/ack", `{"by": "ana"}`, 409, ""},
		{"POST", "/api/alerts/AL-000001/ack", `{"comment": "who?"}`, 400, ""},
		{"POST", "/api/alerts/AL-000001/ack", `{"by": "ana", "extra": 1}`, 400, ""},
		{"POST", "/api/alerts/AL-000001/ack", `not json`, 400, ""},
		{"POST", "/api/alerts/AL-000404/ack", `{"by": "ana"}`, 404, ""},
		{"POST", "/api/alerts/AL-000002/shelve", `{"by": "ana", "duration": "forever"}`, 400, ""},
		{"POST", "/api/alerts/AL-000002/shelve", `{"by": "ana", "duration": "9h"}`, 400, ""},
		{"POST", "/api/alerts/AL-000002/shelve", `{"by": "ana", "duration": "2h", "reason": "works"}`, 200, "shelved"},
		{"POST", "/api/alerts/AL-000002/clear", `{"by": "ben"}`, 400, ""},
		{"POST", "/api/alerts/AL-000002/clear", `{"by": "ben", "reason": "repaired"}`, 200, "cleared"},
		{"POST", "/api/alerts/AL-000002/clear", `{"by": "ben", "reason": "again"}`, 409, ""},
		{"DELETE", "/api/alerts/AL-000001", ``, 404, ""},
		{"POST", "/api/alerts/AL-000001/silence", `{"by": "ana"}`, 404, ""},
	}
	for _, c := range cases {
		code, v := do(c.method, c.path, "tok-123", c.body)
		if code != c.code {
			t.Errorf("%s %s %s: got %d %v, want %d", c.method, c.path, c.body, code, v, c.code)
			continue
		}
		if c.state != "" && state(v) != c.state {
			t.Errorf("%s %s: state %q, want %q", c.method, c.path, state(v), c.state)
		}
		if code >= 400 && v["error"] == nil {
			t.Errorf("%s %s: error answer without an error field: %v", c.method, c.path, v)
		}
	}
	// The audit trail records every change with time and actor.
	code, v = do("GET", "/api/alerts/AL-000002", "tok-123", "")
	if code != 200 || state(v) != "cleared" {
		t.Fatalf("get AL-000002: %d %v", code, v)
	}
	audit, _ := v["audit"].([]any)
	var got []string
	for _, r := range audit {
		r := r.(map[string]any)
		str := func(k string) string { s, _ := r[k].(string); return s }
		got = append(got, str("actor")+" "+str("event")+" "+str("to")+" "+str("time")+" "+str("comment"))
	}
	want := []string{
		"plumbline evidence unacknowledged 2026-03-02T04:00:00Z ",
		"ana shelve shelved 2026-03-02T04:03:00Z works",
		"ben clear cleared 2026-03-02T04:03:00Z repaired",
	}
	if strings.Join(got, "\n") != strings.Join(want, "\n") {
		t.Errorf("audit of AL-000002:\n got %q\nwant %q", got, want)
	}
	code, v = do("GET", "/api/alerts/?all=1", "tok-123", "")
	if list, _ := v["alerts"].([]any); code != 200 || len(list) != 2 {
		t.Errorf("list all: got %d, %d alerts, want 2", code, len(list))
	}
	code, v = do("GET", "/api/alerts/", "tok-123", "")
	if list, _ := v["alerts"].([]any); code != 200 || len(list) != 1 {
		t.Errorf("list open: got %d, %d alerts, want 1 (AL-000001 acknowledged)", code, len(list))
	}
	if code, _ := do("GET", "/api/alerts/AL-000404", "tok-123", ""); code != 404 {
		t.Errorf("get unknown: got %d, want 404", code)
	}
}
