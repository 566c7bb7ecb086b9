package alerts

import (
	"slices"
	"time"

	"plumbline/model/finding"
)

// severityOf applies the severity rules of f's kind; Low when none fits.
func (c *Config) severityOf(f finding.Finding) Severity {
	var rules []SeverityRule
	switch f.Kind {
	case finding.Leak:
		rules = c.Severity.Leak
	case finding.Blockage:
		rules = c.Severity.Blockage
	case finding.SensorFault:
		rules = c.Severity.SensorFault
	}
	for _, r := range rules {
		if f.SizeLPS < r.MinSizeLPS {
			continue
		}
		if r.MaxOpenFraction > 0 && f.OpenFrac > r.MaxOpenFraction {
			continue
		}
		return r.Level
	}
	return Low
}

// routeFor returns the first route whose match fits, or nil.
func (c *Config) routeFor(zone string, kind finding.Kind, sev Severity) *Route {
	for i := range c.Routes {
		m := c.Routes[i].Match
		if len(m.Zones) > 0 && !slices.Contains(m.Zones, zone) {
			continue
		}
		if len(m.Kinds) > 0 && !slices.Contains(m.Kinds, kind) {
			continue
		}
		if len(m.Severities) > 0 && !slices.Contains(m.Severities, sev) {
			continue
		}
		return &c.Routes[i]
	}
	return nil
}

// routeNamed returns the route called name, or nil.
func (c *Config) routeNamed(name string) *Route {
	for i := range c.Routes {
		if c.Routes[i].Name == name {
			return &c.Routes[i]
		}
	}
	return nil
}

// OnCall returns the receiver ids on call at t: the people of every shift
// that covers t in the rota's time zone. A shift that starts on one of its
// days covers the following Start-to-End window, past midnight if End is
// earlier than Start, so a night shift listed for "fri" runs into
// Saturday morning. Wall-clock times follow the zone's daylight saving.
func (r *Rota) OnCall(t time.Time) []string {
	loc := r.loc
	if loc == nil {
		loc = time.UTC
	}
	lt := t.In(loc)
	minute := lt.Hour()*60 + lt.Minute()
	today := uint(lt.Weekday())
	yesterday := (today + 6) % 7
	var out []string
	for _, s := range r.Shifts {
		length := s.end - s.start
		if length <= 0 {
			length += 24 * 60
		}
		in := false
		if s.days&(1<<today) != 0 {
			if off := minute - s.start; off >= 0 && off < length {
				in = true
			}
		}
		if s.days&(1<<yesterday) != 0 {
			if off := minute + 24*60 - s.start; off >= 0 && off < length {
				in = true
			}
		}
		if in {
			for _, p := range s.People {
				if !slices.Contains(out, p) {
					out = append(out, p)
				}
			}
		}
	}
	return out
}
