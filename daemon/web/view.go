package web

import (
	"encoding/json"
	"io"
	"math"
	"slices"
	"time"

	"plumbline/alerts"
	"plumbline/model/finding"
)

// Provider is what the service gives the web layer: the current state, the
// readiness verdict and the components' metrics. All methods must be safe
// for concurrent use; the handler calls them from request goroutines and
// never keeps what they return beyond one request.
type Provider interface {
	// View returns the current state for the page and the JSON API. The
	// handler does not modify it (it copies before normalising).
	View() View
	// Ready reports whether the service is ready (broker connected, store
	// writable, model loaded); reasons say what is missing when it is not.
	Ready() (ok bool, reasons []string)
	// WriteMetrics writes the Prometheus text exposition (format 0.0.4) of
	// the service's components. The handler adds plumbline_findings_total
	// and plumbline_alerts when the text has no family of that name, and
	// its own plumbline_http_requests_total.
	WriteMetrics(w io.Writer) error
}

// View is the service's state at one model step, as the page and the JSON
// API show it. Flows are L/s, pressures and levels m, times UTC.
type View struct {
	// Updated is when the view was last recomputed; Step is the model step
	// it describes (zero: no step yet).
	Updated time.Time    `json:"updated,omitzero"`
	Step    time.Time    `json:"step,omitzero"`
	Zones   []ZoneView   `json:"zones"`
	Sensors []SensorView `json:"sensors"`
	// Findings are the active and recent findings, in any order.
	Findings []finding.Finding `json:"findings"`
	// Alerts are the open alerts (any order; the page sorts by id).
	Alerts []alerts.Alert `json:"alerts"`
}

// ZoneView is one zone's water balance at the current step. NaN means
// unknown (a meter without a usable reading) and is written as JSON null.
type ZoneView struct {
	ID string
	// InflowLPS is the metered net inflow (inlets minus outlets);
	// ExpectedLPS the model's; ImbalanceLPS their difference
	// (inflow - expected; positive means more water went in than the
	// model accounts for).
	InflowLPS, ExpectedLPS, ImbalanceLPS float64
	// Nights are the night-flow results, oldest first; the last entry is
	// tonight's (the latest night window, possibly still open). The page
	// draws up to the last 15 (14 nights and tonight).
	Nights []NightView
}

// NightView is one night's minimum night flow against the zone's
// allowance for legitimate night use. NaN is written as JSON null.
type NightView struct {
	// Night is the start of the night window (UTC).
	Night time.Time
	// MinLPS is the minimum night flow; AllowLPS the allowance; ExcessLPS
	// MinLPS - AllowLPS as the detector computed it.
	MinLPS, AllowLPS, ExcessLPS float64
}

// SensorView is one sensor at the current step: the measured value, the
// model's expected value and the residual (measured - expected), all in
// canonical units (Unit names it: "m" or "L/s"). NaN (no reading, no
// model value) is written as JSON null.
type SensorView struct {
	ID       string
	Quantity string // pressure, flow, level, head
	At       string // node id (pressure, level, head) or link id (flow)
	Zone     string
	Unit     string
	// Quality is the aggregate's quality word (ok, missing, stale, stuck,
	// spike, out-of-range), as telemetry.Quality.String writes it.
	Quality                   string
	Value, Expected, Residual float64
}

// num is a float64 that is JSON null when not finite.
type num float64

// MarshalJSON writes a finite value as a number and NaN or ±Inf as null.
func (x num) MarshalJSON() ([]byte, error) {
	f := float64(x)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return []byte("null"), nil
	}
	return json.Marshal(f)
}

// MarshalJSON writes the zone with snake_case keys and null for NaN.
func (z ZoneView) MarshalJSON() ([]byte, error) {
	nights := z.Nights
	if nights == nil {
		nights = []NightView{}
	}
	return json.Marshal(struct {
		ID           string      `json:"id"`
		InflowLPS    num         `json:"inflow_lps"`
		ExpectedLPS  num         `json:"expected_lps"`
		ImbalanceLPS num         `json:"imbalance_lps"`
		Nights       []NightView `json:"nights"`
	}{z.ID, num(z.InflowLPS), num(z.ExpectedLPS), num(z.ImbalanceLPS), nights})
}

// MarshalJSON writes the night with snake_case keys and null for NaN.
func (n NightView) MarshalJSON() ([]byte, error) {
	return json.Marshal(struct {
		Night     time.Time `json:"night"`
		MinLPS    num       `json:"min_lps"`
		AllowLPS  num       `json:"allow_lps"`
		ExcessLPS num       `json:"excess_lps"`
	}{n.Night, num(n.MinLPS), num(n.AllowLPS), num(n.ExcessLPS)})
}

// MarshalJSON writes the sensor with snake_case keys and null for NaN.
func (s SensorView) MarshalJSON() ([]byte, error) {
	return json.Marshal(struct {
		ID       string `json:"id"`
		Quantity string `json:"quantity"`
		At       string `json:"at"`
		Zone     string `json:"zone"`
		Unit     string `json:"unit"`
		Quality  string `json:"quality"`
		Value    num    `json:"value"`
		Expected num    `json:"expected"`
		Residual num    `json:"residual"`
	}{s.ID, s.Quantity, s.At, s.Zone, s.Unit, s.Quality, num(s.Value), num(s.Expected), num(s.Residual)})
}

// MarshalJSON writes the view with empty lists as [] (never null). Sizes
// and scores of findings and alerts that are not finite are written as 0
// (sizes are then omitted), since encoding/json refuses NaN.
func (v View) MarshalJSON() ([]byte, error) {
	type plain View // no MarshalJSON: avoids recursion
	c := plain(v.normal())
	return json.Marshal(c)
}

// normal returns a copy with nil lists made empty and non-finite numbers
// of findings and alerts replaced by 0. v is not modified.
func (v View) normal() View {
	c := v
	c.Zones = orEmpty(v.Zones)
	c.Sensors = orEmpty(v.Sensors)
	c.Findings = make([]finding.Finding, len(v.Findings))
	for i, f := range v.Findings {
		f.SizeLPS, f.OpenFrac = finite(f.SizeLPS), finite(f.OpenFrac)
		f.Candidates = cleanCandidates(f.Candidates)
		c.Findings[i] = f
	}
	c.Alerts = make([]alerts.Alert, len(v.Alerts))
	for i, a := range v.Alerts {
		a.SizeLPS, a.MaxSizeLPS, a.OpenFrac = finite(a.SizeLPS), finite(a.MaxSizeLPS), finite(a.OpenFrac)
		a.Candidates = cleanCandidates(a.Candidates)
		a.Notified = slices.Clone(a.Notified)
		c.Alerts[i] = a
	}
	return c
}

func orEmpty[T any](s []T) []T {
	if s == nil {
		return []T{}
	}
	return s
}

func finite(x float64) float64 {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return 0
	}
	return x
}

func cleanCandidates(cs []finding.Candidate) []finding.Candidate {
	out := make([]finding.Candidate, len(cs))
	for i, c := range cs {
		c.Score = finite(c.Score)
		out[i] = c
	}
	return out
}
