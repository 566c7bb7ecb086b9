package leakage

import (
	"errors"
	"fmt"
	"math"
)

// DefaultN1 is the FAVAD exponent used when nothing better is known: 1.0,
// the usual assumption for large systems of mixed pipe materials
// (Lambert 2001, from memory).
const DefaultN1 = 1.0

// SecondsPerDay converts a steady rate per second into one per day.
const SecondsPerDay = 86400.0

// ErrNoData is returned when a figure cannot be formed from the data
// given (no pressure hours, zero unavoidable losses).
var ErrNoData = errors.New("leakage: not enough data")

// FAVADRate returns the leak flow at pressure p1 of a leak that flows q0
// at pressure p0, under FAVAD: q1 = q0·(p1/p0)^N1 (May 1994). Units of q
// are kept; pressures in m of water, both positive.
func FAVADRate(q0, p0, p1, n1 float64) (float64, error) {
	if err := positive("p0", p0); err != nil {
		return 0, err
	}
	if err := nonNegative("p1", p1); err != nil {
		return 0, err
	}
	if err := nonNegative("n1", n1); err != nil {
		return 0, err
	}
	if !finite(q0) {
		return 0, fmt.Errorf("leakage: q0 is %v", q0)
	}
	return q0 * math.Pow(p1/p0, n1), nil
}

// NightDayFactor returns the night-day factor in hours per day: the
// number of hours at the night leakage rate that make up one day's
// leakage, Σ_h (P_h/P_night)^N1 · 1 h over the 24 hours of the day
// (Lambert 2001, FAVAD of May 1994). hourly holds the zone's average
// pressure for each hour of the (local) day, m; NaN marks an hour with
// no data, which is filled with the mean of the hours that have data (so
// a day with missing hours still counts 24 hours). night is the average
// pressure in the night window from which the night leakage rate was
// taken. A zone whose pressure does not vary has a factor of 24.
func NightDayFactor(hourly []float64, night, n1 float64) (float64, error) {
	if len(hourly) != 24 {
		return 0, fmt.Errorf("leakage: night-day factor wants 24 hourly pressures, got %d", len(hourly))
	}
	if err := positive("night pressure", night); err != nil {
		return 0, err
	}
	if err := nonNegative("n1", n1); err != nil {
		return 0, err
	}
	sum, n := 0.0, 0
	for h, p := range hourly {
		if math.IsNaN(p) {
			continue
		}
		if math.IsInf(p, 0) || p < 0 {
			return 0, fmt.Errorf("leakage: pressure of hour %d is %v m", h, p)
		}
		sum += math.Pow(p/night, n1)
		n++
	}
	if n == 0 {
		return 0, fmt.Errorf("%w: no hour of the day has a pressure", ErrNoData)
	}
	return sum * 24 / float64(n), nil
}

// DailyLossesM3 returns the daily real losses in m³/day of a zone whose
// night leakage rate is nightLPS (L/s) and whose night-day factor is ndf
// (h/day): nightLPS · 3.6 m³/h per L/s · ndf.
func DailyLossesM3(nightLPS, ndf float64) (float64, error) {
	if !finite(nightLPS) {
		return 0, fmt.Errorf("leakage: night leakage rate is %v L/s", nightLPS)
	}
	if err := nonNegative("night-day factor", ndf); err != nil {
		return 0, err
	}
	return nightLPS * 3.6 * ndf, nil
}

// System describes a supply system or zone for the unavoidable losses:
// MainsKm is the length of mains (km), Connections the number of service
// connections, PrivateKm the total length of private service pipe between
// the property line and the customer meter (km), PressureM the average
// operating pressure (m of water).
type System struct {
	MainsKm     float64
	Connections int
	PrivateKm   float64
	PressureM   float64
}

// UARL returns the unavoidable annual real losses of Lambert et al.
// (1999), expressed as litres per day:
// UARL = (18·Lm + 0.8·Nc + 25·Lp)·P.
func UARL(s System) (float64, error) {
	if err := nonNegative("mains length", s.MainsKm); err != nil {
		return 0, err
	}
	if s.Connections < 0 {
		return 0, fmt.Errorf("leakage: service connections is %d", s.Connections)
	}
	if err := nonNegative("private service length", s.PrivateKm); err != nil {
		return 0, err
	}
	if err := nonNegative("average pressure", s.PressureM); err != nil {
		return 0, err
	}
	return (18*s.MainsKm + 0.8*float64(s.Connections) + 25*s.PrivateKm) * s.PressureM, nil
}

// InRange reports whether s lies where Lambert et al. (1999) recommend
// the UARL formula: more than 5000 service connections and an average
// pressure above 25 m (from memory). Outside it the figure is indicative.
func (s System) InRange() bool { return s.Connections > 5000 && s.PressureM > 25 }

// ILI returns the Infrastructure Leakage Index, CARL/UARL, both in litres
// per day: the current annual real losses over the unavoidable ones
// (Lambert et al. 1999).
func ILI(carlLPerDay, uarlLPerDay float64) (float64, error) {
	if !finite(carlLPerDay) {
		return 0, fmt.Errorf("leakage: current real losses are %v L/day", carlLPerDay)
	}
	if !finite(uarlLPerDay) || uarlLPerDay <= 0 {
		return 0, fmt.Errorf("%w: unavoidable real losses are %v L/day", ErrNoData, uarlLPerDay)
	}
	return carlLPerDay / uarlLPerDay, nil
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

func positive(name string, x float64) error {
	if !finite(x) || x <= 0 {
		return fmt.Errorf("leakage: %s must be positive, got %v", name, x)
	}
	return nil
}

func nonNegative(name string, x float64) error {
	if !finite(x) || x < 0 {
		return fmt.Errorf("leakage: %s must not be negative, got %v", name, x)
	}
	return nil
}
