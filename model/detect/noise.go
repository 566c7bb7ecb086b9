package detect

import (
	"errors"
	"fmt"
	"math"
	"time"

	"plumbline/model/demand"
	"plumbline/model/hydraulic"
	"plumbline/model/network"
	"plumbline/model/telemetry"
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

// Rebase tells a detector whose state was restored from one built on
// another network model, prev (a recalibration adopted by the service:
// same sensors and zones, new roughness and patterns), that the model
// under its baselines has changed, and moves each baseline by what the
// change does to it, hour by hour, so that detection goes on at once:
//
//   - a logger's residual (measured − inflow-matched model) changes by
//     prev's modelled value minus this network's, both solved with the
//     zone demand of this network's patterns at the zone's mean
//     inflow-matched level, spread over the junctions by each network's
//     own patterns (as the inflow-matched solve does);
//   - a zone's imbalance (inflow − expected consumption) changes by
//     prev's expected consumption minus this network's; the night
//     baseline's offset moves by the mean change over the night window.
//
// Each hour bin's change is the mean over the seven days before the
// detector's last hour (weekday and weekend patterns both count). The
// CUSUM tests start again from zero; findings, night history and
// sensor-fault exclusions are kept. A logger or hour whose solve fails
// relearns its level over the next day instead (Baseline.Relearn). prev
// must have this network's nodes and links (ids) and the detector's
// sensors; otherwise Rebase returns an error and changes nothing.
func (d *Detector) Rebase(prev *network.Network) error {
	if prev == nil || len(prev.Nodes) != len(d.net.Nodes) || len(prev.Links) != len(d.net.Links) {
		return errors.New("detector: rebase: the previous network has other nodes or links")
	}
	for i := range prev.Nodes {
		if prev.Nodes[i].ID != d.net.Nodes[i].ID {
			return fmt.Errorf("detector: rebase: node %d is %s in the previous network, %s now", i, prev.Nodes[i].ID, d.net.Nodes[i].ID)
		}
	}
	for i := range prev.Links {
		if prev.Links[i].ID != d.net.Links[i].ID {
			return fmt.Errorf("detector: rebase: link %d is %s in the previous network, %s now", i, prev.Links[i].ID, d.net.Links[i].ID)
		}
	}
	old, err := hydraulic.NewSolver(prev, hydraulic.Options{})
	if err != nil {
		return fmt.Errorf("detector: rebase: previous network: %w", err)
	}
	end := d.st.Hour
	if end.IsZero() {
		end = time.Date(2024, 1, 8, 0, 0, 0, 0, time.UTC) // any week will do
	}
	nz, ns := len(d.zones), len(d.sens)
	var sShift, zShift [][24]float64
	var sN [][24]int
	var zN [][24]int
	sShift, sN = make([][24]float64, ns), make([][24]int, ns)
	zShift, zN = make([][24]float64, nz), make([][24]int, nz)
	night := make([]float64, nz)
	nightN := make([]int, nz)
	cond := hydraulic.Conditions{FixedHead: d.cond.FixedHead, Status: d.cond.Status}
	var bNew, bOld []float64
	var pNew, pOld *hydraulic.Solution
	for k := range 7 * 24 {
		t := end.Add(-time.Duration(k)*time.Hour + 30*time.Minute)
		bNew = demand.Base(d.net, t, d.zoneLoc, bNew)
		bOld = demand.Base(prev, t, d.zoneLoc, bOld)
		sumNew := make([]float64, nz)
		sumOld := make([]float64, nz)
		for i, zi := range d.nodeZone {
			if zi >= 0 {
				sumNew[zi] += bNew[i]
				sumOld[zi] += bOld[i]
			}
		}
		for zi := range d.zones {
			h := d.localHour(zi, t)
			dz := sumOld[zi] - sumNew[zi]
			zShift[zi][h] += dz
			zN[zi][h]++
			if in, _ := d.inNight(zi, t); in {
				night[zi] += dz
				nightN[zi]++
			}
		}
		// The same zone consumption, spread by each network's patterns.
		dNew := make([]float64, len(bNew))
		dOld := make([]float64, len(bOld))
		for i, zi := range d.nodeZone {
			dNew[i], dOld[i] = bNew[i], bOld[i]
			if zi < 0 {
				continue
			}
			total := sumNew[zi] * d.st.MeanMult[zi]
			if sumNew[zi] > 0 {
				dNew[i] = bNew[i] * total / sumNew[zi]
			}
			if sumOld[zi] > 0 {
				dOld[i] = bOld[i] * total / sumOld[zi]
			}
		}
		cond.Demand = dNew
		sn, err1 := d.solver.Solve(&cond, pNew)
		cond.Demand = dOld
		so, err2 := old.Solve(&cond, pOld)
		if err1 != nil || err2 != nil {
			continue
		}
		pNew, pOld = sn, so
		for si, info := range d.sens {
			if !info.evidence {
				continue
			}
			var vn, vo float64
			if info.s.Quantity == telemetry.Head {
				vn, vo = sn.Head[info.node], so.Head[info.node]
			} else {
				vn, vo = sn.Pressure[info.node], so.Pressure[info.node]
			}
			h := d.localHour(info.zone, t)
			sShift[si][h] += vo - vn
			sN[si][h]++
		}
	}
	for si := range d.st.Sensors {
		s := &d.st.Sensors[si]
		s.Up.Reset()
		s.Down.Reset()
		for h := range 24 {
			if sN[si][h] == 0 {
				if d.sens[si].evidence {
					s.Base.Relearn, s.Base.RelearnSum, s.Base.RelearnN = rebaseHours, 0, 0
				}
				continue
			}
			s.Base.Mean[h] += sShift[si][h] / float64(sN[si][h])
		}
	}
	for zi := range d.st.Zones {
		z := &d.st.Zones[zi]
		for h := range 24 {
			if zN[zi][h] > 0 {
				z.Base.Mean[h] += zShift[zi][h] / float64(zN[zi][h])
			}
		}
		if nightN[zi] > 0 {
			z.Offset += night[zi] / float64(nightN[zi])
		}
		z.Level, z.LevelN = 0, 0
		z.Burst.Reset()
		z.Night.Reset()
		z.Repair.Reset()
	}
	d.prevExp, d.prevMat = nil, nil
	return nil
}

// rebaseHours is how long a baseline whose change could not be computed
// relearns its level after Rebase: a day, as after a repaired leak.
const rebaseHours = 24
