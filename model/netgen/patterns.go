package netgen

import "math"

// Names of the demand patterns every generated network carries.
const (
	Residential = "residential"
	Commercial  = "commercial"
)

// residentialShape and commercialShape are hourly demand shapes (hour 0
// is 00:00-01:00 local time) with a mean of 1 (each sums to 24). The
// residential shape has a morning peak at 07:00-08:00 (about 1.75 × mean),
// an evening peak at 19:00-20:00 (about 1.55 × mean) and a night minimum
// of 0.34 × mean at 03:00; the commercial one is flat and low (about
// 0.4 × mean) outside 08:00-17:00. Both are shapes of common practice
// for metered residential and small commercial use (from memory of
// published diurnal curves; no single source).
var (
	residentialShape = [24]float64{
		0.45, 0.38, 0.35, 0.34, 0.38, 0.60, 1.20, 1.75, 1.60, 1.30, 1.15, 1.10,
		1.15, 1.05, 1.00, 1.00, 1.05, 1.30, 1.50, 1.55, 1.35, 1.05, 0.80, 0.60,
	}
	commercialShape = [24]float64{
		0.40, 0.38, 0.36, 0.36, 0.38, 0.45, 0.65, 1.05, 1.55, 1.65, 1.70, 1.70,
		1.65, 1.65, 1.65, 1.60, 1.55, 1.35, 1.05, 0.80, 0.65, 0.55, 0.45, 0.42,
	}
)

// Patterns returns fresh copies of the residential and commercial daily
// patterns: 24 hourly multipliers each, normalised to a mean of exactly 1
// so that base demand is the daily mean demand.
func Patterns() map[string][]float64 {
	return map[string][]float64{
		Residential: normalised(residentialShape[:]),
		Commercial:  normalised(commercialShape[:]),
	}
}

// PeakHour returns the hour (0-23) of the largest multiplier of the
// residential pattern, the hour the network is hardest to supply.
func PeakHour() int {
	best := 0
	for h, v := range residentialShape {
		if v > residentialShape[best] {
			best = h
		}
	}
	return best
}

func normalised(shape []float64) []float64 {
	var s float64
	for _, v := range shape {
		s += v
	}
	mean := s / float64(len(shape))
	out := make([]float64, len(shape))
	for i, v := range shape {
		if math.Abs(mean-1) < 1e-9 {
			out[i] = v // already normalised: keep the short decimals
		} else {
			out[i] = v / mean
		}
	}
	return out
}

// maxMultiplier is the largest multiplier over both patterns, used as
// the peak factor when pipes are sized.
func maxMultiplier() float64 {
	m := 0.0
	for _, p := range Patterns() {
		for _, v := range p {
			m = max(m, v)
		}
	}
	return m
}
