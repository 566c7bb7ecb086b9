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
