package calib

import (
	"fmt"
	"time"

	"plumbline/model/network"
)

// Kind is the kind of a fitted parameter.
type Kind uint8

const (
	// Roughness is a pipe group's roughness: a common multiplier of the
	// recorded Hazen-Williams C (or Darcy-Weisbach ε) of its pipes.
	Roughness Kind = iota + 1
	// DemandMultiplier is a zone's demand multiplier at one hour of the
	// day (weekday or weekend): it scales the recorded base × pattern
	// demand of every junction of the zone.
	DemandMultiplier
)

// String returns the kind's word.
func (k Kind) String() string {
	switch k {
	case Roughness:
		return "roughness"
	case DemandMultiplier:
		return "demand-multiplier"
	}
	return fmt.Sprintf("Kind(%d)", uint8(k))
}

// MarshalText writes the kind's word (JSON reports).
func (k Kind) MarshalText() ([]byte, error) { return []byte(k.String()), nil }

// Status says how a fit ended. Every status comes with a usable result;
// errors are for bad input and failed solves only.
type Status uint8

const (
	// Converged: an accepted step lowered the misfit by less than
	// Settings.Tolerance (relative), or the step became negligible.
	Converged Status = iota + 1
	// IterationLimit: Settings.MaxIterations were taken.
	IterationLimit
	// Stalled: no step, however damped, lowered the misfit: the point
	// is a minimum to the precision of the solves.
	Stalled
	// NothingToFit: no parameter was identifiable; the network is
	// returned as recorded.
	NothingToFit
)

// String returns the status word.
func (s Status) String() string {
	switch s {
	case Converged:
		return "converged"
	case IterationLimit:
		return "iteration-limit"
	case Stalled:
		return "stalled"
	case NothingToFit:
		return "nothing-to-fit"
	}
	return fmt.Sprintf("Status(%d)", uint8(s))
}

// MarshalText writes the status word (JSON reports).
func (s Status) MarshalText() ([]byte, error) { return []byte(s.String()), nil }

// Parameter is one fitted (or unidentifiable) parameter.
type Parameter struct {
	// Name is "roughness <group>" or "demand <zone> <day type> HH:00".
	Name string `json:"name"`
	Kind Kind   `json:"kind"`
	// Group, Pipes and LengthM describe a roughness group.
	Group   string  `json:"group,omitempty"`
	Pipes   int     `json:"pipes,omitempty"`
	LengthM float64 `json:"length_m,omitempty"`
	// Zone, DayType ("weekday", "weekend" or "every-day") and Hour (local,
	// 0-23) place a demand multiplier.
	Zone    string `json:"zone,omitempty"`
	DayType string `json:"day_type,omitempty"`
	Hour    int    `json:"hour,omitempty"`
	// Unit is "C" (Hazen-Williams), "mm" (Darcy-Weisbach ε) or "" for a
	// multiplier.
	Unit string `json:"unit"`
	// Prior is the recorded value (a group's length-weighted geometric
	// mean roughness, or multiplier 1); Estimate the fitted one, StdErr
	// its standard error, in the same unit. An unidentifiable parameter
	// keeps Estimate = Prior and shows the (large) StdErr the data leave.
	Prior    float64 `json:"prior"`
	Estimate float64 `json:"estimate"`
	StdErr   float64 `json:"std_err"`
	// Identifiable is false when the data cannot determine the
	// parameter (see the package doc).
	Identifiable bool `json:"identifiable"`
	// AtBound is true when the estimate lies on one of its bounds.
	AtBound bool `json:"at_bound"`
	// MaxCorrelation is the largest |correlation| of the estimate with
	// another identified parameter, named by CorrelatedWith.
	MaxCorrelation float64 `json:"max_correlation"`
	CorrelatedWith string  `json:"correlated_with,omitempty"`
}

// PipeEffect is one pipe whose roughness was fitted about its group's:
// the readings see it one by one (Settings.PipeSpread).
type PipeEffect struct {
	Link  string `json:"link"`
	Group string `json:"group"`
	// Factor multiplies the group's fitted roughness (C, or ε) for this
	// pipe; StdErr is its standard error.
	Factor float64 `json:"factor"`
	StdErr float64 `json:"std_err"`
	// Prior is the pipe's recorded roughness, Estimate its fitted one
	// (group and own factor together) and EstimateStdErr that one's
	// standard error, in the group's unit.
	Prior          float64 `json:"prior"`
	Estimate       float64 `json:"estimate"`
	EstimateStdErr float64 `json:"estimate_std_err"`
	// AtBound: the own factor lies on its bound (three prior standard
	// deviations): something other than roughness may be at work there,
	// such as a valve left partly shut.
	AtBound bool `json:"at_bound"`
}

// FitStats are one sensor's residuals (measured − modelled) over a set
// of snapshots, canonical units.
type FitStats struct {
	Count int     `json:"count"`
	RMSE  float64 `json:"rmse"`
	Bias  float64 `json:"bias"`
}

// SensorFit is one sensor's fit before and after calibration.
type SensorFit struct {
	ID       string `json:"id"`
	Quantity string `json:"quantity"`
	// Unit is the canonical unit of the statistics (m or L/s).
	Unit string `json:"unit"`
	// Sigma is the sensor's accuracy (one standard deviation, canonical
	// units) that weighs it; NoiseFactor the factor by which its
	// residuals after the fit exceed it (≥ 1: never better than the
	// instrument), used for the standard errors.
	Sigma       float64  `json:"sigma"`
	NoiseFactor float64  `json:"noise_factor,omitempty"`
	Before      FitStats `json:"before"`
	After       FitStats `json:"after"`
}

// Validation is the fit on days held out of the fit.
type Validation struct {
	Days      []string `json:"days"`
	Snapshots int      `json:"snapshots"`
	// MisfitBefore and MisfitAfter are the mean weighted squared residual
	// per reading ((r/σ)², 1 = as good as the sensors' accuracy).
	MisfitBefore float64     `json:"misfit_before"`
	MisfitAfter  float64     `json:"misfit_after"`
	Sensors      []SensorFit `json:"sensors"`
}

// Suspect is a link whose resistance the data put far above anything
// roughness can explain: a suspected closed or throttled valve.
type Suspect struct {
	Link string `json:"link"`
	Kind string `json:"kind"`
	// Factor is the resistance factor that fits best (+Inf is written as
	// 0 with Closed true); Closed says a shut link fits best.
	Factor float64 `json:"factor"`
	Closed bool    `json:"closed"`
	// MisfitBefore and MisfitAfter are the weighted misfit (Σ (r/σ)²,
	// noise factors applied) over the check's snapshots with the link as
	// recorded and at Factor.
	MisfitBefore float64 `json:"misfit_before"`
	MisfitAfter  float64 `json:"misfit_after"`
	// Sensors are the sensors whose residuals fall most.
	Sensors  []string `json:"sensors"`
	Evidence string   `json:"evidence"`
}

// Result is the outcome of Fit.
type Result struct {
	Status      Status `json:"status"`
	Iterations  int    `json:"iterations"`
	Evaluations int    `json:"evaluations"`
	// FitDays and FitSnapshots describe the data of the fit; Rows is the
	// number of readings in it.
	FitDays      []string `json:"fit_days"`
	FitSnapshots int      `json:"fit_snapshots"`
	Rows         int      `json:"rows"`
	// MisfitBefore and MisfitAfter are the mean weighted squared residual
	// per reading over the fit data.
	MisfitBefore float64 `json:"misfit_before"`
	MisfitAfter  float64 `json:"misfit_after"`
	// DayVariation is the day-to-day spread of zone consumption the fit
	// found (relative standard deviation; 0 with fewer than two days of a
	// kind), DayVariationUsed the value its standard errors assume.
	DayVariation     float64 `json:"day_variation"`
	DayVariationUsed float64 `json:"day_variation_used"`
	// InflowMatched counts the zone-snapshots of the fit whose demand
	// was scaled to the zone's metered consumption (Problem.Balances).
	InflowMatched int         `json:"inflow_matched,omitempty"`
	Parameters    []Parameter `json:"parameters"`
	// PipeEffects are the pipes given their own roughness about their
	// group's, the largest departure first.
	PipeEffects []PipeEffect `json:"pipe_effects,omitempty"`
	Sensors     []SensorFit  `json:"sensors"`
	Validation  Validation   `json:"validation"`
	Suspects    []Suspect    `json:"suspects"`
	// Applied are the links FitChecked shut in the calibrated network
	// because the readings insist on it (none from Fit).
	Applied []Applied `json:"applied,omitempty"`
	// Warnings name the inputs left out (sensors, snapshots) and other
	// things a reader should know.
	Warnings []string `json:"warnings,omitempty"`
	// Elapsed is the wall time of the fit.
	Elapsed time.Duration `json:"elapsed_ns"`
	// Network is the calibrated network: a copy of the recorded one with
	// the fitted roughness and the zones' calibrated patterns (see the
	// package doc). It is the caller's.
	Network *network.Network `json:"-"`
}

// Parameter returns the parameter of the given name, and whether there is
// one.
func (r *Result) Parameter(name string) (Parameter, bool) {
	for _, p := range r.Parameters {
		if p.Name == name {
			return p, true
		}
	}
	return Parameter{}, false
}
