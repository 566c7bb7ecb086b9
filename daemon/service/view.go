package service

import (
	"time"

	"plumbline/daemon/web"
	"plumbline/model/detect"
	"plumbline/model/finding"
	"plumbline/model/telemetry"
)

// View is the service's current picture for the operator page and the
// JSON API (daemon/web's types): the latest step's zone balances and
// sensor residuals, the last fortnight of nights, the active and recent
// findings and the open alerts.
type View = web.View

// ZoneView, NightView and SensorView are the parts of a View.
type (
	ZoneView   = web.ZoneView
	NightView  = web.NightView
	SensorView = web.SensorView
)

// nightsKept is how many nights each zone shows (a fortnight and tonight).
const nightsKept = 15

func (s *Service) initialView() View {
	v := View{}
	for _, z := range s.cfg.Zones {
		v.Zones = append(v.Zones, ZoneView{ID: z.ID, InflowLPS: nan, ExpectedLPS: nan, ImbalanceLPS: nan})
	}
	for _, sen := range s.cfg.Sensors {
		v.Sensors = append(v.Sensors, SensorView{ID: sen.ID, Quantity: sen.Quantity.String(), At: sen.At, Zone: sen.Zone,
			Unit: sen.Quantity.CanonicalUnit(), Quality: telemetry.Missing.String(), Value: nan, Expected: nan, Residual: nan})
	}
	return v
}

var nan = func() float64 { var z float64; return z / z }()

// updateView takes one step's results into the view (s.mu held).
func (s *Service) updateView(snap telemetry.Snapshot, res *detect.StepResult) {
	v := &s.view
	v.Updated, v.Step = time.Now().UTC(), snap.Step
	for i, z := range res.Zones {
		if i < len(v.Zones) {
			v.Zones[i].InflowLPS, v.Zones[i].ExpectedLPS, v.Zones[i].ImbalanceLPS = z.InflowLPS, z.ExpectedLPS, z.Imbalance
		}
	}
	for _, n := range res.Nights {
		for i := range v.Zones {
			if v.Zones[i].ID != n.Zone {
				continue
			}
			v.Zones[i].Nights = append(v.Zones[i].Nights, NightView{Night: n.Night, MinLPS: n.MinLPS, AllowLPS: n.AllowLPS, ExcessLPS: n.ExcessLPS})
			if k := len(v.Zones[i].Nights); k > nightsKept {
				v.Zones[i].Nights = v.Zones[i].Nights[k-nightsKept:]
			}
		}
	}
	for i := range v.Sensors {
		a := snap.Values[i]
		v.Sensors[i].Quality = a.Quality.String()
		v.Sensors[i].Value = nan
		if a.Count > 0 {
			v.Sensors[i].Value = a.Value
		}
		v.Sensors[i].Expected, v.Sensors[i].Residual = res.Expected[i], res.Residual[i]
	}
	v.Findings = s.recentFindings()
}

// recentFindings are the active findings and those raised in the last
// week of model time, newest first (s.mu held).
func (s *Service) recentFindings() []finding.Finding {
	det := s.pipe.Detector()
	seen := map[string]bool{}
	var out []finding.Finding
	key := func(f finding.Finding) string { return string(f.Kind) + f.Zone + f.Raised.String() }
	for _, f := range det.Active() {
		seen[key(f)] = true
		out = append(out, f)
	}
	all := det.Findings()
	for i := len(all) - 1; i >= 0; i-- {
		f := all[i]
		if seen[key(f)] || f.Raised.Before(s.view.Step.Add(-7*24*time.Hour)) {
			continue
		}
		out = append(out, f)
	}
	return out
}

// View returns a copy of the current view.
func (s *Service) View() View {
	s.mu.Lock()
	defer s.mu.Unlock()
	v := s.view
	v.Zones = append([]ZoneView(nil), v.Zones...)
	for i := range v.Zones {
		v.Zones[i].Nights = append([]NightView(nil), v.Zones[i].Nights...)
	}
	v.Sensors = append([]SensorView(nil), v.Sensors...)
	v.Findings = append([]finding.Finding(nil), v.Findings...)
	if s.alerts != nil {
		if as, err := s.alerts.Alerts(false); err == nil {
			v.Alerts = as
		}
	}
	return v
}
