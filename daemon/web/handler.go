package web

import (
	"bytes"
	"embed"
	"encoding/json"
	"fmt"
	"io/fs"
	"net/http"
	"slices"
	"sort"
	"strings"
	"sync"

	"github.com/rs/zerolog"

	"plumbline/alerts"
	"plumbline/model/finding"
	"plumbline/model/network"
)

//go:embed static
var staticFiles embed.FS

// contentSecurity keeps the page to its own origin: no inline script, no
// outside fonts, images or connections.
const contentSecurity = "default-src 'none'; script-src 'self'; style-src 'self'; img-src 'self' data:; connect-src 'self'; base-uri 'none'; form-action 'none'; frame-ancestors 'none'"

// handler serves the routes listed in the package documentation.
type handler struct {
	p       Provider
	alerts  http.Handler
	log     zerolog.Logger
	mux     *http.ServeMux
	mapJSON []byte

	mu       sync.Mutex
	requests map[reqKey]uint64
	// seen holds the keys of the findings in the last view; found counts
	// every finding first seen, by kind (plumbline_findings_total when
	// the provider does not write it).
	seen  map[string]bool
	found map[finding.Kind]uint64
}

// getRoutes are the read-only API paths, for the 405 answer.
var getRoutes = map[string]bool{"/api/view": true, "/api/zones": true, "/api/sensors": true, "/api/findings": true, "/api/network": true}

type reqKey struct {
	route string
	code  int
}

// NewHandler returns the service's HTTP surface: the operator page, the
// health and readiness probes, the metrics and the JSON API over p, with
// the alerts API (alerts.NewAPI) mounted under /api/alerts/. The map data
// is computed from net once, here. alertsAPI may be nil: the alert
// actions then answer 503. log receives request errors (a sub-logger
// "component=web" is made).
func NewHandler(net *network.Network, p Provider, alertsAPI http.Handler, log zerolog.Logger) http.Handler {
	h := &handler{
		p:        p,
		alerts:   alertsAPI,
		log:      log.With().Str("component", "web").Logger(),
		mux:      http.NewServeMux(),
		requests: map[reqKey]uint64{},
		seen:     map[string]bool{},
		found:    map[finding.Kind]uint64{},
	}
	md, err := json.Marshal(BuildMap(net))
	if err != nil { // only non-finite coordinates could do this
		h.log.Error().Err(err).Msg("map data not encodable")
		md, _ = json.Marshal(MapData{Nodes: []MapNode{}, Links: []MapLink{}, Zones: []MapZone{}})
	}
	h.mapJSON = md

	sub, err := fs.Sub(staticFiles, "static")
	if err != nil {
		panic(err) // the embedded tree is part of the binary
	}
	index, err := fs.ReadFile(sub, "index.html")
	if err != nil {
		panic(err)
	}
	h.mux.HandleFunc("GET /{$}", func(w http.ResponseWriter, r *http.Request) {
		page(w)
		w.Header().Set("Content-Type", "text/html; charset=utf-8")
		w.Write(index)
	})
	static := http.StripPrefix("/static/", http.FileServerFS(sub))
	h.mux.HandleFunc("GET /static/", func(w http.ResponseWriter, r *http.Request) {
		page(w)
		static.ServeHTTP(w, r)
	})
	h.mux.HandleFunc("GET /healthz", func(w http.ResponseWriter, r *http.Request) {
		writeJSON(w, http.StatusOK, map[string]string{"status": "live"})
	})
	h.mux.HandleFunc("GET /readyz", h.readyz)
	h.mux.HandleFunc("GET /metrics", h.metrics)
	h.mux.HandleFunc("GET /api/view", func(w http.ResponseWriter, r *http.Request) {
		h.answer(w, h.view())
	})
	h.mux.HandleFunc("GET /api/zones", func(w http.ResponseWriter, r *http.Request) {
		h.answer(w, h.view().Zones)
	})
	h.mux.HandleFunc("GET /api/sensors", func(w http.ResponseWriter, r *http.Request) {
		h.answer(w, h.view().Sensors)
	})
	h.mux.HandleFunc("GET /api/findings", func(w http.ResponseWriter, r *http.Request) {
		h.answer(w, h.view().Findings)
	})
	h.mux.HandleFunc("GET /api/network", func(w http.ResponseWriter, r *http.Request) {
		w.Header().Set("Cache-Control", "no-cache")
		w.Header().Set("Content-Type", "application/json")
		w.Write(h.mapJSON)
	})
	h.mux.Handle("/api/alerts/", http.StripPrefix("/api/alerts", http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		if h.alerts == nil {
			writeJSON(w, http.StatusServiceUnavailable, map[string]string{"error": "alerts are not configured"})
			return
		}
		w.Header().Set("Cache-Control", "no-store")
		h.alerts.ServeHTTP(w, r)
	})))
	h.mux.HandleFunc("/api/", func(w http.ResponseWriter, r *http.Request) {
		if getRoutes[r.URL.Path] {
			w.Header().Set("Allow", "GET, HEAD")
			writeJSON(w, http.StatusMethodNotAllowed, map[string]string{"error": "method not allowed: " + r.Method + " " + r.URL.Path})
			return
		}
		writeJSON(w, http.StatusNotFound, map[string]string{"error": "no such endpoint: " + r.Method + " " + r.URL.Path})
	})
	return h
}

// ServeHTTP serves one request and counts it by route and status.
func (h *handler) ServeHTTP(w http.ResponseWriter, r *http.Request) {
	w.Header().Set("X-Content-Type-Options", "nosniff")
	w.Header().Set("Referrer-Policy", "no-referrer")
	sw := &statusWriter{ResponseWriter: w, code: http.StatusOK}
	h.mux.ServeHTTP(sw, r)
	route := r.Pattern
	if route == "" {
		route = "unmatched"
	}
	h.mu.Lock()
	h.requests[reqKey{route, sw.code}]++
	h.mu.Unlock()
	if sw.code >= 500 {
		h.log.Warn().Str("method", r.Method).Str("path", r.URL.Path).Int("code", sw.code).Msg("request failed")
	}
}

// page sets the headers of the page and its files.
func page(w http.ResponseWriter) {
	w.Header().Set("Content-Security-Policy", contentSecurity)
	w.Header().Set("X-Frame-Options", "DENY")
	w.Header().Set("Cache-Control", "no-cache")
}

type statusWriter struct {
	http.ResponseWriter
	code  int
	wrote bool
}

func (s *statusWriter) WriteHeader(code int) {
	if !s.wrote {
		s.code, s.wrote = code, true
	}
	s.ResponseWriter.WriteHeader(code)
}

func (s *statusWriter) Write(b []byte) (int, error) {
	s.wrote = true
	return s.ResponseWriter.Write(b)
}

// view returns the provider's view, normalised, and counts new findings.
func (h *handler) view() View {
	v := h.p.View().normal()
	keys := make(map[string]bool, len(v.Findings))
	h.mu.Lock()
	for _, f := range v.Findings {
		k := findingKey(f)
		if !h.seen[k] && !keys[k] {
			h.found[f.Kind]++
		}
		keys[k] = true
	}
	h.seen = keys
	h.mu.Unlock()
	return v
}

// findingKey identifies a finding across views: kind, zone, onset, raised
// and best candidate.
func findingKey(f finding.Finding) string {
	best := ""
	if len(f.Candidates) > 0 {
		best = f.Candidates[0].ID
	}
	return string(f.Kind) + "|" + f.Zone + "|" + f.Onset.UTC().Format("2006-01-02T15:04:05.999999999Z") + "|" + f.Raised.UTC().Format("2006-01-02T15:04:05.999999999Z") + "|" + best
}

// answer writes v as JSON, or a 500 when it cannot be encoded.
func (h *handler) answer(w http.ResponseWriter, v any) {
	w.Header().Set("Cache-Control", "no-store")
	data, err := json.Marshal(v)
	if err != nil {
		h.log.Error().Err(err).Msg("view not encodable")
		writeJSON(w, http.StatusInternalServerError, map[string]string{"error": "view not encodable: " + err.Error()})
		return
	}
	w.Header().Set("Content-Type", "application/json")
	w.Write(data)
}

func writeJSON(w http.ResponseWriter, code int, v any) {
	w.Header().Set("Content-Type", "application/json")
	w.Header().Set("Cache-Control", "no-store")
	w.WriteHeader(code)
	json.NewEncoder(w).Encode(v)
}

func (h *handler) readyz(w http.ResponseWriter, r *http.Request) {
	ok, reasons := h.p.Ready()
	if reasons == nil {
		reasons = []string{}
	}
	if !ok {
		if len(reasons) == 0 {
			reasons = []string{"not ready"}
		}
		writeJSON(w, http.StatusServiceUnavailable, map[string]any{"ready": false, "reasons": reasons})
		return
	}
	writeJSON(w, http.StatusOK, map[string]any{"ready": true, "reasons": reasons})
}

// metrics writes the provider's families, then the findings and alerts
// families if the provider did not, then the request counter.
func (h *handler) metrics(w http.ResponseWriter, r *http.Request) {
	var buf bytes.Buffer
	if err := h.p.WriteMetrics(&buf); err != nil {
		h.log.Error().Err(err).Msg("metrics not written")
		http.Error(w, "metrics: "+err.Error(), http.StatusInternalServerError)
		return
	}
	if buf.Len() > 0 && !bytes.HasSuffix(buf.Bytes(), []byte("\n")) {
		buf.WriteByte('\n')
	}
	text := buf.String()
	needFindings, needAlerts := !hasFamily(text, "plumbline_findings_total"), !hasFamily(text, "plumbline_alerts")
	if needFindings || needAlerts {
		v := h.view()
		if needFindings {
			buf.WriteString("# HELP plumbline_findings_total Findings first seen by the web layer, by kind.\n# TYPE plumbline_findings_total counter\n")
			h.mu.Lock()
			for _, k := range kinds(h.found) {
				fmt.Fprintf(&buf, "plumbline_findings_total{kind=\"%s\"} %d\n", escapeLabel(string(k)), h.found[k])
			}
			h.mu.Unlock()
		}
		if needAlerts {
			counts := map[alerts.State]int{}
			for _, a := range v.Alerts {
				counts[a.State]++
			}
			buf.WriteString("# HELP plumbline_alerts Open alerts by state.\n# TYPE plumbline_alerts gauge\n")
			states := slices.Clone(alerts.States)
			for s := range counts {
				if !s.Valid() {
					states = append(states, s)
				}
			}
			for _, s := range states {
				if s == alerts.Normal || s == alerts.Cleared {
					if counts[s] == 0 {
						continue // not open states; listed only if present
					}
				}
				fmt.Fprintf(&buf, "plumbline_alerts{state=\"%s\"} %d\n", escapeLabel(string(s)), counts[s])
			}
		}
	}
	buf.WriteString("# HELP plumbline_http_requests_total HTTP requests served, by route and status code.\n# TYPE plumbline_http_requests_total counter\n")
	h.mu.Lock()
	keys := make([]reqKey, 0, len(h.requests))
	for k := range h.requests {
		keys = append(keys, k)
	}
	sort.Slice(keys, func(i, j int) bool {
		if keys[i].route != keys[j].route {
			return keys[i].route < keys[j].route
		}
		return keys[i].code < keys[j].code
	})
	for _, k := range keys {
		fmt.Fprintf(&buf, "plumbline_http_requests_total{route=\"%s\",code=\"%d\"} %d\n", escapeLabel(k.route), k.code, h.requests[k])
	}
	h.mu.Unlock()
	w.Header().Set("Content-Type", "text/plain; version=0.0.4; charset=utf-8")
	w.Header().Set("Cache-Control", "no-store")
	w.Write(buf.Bytes())
}

// kinds lists the three finding kinds, then any other seen, sorted.
func kinds(m map[finding.Kind]uint64) []finding.Kind {
	out := []finding.Kind{finding.Leak, finding.Blockage, finding.SensorFault}
	var extra []finding.Kind
	for k := range m {
		if k != finding.Leak && k != finding.Blockage && k != finding.SensorFault {
			extra = append(extra, k)
		}
	}
	sort.Slice(extra, func(i, j int) bool { return extra[i] < extra[j] })
	return append(out, extra...)
}

// hasFamily reports whether the exposition text has a sample or a TYPE
// line of the metric family name.
func hasFamily(text, name string) bool {
	for line := range strings.Lines(text) {
		if rest, ok := strings.CutPrefix(line, "# TYPE "); ok {
			line = rest
		} else if strings.HasPrefix(line, "#") {
			continue
		}
		if rest, ok := strings.CutPrefix(line, name); ok && rest != "" && (rest[0] == '{' || rest[0] == ' ') {
			return true
		}
	}
	return false
}

// escapeLabel escapes a label value for the text format (backslash,
// double quote and line feed; Prometheus exposition format 0.0.4).
func escapeLabel(s string) string {
	return strings.NewReplacer(`\`, `\\`, `"`, `\"`, "\n", `\n`).Replace(s)
}
