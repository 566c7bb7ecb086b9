package detect

import (
	"errors"
	"math"
	"time"
)

// CUSUM is a one-sided upper cumulative sum (Page 1954) on a normalised
// series z (zero mean, unit variance while nothing has changed):
//
//	S_t = max(0, S_{t−1} + z_t − k),   alarm when S_t > h.
//
// k is the reference value (half the shift to detect, in σ) and h the
// threshold. The time S last left zero estimates the onset, and the mean
// of z since then, minus nothing, estimates the size of the shift (the
// maximum-likelihood change point of a mean shift, Page 1954).
//
// The zero value is not usable; build one with NewCUSUM or DesignCUSUM.
type CUSUM struct {
	K, H float64
	// S is the current statistic; Onset the step after which it last was
	// zero; N and Sum count and add the z values since Onset.
	S     float64
	Onset time.Time
	N     int
	Sum   float64
}

// NewCUSUM returns a CUSUM with reference k and threshold h (both in σ).
func NewCUSUM(k, h float64) *CUSUM { return &CUSUM{K: k, H: h} }

// Update adds one normalised observation taken at t and reports whether
// the statistic is above the threshold. A NaN observation is skipped.
func (c *CUSUM) Update(t time.Time, z float64) bool {
	if math.IsNaN(z) || math.IsInf(z, 0) {
		return c.S > c.H
	}
	next := c.S + z - c.K
	if next <= 0 {
		c.S, c.N, c.Sum = 0, 0, 0
		return false
	}
	if c.S == 0 {
		c.Onset = t
	}
	c.S = next
	c.N++
	c.Sum += z
	return c.S > c.H
}

// Shift estimates the size of the shift since the onset, in σ.
func (c *CUSUM) Shift() float64 {
	if c.N == 0 {
		return 0
	}
	return c.Sum / float64(c.N)
}

// Reset sets the statistic back to zero (after an alarm has been taken).
func (c *CUSUM) Reset() { c.S, c.N, c.Sum, c.Onset = 0, 0, 0, time.Time{} }

// SiegmundARL is Siegmund's (1985) approximation of the average run
// length of a one-sided CUSUM with reference k and threshold h when the
// observations are N(μ, 1):
//
//	ARL ≈ (exp(−2Δb) + 2Δb − 1) / (2Δ²),  Δ = μ − k,  b = h + 1.166,
//
// and b² for Δ = 0. With μ = 0 it is the in-control ARL (time between
// false alarms, in steps); with μ = the shift, the detection delay.
func SiegmundARL(k, h, mu float64) float64 {
	d := mu - k
	b := h + 1.166
	if math.Abs(d) < 1e-9 {
		return b * b
	}
	return (math.Exp(-2*d*b) + 2*d*b - 1) / (2 * d * d)
}

// DesignCUSUM chooses k and h for a shift of delta σ and an in-control
// average run length of arl0 steps: k = delta/2 (the optimal reference for
// that shift, Moustakides 1986), and h the threshold that Siegmund's
// approximation gives arl0 for, found by bisection.
func DesignCUSUM(delta, arl0 float64) (*CUSUM, error) {
	if !(delta > 0) || !(arl0 > 1) {
		return nil, errors.New("cusum design: shift must be positive and run length above 1")
	}
	k := delta / 2
	lo, hi := 0.0, 1.0
	for SiegmundARL(k, hi, 0) < arl0 {
		hi *= 2
		if hi > 1e6 {
			return nil, errors.New("cusum design: run length out of reach")
		}
	}
	for i := 0; i < 200; i++ {
		mid := (lo + hi) / 2
		if SiegmundARL(k, mid, 0) < arl0 {
			lo = mid
		} else {
			hi = mid
		}
	}
	return NewCUSUM(k, (lo+hi)/2), nil
}

// Serial follows the lag-1 autocorrelation ρ of an hourly normalised
// series and turns the series into its innovations,
//
//	e_t = (z_t − ρ·z_{t−1}) / √(1 − ρ²),
//
// which are independent with unit variance when z is a first-order
// autoregressive process: a CUSUM designed for independent observations
// keeps its average run length on e, where on z itself a run of busy
// hours (positively correlated noise) would add up to a false alarm.
// This is the residual chart for autocorrelated data of Alwan & Roberts
// (1988); a sudden shift of μ shows in full in the first innovation
// (μ/√(1−ρ²)) and by √((1−ρ)/(1+ρ))·μ in each one after.
//
// ρ is the exponentially weighted ratio Σ z_t z_{t−1} / Σ z_{t−1}² over
// the pairs of consecutive hours that Learn is given (quiet hours only),
// taken as 0 until 48 pairs are in and kept within [0, 0.9]: negative
// correlation makes the raw CUSUM conservative already, and beyond 0.9
// the series is too slow for hourly innovations to mean much.
type Serial struct {
	Prev   float64
	PrevAt time.Time
	XY, XX float64
	N      int
}

// serialMemory is how many hourly pairs Serial remembers (a fortnight).
const serialMemory = 14 * 24

// Rho returns the current lag-1 autocorrelation estimate.
func (s *Serial) Rho() float64 {
	if s.N < 48 || s.XX <= 0 {
		return 0
	}
	return math.Min(0.9, math.Max(0, s.XY/s.XX))
}

// prev returns the value of the hour before t, if there was one.
func (s *Serial) prev(t time.Time) (float64, bool) {
	ok := !s.PrevAt.IsZero() && t.Sub(s.PrevAt) == time.Hour && !math.IsNaN(s.Prev)
	return s.Prev, ok
}

// Innovation returns e_t for the value z of hour t (z itself when the
// hour before has no value) and remembers z as the previous value.
func (s *Serial) Innovation(t time.Time, z float64) float64 {
	e := z
	if p, ok := s.prev(t); ok {
		rho := s.Rho()
		e = (z - rho*p) / math.Sqrt(1-rho*rho)
	}
	return e
}

// Learn adds the pair (previous hour, z) to the estimate of ρ when the
// hour before t had a value, and then remembers z for the next hour.
// Call it once per hour, after Innovation, with learn false for hours
// that must not teach the estimate (a change under way).
func (s *Serial) Learn(t time.Time, z float64, learn bool) {
	if p, ok := s.prev(t); ok && learn && !math.IsNaN(z) {
		s.N++
		w := 1 / float64(min(s.N, serialMemory))
		s.XY += w * (z*p - s.XY)
		s.XX += w * (p*p - s.XX)
	}
	s.Prev, s.PrevAt = z, t
}
