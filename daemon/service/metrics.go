package service

import (
	"encoding/json"
	"fmt"
	"io"
	"net/http"
	"sort"
	"sync"
	"sync/atomic"
	"time"

	"plumbline/alerts"
	"plumbline/daemon/web"
)

// metrics are the service's own counters; the components add theirs.
type metrics struct {
	accepted   atomic.Uint64
	steps      atomic.Uint64
	iterations atomic.Uint64
	mu         sync.Mutex
	findings   map[string]uint64
}

func (m *metrics) countFinding(kind string) {
	m.mu.Lock()
	defer m.mu.Unlock()
	if m.findings == nil {
		m.findings = map[string]uint64{}
	}
	m.findings[kind]++
}

// WriteMetrics writes every metric in the Prometheus text format
// (version 0.0.4).
func (s *Service) WriteMetrics(w io.Writer) error {
	p := func(format string, a ...any) { fmt.Fprintf(w, format, a...) }
	if s.ingest == nil {
		// Before Run: the ingest client, which owns these, does not exist yet.
		p("# TYPE plumbline_readings_accepted_total counter\nplumbline_readings_accepted_total 0\n")
		p("# TYPE plumbline_readings_rejected_total counter\nplumbline_readings_rejected_total{reason=\"none\"} 0\n")
		p("# TYPE plumbline_ingest_lag_seconds gauge\nplumbline_ingest_lag_seconds 0\n")
	}
	if s.writer == nil {
		// The embedded file store writes synchronously: nothing is spooled.
		p("# HELP plumbline_spool_points Points waiting in the store spool.\n# TYPE plumbline_spool_points gauge\nplumbline_spool_points 0\n")
	}
	p("# HELP plumbline_pipeline_readings_total Readings made durable and fed to the pipeline (MQTT and history).\n# TYPE plumbline_pipeline_readings_total counter\nplumbline_pipeline_readings_total %d\n", s.metrics.accepted.Load())
	s.mu.Lock()
	stepSec := s.stepTime.Seconds()
	s.mu.Unlock()
	p("# HELP plumbline_step_seconds Wall time of the last model step (both solves, tests, hypotheses).\n# TYPE plumbline_step_seconds gauge\nplumbline_step_seconds %g\n", stepSec)
	p("# HELP plumbline_steps_total Model steps processed.\n# TYPE plumbline_steps_total counter\nplumbline_steps_total %d\n", s.metrics.steps.Load())
	p("# HELP plumbline_solver_iterations_total Newton iterations of every solve.\n# TYPE plumbline_solver_iterations_total counter\nplumbline_solver_iterations_total %d\n", s.metrics.iterations.Load())
	p("# HELP plumbline_findings_total Findings raised, by kind.\n# TYPE plumbline_findings_total counter\n")
	s.metrics.mu.Lock()
	for _, k := range []string{"leak", "blockage", "sensor-fault"} {
		p("plumbline_findings_total{kind=%q} %d\n", k, s.metrics.findings[k])
	}
	s.metrics.mu.Unlock()
	p("# HELP plumbline_alerts Alerts by state.\n# TYPE plumbline_alerts gauge\n")
	if s.alerts != nil {
		counts := s.alerts.Counts()
		keys := make([]string, 0, len(counts))
		for st := range counts {
			keys = append(keys, string(st))
		}
		sort.Strings(keys)
		for _, k := range keys {
			p("plumbline_alerts{state=%q} %d\n", k, counts[alerts.State(k)])
		}
	}
	if s.ingest != nil {
		if err := s.ingest.WriteMetrics(w); err != nil {
			return err
		}
	}
	if s.writer != nil {
		if err := s.writer.Stats().WritePrometheus(w); err != nil {
			return err
		}
	}
	return nil
}

// ReadyState reports whether the service can do its job now, and why not.
func (s *Service) ReadyState() (bool, []string) {
	var why []string
	select {
	case <-s.ready:
	default:
		why = append(why, "starting")
	}
	if s.ingest != nil {
		switch st := s.ingest.Status(); {
		case !st.Connected:
			why = append(why, "MQTT broker not connected")
		case !st.Subscribed:
			why = append(why, "MQTT subscriptions not granted yet")
		}
	}
	if s.writer != nil {
		if st := s.writer.Stats(); st.LastError != "" && time.Since(st.LastErrorTime) < 30*time.Second {
			why = append(why, "store not writable: "+st.LastError)
		}
	}
	return len(why) == 0, why
}

// MinimalHandler serves health, readiness, metrics and the JSON view
// when no richer handler is given.
func (s *Service) MinimalHandler() http.Handler {
	mux := http.NewServeMux()
	mux.HandleFunc("/healthz", func(w http.ResponseWriter, r *http.Request) { fmt.Fprintln(w, "ok") })
	mux.HandleFunc("/readyz", func(w http.ResponseWriter, r *http.Request) {
		ok, why := s.ReadyState()
		if !ok {
			w.WriteHeader(http.StatusServiceUnavailable)
		}
		json.NewEncoder(w).Encode(map[string]any{"ready": ok, "reasons": why})
	})
	mux.HandleFunc("/metrics", func(w http.ResponseWriter, r *http.Request) {
		w.Header().Set("Content-Type", "text/plain; version=0.0.4")
		s.WriteMetrics(w)
	})
	if s.alertAPI != nil {
		mux.Handle("/api/alerts/", http.StripPrefix("/api/alerts", s.alertAPI))
	}
	return mux
}

// WebProvider adapts the service to daemon/web's Provider.
func (s *Service) WebProvider() web.Provider { return webProvider{s} }

type webProvider struct{ s *Service }

func (p webProvider) View() web.View                 { return p.s.View() }
func (p webProvider) Ready() (bool, []string)        { return p.s.ReadyState() }
func (p webProvider) WriteMetrics(w io.Writer) error { return p.s.WriteMetrics(w) }
