package detect

import (
	"fmt"
	"math"
)

// SeedWeight is how many days of values a seeded hour bin counts for
// (SeedNoise): a week, so that the detector's own residuals take over in
// about as long as it learns anyway (our choice).
const SeedWeight = 7

// SeedNoise gives one sensor's residual baseline a starting scatter by
// hour of day: sigma[h] is the standard deviation (canonical units) of
// the sensor's hourly mean model residual in local hour h of its zone, as
// a calibration measured it. Each bin's variance counts as SeedWeight
// values and the pooled variance as SeedWeight values per bin, so the
// detector's own residuals blend in (Baseline's moving averages) rather
// than start from nothing; the bins' mean level is still learned from
// the detector's residuals. A NaN sigma leaves that hour unseeded.
//
// Call it after New and only on a fresh detector: a state given to
// Restore has its own learned scatter, and seeding after it would
// overwrite what was learned. Only pressure and head loggers at
// junctions use the residual baseline; seeding another sensor is
// harmless. An unknown sensor, a negative or infinite sigma, or no
// usable hour is an error naming the sensor, and changes nothing.
func (d *Detector) SeedNoise(sensor string, sigma [24]float64) error {
	si, ok := d.bySensor[sensor]
	if !ok {
		return fmt.Errorf("detector: seed noise: sensor %q is not configured", sensor)
	}
	n := 0
	sum := 0.0
	for h, s := range sigma {
		if math.IsNaN(s) {
			continue
		}
		if s < 0 || math.IsInf(s, 0) {
			return fmt.Errorf("detector: seed noise: sensor %s: hour %02d: sigma %v is not a finite non-negative number", sensor, h, s)
		}
		n++
		sum += s * s
	}
	if n == 0 {
		return fmt.Errorf("detector: seed noise: sensor %s: no hour with a sigma", sensor)
	}
	b := &d.st.Sensors[si].Base
	pooled := sum / float64(n)
	for h, s := range sigma {
		if math.IsNaN(s) {
			// An unseeded hour starts at the pooled scatter with no weight
			// of its own: SigmaAt falls back on the pool.
			continue
		}
		b.BinVar[h] = s * s
		b.BinNVar[h] = SeedWeight
	}
	b.Var = pooled
	b.NVar = SeedWeight * 24
	return nil
}
