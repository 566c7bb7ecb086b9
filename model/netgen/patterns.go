package netgen

// Names of the demand patterns every generated network carries.
const (
	Residential = "residential"
	Commercial  = "commercial"
)

// residentialShape and commercialShape are hourly demand shapes (hour 0
// is 00:00-01:00 local time), before normalising to a mean of 1. The
// residential shape has a morning peak at 07:00-08:00 (about 1.75 × mean),
// an evening peak at 19:00-20:00 (about 1.55 × mean) and a night minimum
// of about 0.35 × mean at 03:00; the commercial one is flat and low
// outside 08:00-17:00. Both are shapes of common practice for metered
// residential and small commercial use (from memory of published diurnal
// curves; no single source).
var (
	residentialShape = [24]float64{
		0.45, 0.38, 0.35, 0.34, 0.38, 0.60, 1.20, 1.75, 1.60, 1.30, 1.10, 1.05,
		1.10, 1.00, 0.95, 0.95, 1.05, 1.30, 1.50, 1.55, 1.35, 1.05, 0.80, 0.60,
	}
	commercialShape = [24]float64{
		0.35, 0.33, 0.32, 0.32, 0.33, 0.40, 0.60, 1.00, 1.45, 1.60, 1.65, 1.65,
		1.55, 1.60, 1.60, 1.55, 1.45, 1.25, 0.95, 0.75, 0.60, 0.50, 0.42, 0.38,
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
		out[i] = v / mean
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
