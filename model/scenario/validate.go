package scenario

import (
	"fmt"
	"math"
	"time"

	"plumbline/model/finding"
	"plumbline/model/network"
	"plumbline/model/telemetry"
)

// Validate returns every problem of the scenario, each an *Error naming
// the file and YAML line: times inside the run, known kinds and modes,
// positive sizes, open fractions in (0, 1), fractions in [0, 1), unique
// sensor ids, sensor faults on listed sensors. With a network it also
// checks that leaks sit on junctions, blockages on links, pressure and
// head sensors on nodes, level sensors on tanks, flow sensors on links,
// and that the weekend pattern exists. Load already calls Validate(s,
// nil); call it again with the network once that is read.
func Validate(s *Scenario, net *network.Network) []error {
	v := validator{s: s}
	v.top()
	v.sensors(net)
	for i := range s.Events {
		v.event(i, net)
	}
	if net != nil && s.WeekendPattern != "" {
		if _, ok := net.Patterns[s.WeekendPattern]; !ok {
			v.add(s.lines["weekend_pattern"], "weekend_pattern %q is not a pattern of the network", s.WeekendPattern)
		}
	}
	return v.errs
}

// validator collects problems.
type validator struct {
	s    *Scenario
	errs []error
}

func (v *validator) add(line int, format string, args ...any) {
	v.errs = append(v.errs, &Error{File: v.s.File, Line: line, Msg: fmt.Sprintf(format, args...)})
}

func (v *validator) addIn(file string, line int, format string, args ...any) {
	v.errs = append(v.errs, &Error{File: file, Line: line, Msg: fmt.Sprintf(format, args...)})
}

// fraction reports whether f is in [0, 1).
func fraction(f float64) bool { return f >= 0 && f < 1 }

// top checks the scenario-wide settings.
func (v *validator) top() {
	s := v.s
	ln := s.lines
	if s.Start.IsZero() && !s.bad["start"] {
		v.add(0, "start is missing (an RFC 3339 time)")
	}
	switch {
	case s.bad["duration"]:
	case s.Duration == 0 && ln["duration"] == 0:
		v.add(0, "duration is missing (a Go duration such as 336h)")
	case s.Duration <= 0:
		v.add(ln["duration"], "duration must be positive, got %s", s.Duration)
	}
	switch {
	case s.bad["step"]:
	case s.Step <= 0:
		v.add(ln["step"], "step must be positive, got %s", s.Step)
	case s.Duration > 0 && s.Step > s.Duration:
		v.add(ln["step"], "step %s is longer than the duration %s", s.Step, s.Duration)
	}
	if s.LoggingInterval <= 0 && !s.bad["logging_interval"] {
		v.add(ln["logging_interval"], "logging_interval must be positive, got %s", s.LoggingInterval)
	}
	if !fraction(s.MissingFraction) {
		v.add(ln["missing_fraction"], "missing_fraction must be in [0, 1), got %g", s.MissingFraction)
	}
	if !fraction(s.LateFraction) {
		v.add(ln["late_fraction"], "late_fraction must be in [0, 1), got %g", s.LateFraction)
	}
	if s.MaxDelay < 0 || (s.LateFraction > 0 && s.MaxDelay == 0) {
		v.add(ln["max_delay"], "max_delay must be positive when late_fraction is set, got %s", s.MaxDelay)
	}
	if !fraction(s.DemandNoise) {
		v.add(ln["demand_noise"], "demand_noise must be in [0, 1), got %g", s.DemandNoise)
	}
	if !fraction(s.DailyVariation) {
		v.add(ln["daily_variation"], "daily_variation must be in [0, 1), got %g", s.DailyVariation)
	}
}

// sensorPlace returns the file and line of sensor i.
func (v *validator) sensorPlace(i int) (string, int) {
	file := v.s.File
	if v.s.SensorsFile != "" {
		file = v.s.SensorsFile
	}
	line := 0
	if i < len(v.s.SensorLines) {
		line = v.s.SensorLines[i]
	}
	return file, line
}

// sensors checks ids are unique and, with a network, that each sensor sits
// on an element that can carry its quantity.
func (v *validator) sensors(net *network.Network) {
	s := v.s
	if len(s.Sensors) == 0 && s.lines["sensors"] != 0 && s.SensorsFile == "" {
		v.add(s.lines["sensors"], "sensors: the list is empty")
	}
	first := map[string]int{}
	for i := range s.Sensors {
		sn := &s.Sensors[i]
		file, line := v.sensorPlace(i)
		if sn.ID != "" {
			if j, dup := first[sn.ID]; dup {
				_, jl := v.sensorPlace(j)
				v.addIn(file, line, "sensors[%d] %s: duplicate id (first at line %d)", i, sn.ID, jl)
			} else {
				first[sn.ID] = i
			}
		}
		if net == nil || sn.At == "" {
			continue
		}
		where := fmt.Sprintf("sensors[%d] %s", i, sn.ID)
		switch sn.Quantity {
		case telemetry.Flow:
			if _, ok := net.LinkIndex(sn.At); !ok {
				v.addIn(file, line, "%s: flow sensor at %q: no such link in the network", where, sn.At)
			}
		case telemetry.Pressure, telemetry.Head:
			if _, ok := net.NodeIndex(sn.At); !ok {
				v.addIn(file, line, "%s: %s sensor at %q: no such node in the network", where, sn.Quantity, sn.At)
			}
		case telemetry.Level:
			k, ok := net.NodeIndex(sn.At)
			switch {
			case !ok:
				v.addIn(file, line, "%s: level sensor at %q: no such node in the network", where, sn.At)
			case net.Nodes[k].Kind != network.Tank:
				v.addIn(file, line, "%s: level sensor at %q: the node is a %s, not a tank", where, sn.At, net.Nodes[k].Kind)
			}
		}
	}
}

// event checks event i.
func (v *validator) event(i int, net *network.Network) {
	s := v.s
	e := &s.Events[i]
	where := fmt.Sprintf("events[%d]", i)
	if e.Kind != "" && e.At != "" {
		where += fmt.Sprintf(" (%s at %s)", e.Kind, e.At)
	}
	bad := func(key, format string, args ...any) {
		v.add(e.line(key), where+": "+format, args...)
	}
	end := s.End()
	spanKnown := !s.Start.IsZero() && s.Duration > 0

	if e.At == "" {
		bad("at", "at is missing")
	}
	switch {
	case e.badStart:
	case e.Start.IsZero():
		bad("start", "start is missing")
	case spanKnown && (e.Start.Before(s.Start) || !e.Start.Before(end)):
		bad("start", "start %s is outside the scenario [%s, %s)", stamp(e.Start), stamp(s.Start), stamp(end))
	}
	if !e.End.IsZero() && !e.badEnd && !e.Start.IsZero() {
		switch {
		case !e.End.After(e.Start):
			bad("end", "end %s is not after start %s", stamp(e.End), stamp(e.Start))
		case spanKnown && e.End.After(end):
			bad("end", "end %s is after the end of the scenario %s", stamp(e.End), stamp(end))
		}
	}
	if e.Ramp < 0 {
		bad("ramp", "ramp must not be negative, got %s", e.Ramp)
	}

	// Keys that belong to other kinds are mistakes worth naming.
	notFor := func(key string, set bool) {
		if set {
			bad(key, "%s has no meaning for a %s", key, e.Kind)
		}
	}
	switch e.Kind {
	case finding.Leak:
		if !(e.SizeLPS > 0) || math.IsInf(e.SizeLPS, 0) {
			bad("size_lps", "size_lps must be positive, got %g", e.SizeLPS)
		}
		if e.Exponent < 0 || e.Exponent > MaxLeakExponent || math.IsNaN(e.Exponent) {
			bad("exponent", "exponent (FAVAD N1) must be in (0, %g], got %g", MaxLeakExponent, e.Exponent)
		}
		if e.Burst && e.Ramp > 0 {
			bad("ramp", "a burst is sudden: it has no ramp (got %s)", e.Ramp)
		}
		notFor("open_fraction", e.OpenFraction != 0)
		notFor("mode", e.Mode != "")
		notFor("amount", e.Amount != 0)
		notFor("every", e.Every != 0)
		if net != nil && e.At != "" {
			k, ok := net.NodeIndex(e.At)
			switch {
			case !ok:
				if _, isLink := net.LinkIndex(e.At); isLink {
					bad("at", "%q is a link; a leak is placed at a junction", e.At)
				} else {
					bad("at", "no node %q in the network", e.At)
				}
			case net.Nodes[k].Kind != network.Junction:
				bad("at", "%q is a %s; a leak is placed at a junction", e.At, net.Nodes[k].Kind)
			}
		}
	case finding.Blockage:
		if !(e.OpenFraction > 0 && e.OpenFraction < 1) {
			bad("open_fraction", "open_fraction must be in (0, 1), got %g", e.OpenFraction)
		}
		notFor("size_lps", e.SizeLPS != 0)
		notFor("exponent", e.Exponent != 0)
		notFor("burst", e.Burst)
		notFor("mode", e.Mode != "")
		notFor("amount", e.Amount != 0)
		notFor("every", e.Every != 0)
		if net != nil && e.At != "" {
			if _, ok := net.LinkIndex(e.At); !ok {
				if _, isNode := net.NodeIndex(e.At); isNode {
					bad("at", "%q is a node; a blockage is placed on a link", e.At)
				} else {
					bad("at", "no link %q in the network", e.At)
				}
			}
		}
	case finding.SensorFault:
		switch e.Mode {
		case "":
			bad("mode", "mode is missing (stuck, drift, spike or offset)")
		case Stuck:
			if e.Amount != 0 {
				bad("amount", "amount is not used by mode stuck (got %g)", e.Amount)
			}
		case Drift, Spike, Offset:
			if e.Amount == 0 || math.IsNaN(e.Amount) || math.IsInf(e.Amount, 0) {
				bad("amount", "amount must be a non-zero number for mode %s", e.Mode)
			}
		default:
			bad("mode", "unknown mode %q (stuck, drift, spike or offset)", e.Mode)
		}
		if e.Every < 0 || (e.Mode == Spike && e.Every == 0) {
			bad("every", "every must be positive, got %s", e.Every)
		}
		if e.Every != 0 && e.Mode != Spike && e.Mode != "" {
			bad("every", "every is used by mode spike only")
		}
		notFor("size_lps", e.SizeLPS != 0)
		notFor("exponent", e.Exponent != 0)
		notFor("burst", e.Burst)
		notFor("open_fraction", e.OpenFraction != 0)
		notFor("ramp", e.Ramp != 0)
		if e.At != "" {
			if _, ok := s.Sensor(e.At); !ok {
				bad("at", "no sensor %q in the scenario's sensors", e.At)
			}
		}
	case "":
		bad("kind", "kind is missing (leak, blockage or sensor-fault)")
	default:
		hint := ""
		if e.Kind == "burst" {
			hint = "; a burst is a leak with burst: true"
		}
		bad("kind", "unknown kind %q (leak, blockage or sensor-fault)%s", e.Kind, hint)
	}
}

// stamp formats a time for messages.
func stamp(t time.Time) string {
	return t.Format("2006-01-02T15:04:05Z07:00")
}
