package calib

import (
	"context"
	"errors"
	"fmt"
	"math"
	"time"
)

// Evaluation is a network compared, as it stands, with readings: no
// parameter is fitted. It serves two uses: the residual scatter by hour
// of day that the detector starts from (Residuals), and the comparison of
// two calibrations on the same held-out snapshots (Misfit).
type Evaluation struct {
	// InflowMatched says the residuals are against the inflow-matched
	// model (Problem.Balances given); Matched counts the zone-snapshots
	// whose demand was scaled to the measured inflow, Unmatched those
	// left on the patterns (a meter unreadable or missing).
	InflowMatched      bool
	Matched, Unmatched int
	// Snapshots is the number of snapshots solved and compared, Rows the
	// number of readings in them; Failed the snapshots the network could
	// not solve (left out, named in Warnings).
	Snapshots, Rows, Failed int
	// Misfit is the mean weighted squared residual per reading
	// ((r/σ)², σ from the sensors' accuracy as in Fit).
	Misfit float64
	// Sensors has one entry per compared sensor, in Problem.Sensors order.
	Sensors  []SensorResiduals
	Warnings []string
}

// SensorResiduals are one sensor's residuals (measured − modelled,
// canonical units) over an evaluation, overall and by local hour of day.
type SensorResiduals struct {
	ID       string   `json:"id"`
	Quantity string   `json:"quantity"`
	Unit     string   `json:"unit"`
	Sigma    float64  `json:"sigma"` // accuracy that weighs it (one standard deviation)
	Fit      FitStats `json:"fit"`
	// HourMean and HourSigma are the mean residual and the standard
	// deviation about it (n − 1 in the denominator) of the snapshots in
	// each local hour of the sensor's zone (its node's zone; a flow
	// meter's upstream node; UTC without a zone); NaN with fewer than two
	// values. HourCount is the number of values.
	HourMean  [24]float64 `json:"-"`
	HourSigma [24]float64 `json:"-"`
	HourCount [24]int     `json:"hour_count"`
}

// Evaluate solves p.Network at every snapshot of p (one per
// Settings.Interval, as Fit keeps them; no hold-out, no limit on their
// number) with its recorded roughness and patterns and the snapshots'
// boundary conditions, and compares the modelled values with the
// readings. With p.Balances, each zone's demand at each snapshot is first
// scaled so that the zone uses what its meters measure (inflow less
// outflow; limited to 0..5 times the patterns' demand), as the detector's
// inflow-matched solve does: the residuals are then the ones the
// detector's baselines hold, without the day-to-day swing of consumption
// that the meters see, and a noise table made from them (NoiseFrom) is
// the scatter the detector will meet. Give it Result.Network to see a calibration's residuals.
// Settings other than Interval, Workers and the accuracy defaults are
// ignored. Snapshots that do not solve are left out and named in
// Warnings; an error is returned for a problem with no usable sensor or
// snapshot, when none solves, or for a cancelled ctx.
func Evaluate(ctx context.Context, p Problem, s Settings) (*Evaluation, error) {
	if p.Network == nil {
		return nil, errors.New("calibration: evaluate: no network")
	}
	s.NoRoughness, s.NoPatterns = true, true
	s.evaluating = true
	s.HoldOut = -1
	s.MaxSnapshots = math.MaxInt
	s = s.withDefaults()
	ev := &Evaluation{}
	warn := func(msg string) { ev.Warnings = append(ev.Warnings, msg) }
	m, snaps, _, _, _, locs, err := setup(p, s, warn)
	if err != nil {
		return nil, err
	}
	for _, ok := range m.matched {
		ev.InflowMatched = ev.InflowMatched || ok
	}
	ev.Matched, ev.Unmatched = m.matchedN, m.unmatchedN
	b := newBatch(snaps, m.sens)
	st, err := m.evaluateAll(ctx, b, nil, nil, noTrial)
	if err != nil {
		return nil, err
	}
	failed := make([]bool, len(snaps))
	for i, e := range st.fails {
		if e != nil {
			failed[i] = true
			ev.Failed++
			warn(fmt.Sprintf("%v: left out", e))
		}
	}
	if ev.Failed == len(snaps) {
		return nil, fmt.Errorf("calibration: evaluate: the network solves none of the %d snapshots: %w", len(snaps), errors.Join(st.fails...))
	}
	ev.Snapshots = len(snaps) - ev.Failed
	// The clock of each sensor: its node's zone, a flow meter's upstream
	// node's zone.
	loc := make([]*time.Location, len(m.sens))
	for k, si := range m.sens {
		loc[k] = time.UTC
		node := si.node
		if si.link >= 0 {
			node = m.net.Links[si.link].From
		}
		if node >= 0 {
			if z := m.zoneOf[node]; z >= 0 {
				loc[k] = locs[z]
			}
		}
	}
	type acc struct {
		n        int
		sum, ssq float64
		hn       [24]int
		hs, hq   [24]float64
	}
	accs := make([]acc, len(m.sens))
	var cost float64
	for i, r := range st.r {
		sn := b.snap[i]
		if failed[sn] {
			continue
		}
		k := b.sen[i]
		ev.Rows++
		cost += b.aw[i] * r * r
		a := &accs[k]
		a.n++
		a.sum += r
		a.ssq += r * r
		h := b.snaps[sn].t.In(loc[k]).Hour()
		a.hn[h]++
		a.hs[h] += r
		a.hq[h] += r * r
	}
	ev.Misfit = cost / float64(max(1, ev.Rows))
	for k, si := range m.sens {
		a := &accs[k]
		if si.role != roleObserve || a.n == 0 {
			continue
		}
		n := float64(a.n)
		sr := SensorResiduals{ID: si.s.ID, Quantity: si.s.Quantity.String(), Unit: si.s.Quantity.CanonicalUnit(), Sigma: si.sigma,
			Fit: FitStats{Count: a.n, RMSE: math.Sqrt(a.ssq / n), Bias: a.sum / n}, HourCount: a.hn}
		for h := range 24 {
			sr.HourMean[h], sr.HourSigma[h] = math.NaN(), math.NaN()
			c := float64(a.hn[h])
			if a.hn[h] > 0 {
				sr.HourMean[h] = a.hs[h] / c
			}
			if a.hn[h] >= 2 {
				// Σ(r − mean)² = Σr² − n·mean².
				v := (a.hq[h] - c*sr.HourMean[h]*sr.HourMean[h]) / (c - 1)
				sr.HourSigma[h] = math.Sqrt(math.Max(0, v))
			}
		}
		ev.Sensors = append(ev.Sensors, sr)
	}
	return ev, nil
}
