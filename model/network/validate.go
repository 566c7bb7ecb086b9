package network

import (
	"fmt"
	"math"
	"sort"
)

// Validate checks a Network (typically one built in code; Read and Parse
// run the same checks on a file) and returns every problem found,
// errors and warnings. It checks ids (unique across nodes and links,
// non-empty), values (positive diameters, lengths and roughness; falling
// pump curves; tank levels within their bounds; leak coefficients;
// valve settings), settings (viscosity, pattern step, patterns and the
// patterns junctions name) and topology: a link from a node to itself, a
// junction with no link, and any connected part of the network without a
// reservoir or tank (one junction of it is named, with the count).
// Problems carry the feature id; Index is -1 and Line 0.
func Validate(n *Network) []Problem {
	v := validator{n: n}
	return v.run()
}

// Pump curve and roughness bounds used by the checks.
const (
	// hwLow and hwHigh bound the Hazen-Williams C of real pipes: about 40
	// for badly tuberculated old cast iron to 150-160 for new plastic
	// (common practice, from memory of the usual C-factor tables); outside
	// them a warning.
	hwLow, hwHigh = 40, 160
	// dwHigh is the largest absolute roughness (mm) that is not suspect;
	// badly corroded cast iron reaches a few mm (common practice, from
	// memory). Above it the value is probably a Hazen-Williams C.
	dwHigh = 10
	// leakExpLow and leakExpHigh bound the FAVAD exponent N1 found in
	// field tests, 0.5 (rigid orifice) to about 2.5 (from memory of
	// Thornton and Lambert's reviews); outside them a warning.
	leakExpLow, leakExpHigh = 0.5, 2.5
)

// validator runs the checks; loc maps a node (node=true) or link index
// to its feature index and line (nil: not from a file).
type validator struct {
	n            *Network
	file         string
	loc          func(node bool, i int) (index, line int)
	refsChecked  bool // link ends of -1 were already reported by the reader
	settingLines int  // line of the "network" member
	probs        []Problem
}

func (v *validator) place(node bool, i int) (int, int) {
	if v.loc == nil {
		return -1, 0
	}
	return v.loc(node, i)
}

func (v *validator) nodeP(sev Severity, i int, prop, format string, args ...any) {
	idx, line := v.place(true, i)
	v.probs = append(v.probs, Problem{File: v.file, Line: line, Index: idx, Feature: v.n.Nodes[i].ID,
		Property: prop, Message: fmt.Sprintf(format, args...), Severity: sev})
}

func (v *validator) linkP(sev Severity, i int, prop, format string, args ...any) {
	idx, line := v.place(false, i)
	v.probs = append(v.probs, Problem{File: v.file, Line: line, Index: idx, Feature: v.n.Links[i].ID,
		Property: prop, Message: fmt.Sprintf(format, args...), Severity: sev})
}

func (v *validator) fileP(sev Severity, prop, format string, args ...any) {
	v.probs = append(v.probs, Problem{File: v.file, Line: v.settingLines, Index: -1,
		Property: prop, Message: fmt.Sprintf(format, args...), Severity: sev})
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

func (v *validator) run() []Problem {
	if len(v.n.Nodes) == 0 {
		v.fileP(Error, "features", "the network has no nodes")
	}
	v.settings()
	v.ids()
	for i := range v.n.Nodes {
		v.node(i)
	}
	for i := range v.n.Links {
		v.link(i)
	}
	v.topology()
	return v.probs
}

func (v *validator) settings() {
	n := v.n
	if n.Headloss != HazenWilliams && n.Headloss != DarcyWeisbach {
		v.fileP(Error, "network.headloss", "unknown head-loss formula %d", n.Headloss)
	}
	if !(n.Viscosity > 0) || !finite(n.Viscosity) {
		v.fileP(Error, "network.viscosity_m2s", "must be positive, got %g", n.Viscosity)
	} else if n.Viscosity < 1e-7 || n.Viscosity > 1e-5 {
		// Water is 1.79e-6 m²/s at 0 °C and 0.29e-6 at 100 °C (common
		// handbook values, from memory).
		v.fileP(Warning, "network.viscosity_m2s", "%g m²/s is far from water's (about 1e-6): check the unit", n.Viscosity)
	}
	if n.PatternStep <= 0 {
		v.fileP(Error, "network.pattern_step", "must be positive, got %v", n.PatternStep)
	}
	names := make([]string, 0, len(n.Patterns))
	for name := range n.Patterns {
		names = append(names, name)
	}
	sort.Strings(names)
	for _, name := range names {
		p := n.Patterns[name]
		prop := "network.patterns." + name
		if name == "" {
			v.fileP(Error, prop, "a pattern needs a name")
		}
		if len(p) == 0 {
			v.fileP(Error, prop, "pattern %q is empty: give one or more multipliers", name)
		}
		for k, x := range p {
			if !(x >= 0) || !finite(x) {
				v.fileP(Error, prop, "pattern %q: multiplier %d is %g, must not be negative", name, k+1, x)
				break
			}
		}
	}
}

// ids checks that ids are present and unique across nodes and links.
func (v *validator) ids() {
	type first struct {
		node bool
		i    int
	}
	seen := make(map[string]first, len(v.n.Nodes)+len(v.n.Links))
	where := func(f first) string {
		idx, line := v.place(f.node, f.i)
		switch {
		case line > 0:
			return fmt.Sprintf("line %d", line)
		case idx >= 0:
			return fmt.Sprintf("features[%d]", idx)
		case f.node:
			return fmt.Sprintf("node %d", f.i)
		}
		return fmt.Sprintf("link %d", f.i)
	}
	check := func(node bool, i int, id string) {
		add := v.linkP
		if node {
			add = v.nodeP
		}
		if id == "" {
			add(Error, i, "id", "missing: every node and link needs a unique id")
			return
		}
		if f, dup := seen[id]; dup {
			add(Error, i, "id", "duplicate id %q (first used at %s; nodes and links share one id space)", id, where(f))
			return
		}
		seen[id] = first{node, i}
	}
	for i := range v.n.Nodes {
		check(true, i, v.n.Nodes[i].ID)
	}
	for i := range v.n.Links {
		check(false, i, v.n.Links[i].ID)
	}
}

func (v *validator) node(i int) {
	nd := &v.n.Nodes[i]
	if nd.HasCoord && (!finite(nd.Coord.Lon) || !finite(nd.Coord.Lat) ||
		math.Abs(nd.Coord.Lon) > 180 || math.Abs(nd.Coord.Lat) > 90) {
		v.nodeP(Error, i, "geometry", "[%g, %g] is not a WGS84 longitude, latitude", nd.Coord.Lon, nd.Coord.Lat)
	}
	for _, f := range []struct {
		prop string
		x    float64
	}{{"elevation_m", nd.Elevation}, {"head_m", nd.Head}, {"demand_lps", nd.Demand},
		{"leak_coeff", nd.LeakCoeff}, {"leak_exponent", nd.LeakExponent}, {"level_m", nd.Level},
		{"min_level_m", nd.MinLevel}, {"diameter_m", nd.TankDiameter}} {
		if !finite(f.x) {
			v.nodeP(Error, i, f.prop, "must be a finite number, got %g", f.x)
			return
		}
	}
	switch nd.Kind {
	case Junction:
		if nd.Pattern != "" {
			if _, ok := v.n.Patterns[nd.Pattern]; !ok {
				v.nodeP(Error, i, "pattern", "unknown pattern %q (not in network.patterns)", nd.Pattern)
			}
		}
		if nd.LeakCoeff < 0 {
			v.nodeP(Error, i, "leak_coeff", "must not be negative, got %g", nd.LeakCoeff)
		}
		switch {
		case nd.LeakExponent < 0:
			v.nodeP(Error, i, "leak_exponent", "must not be negative, got %g", nd.LeakExponent)
		case nd.LeakCoeff > 0 && nd.LeakExponent == 0:
			v.nodeP(Error, i, "leak_exponent", "must be positive when leak_coeff is given, got 0")
		case nd.LeakCoeff > 0 && (nd.LeakExponent < leakExpLow || nd.LeakExponent > leakExpHigh):
			v.nodeP(Warning, i, "leak_exponent", "%g is outside the %g-%g found in field tests", nd.LeakExponent, leakExpLow, leakExpHigh)
		}
	case Reservoir:
	case Tank:
		if nd.MinLevel < 0 {
			v.nodeP(Error, i, "min_level_m", "must not be negative, got %g", nd.MinLevel)
		}
		if math.IsNaN(nd.MaxLevel) {
			v.nodeP(Error, i, "max_level_m", "must be a number")
		} else if nd.MaxLevel < nd.MinLevel {
			v.nodeP(Error, i, "max_level_m", "%g is below min_level_m %g", nd.MaxLevel, nd.MinLevel)
		}
		if nd.Level < nd.MinLevel || nd.Level > nd.MaxLevel {
			v.nodeP(Error, i, "level_m", "%g is outside min_level_m %g .. max_level_m %g", nd.Level, nd.MinLevel, nd.MaxLevel)
		}
		if nd.TankDiameter < 0 {
			v.nodeP(Error, i, "diameter_m", "must be positive, got %g", nd.TankDiameter)
		}
	default:
		v.nodeP(Error, i, "kind", "unknown node kind %v", nd.Kind)
	}
}

func (v *validator) link(i int) {
	l := &v.n.Links[i]
	nn := len(v.n.Nodes)
	ends := [2]struct {
		prop string
		k    int
	}{{"from", l.From}, {"to", l.To}}
	for _, e := range ends {
		if e.k == -1 && v.refsChecked {
			continue
		}
		if e.k < 0 || e.k >= nn {
			v.linkP(Error, i, e.prop, "node index %d out of range (%d nodes)", e.k, nn)
		}
	}
	if l.From == l.To && l.From >= 0 && l.From < nn {
		v.linkP(Error, i, "to", "link from node %q to itself", v.n.Nodes[l.From].ID)
	}
	if l.From >= 0 && l.From < nn && l.To >= 0 && l.To < nn && l.From != l.To {
		v.linkPlace(i)
	}
	if l.Status != Open && l.Status != Closed {
		v.linkP(Error, i, "status", "unknown status %d", l.Status)
	}
	for k, pt := range l.Geometry {
		if !finite(pt.Lon) || !finite(pt.Lat) || math.Abs(pt.Lon) > 180 || math.Abs(pt.Lat) > 90 {
			v.linkP(Error, i, "geometry", "position %d: [%g, %g] is not a WGS84 longitude, latitude", k, pt.Lon, pt.Lat)
			break
		}
	}
	switch l.Kind {
	case Pipe:
		v.positive(i, "diameter_mm", l.Diameter)
		v.positive(i, "length_m", l.Length)
		v.positive(i, "roughness", l.Roughness)
		if !(l.MinorLoss >= 0) || !finite(l.MinorLoss) {
			v.linkP(Error, i, "minor_loss", "must not be negative, got %g", l.MinorLoss)
		}
		if l.Diameter > 0 && l.Diameter < 10 {
			v.linkP(Warning, i, "diameter_mm", "%g mm is very small: diameters are in millimetres", l.Diameter)
		}
		if l.Roughness > 0 && finite(l.Roughness) {
			switch v.n.Headloss {
			case HazenWilliams:
				if l.Roughness < hwLow || l.Roughness > hwHigh {
					v.linkP(Warning, i, "roughness", "Hazen-Williams C %g is outside the usual %d-%d", l.Roughness, hwLow, hwHigh)
				}
			case DarcyWeisbach:
				if l.Roughness > dwHigh {
					v.linkP(Warning, i, "roughness", "absolute roughness %g mm is very large for darcy-weisbach (a Hazen-Williams C?)", l.Roughness)
				}
			}
		}
		if l.Installed != 0 && (l.Installed < 1800 || l.Installed > 2100) {
			v.linkP(Warning, i, "installed", "year %d looks wrong", l.Installed)
		}
	case Pump:
		v.pumpCurve(i)
		if !(l.Speed >= 0) || !finite(l.Speed) {
			v.linkP(Error, i, "speed", "must not be negative, got %g", l.Speed)
		}
	case Valve:
		v.positive(i, "diameter_mm", l.Diameter)
		if !finite(l.Setting) {
			v.linkP(Error, i, "setting", "must be a finite number, got %g", l.Setting)
			return
		}
		switch l.Valve {
		case PressureReducing, PressureSustaining, FlowControl, Throttle:
			if !l.HasSetting {
				v.linkP(Error, i, "setting", "a %s valve needs a setting (%s)", l.Valve, settingUnit(l.Valve))
			} else if l.Setting < 0 {
				v.linkP(Error, i, "setting", "must not be negative, got %g (%s)", l.Setting, settingUnit(l.Valve))
			}
		case Isolating:
			if l.HasSetting {
				v.linkP(Warning, i, "setting", "an isolating valve is open or closed (status); its setting is not used")
			}
		case NotAValve:
			v.linkP(Error, i, "valve", "required for a valve, missing")
		default:
			v.linkP(Error, i, "valve", "unknown valve type %d", l.Valve)
		}
	default:
		v.linkP(Error, i, "kind", "unknown link kind %v", l.Kind)
	}
}

// endTolerance is how far (m) a link's geometry may end from its nodes'
// points before a warning: mapping and snapping slack (common practice,
// no source).
const endTolerance = 25

// linkPlace compares a link with the positions of its end nodes: a pipe
// cannot be shorter than the great circle between its ends (less a
// 10 % and 1 m allowance for schematic coordinates), and a polyline
// should start and end at its nodes (either way round).
func (v *validator) linkPlace(i int) {
	l := &v.n.Links[i]
	a, b := &v.n.Nodes[l.From], &v.n.Nodes[l.To]
	if !a.HasCoord || !b.HasCoord {
		return
	}
	if l.Kind == Pipe && l.Length > 0 {
		if straight := GreatCircle(a.Coord, b.Coord); l.Length < 0.9*straight-1 {
			v.linkP(Warning, i, "length_m", "%g m is shorter than the %.0f m between nodes %s and %s", l.Length, straight, a.ID, b.ID)
		}
	}
	if len(l.Geometry) >= 2 {
		g0, g1 := l.Geometry[0], l.Geometry[len(l.Geometry)-1]
		fwd := max(GreatCircle(g0, a.Coord), GreatCircle(g1, b.Coord))
		rev := max(GreatCircle(g0, b.Coord), GreatCircle(g1, a.Coord))
		if off := min(fwd, rev); off > endTolerance {
			v.linkP(Warning, i, "geometry", "the line ends %.0f m from its nodes %s and %s: check from and to", off, a.ID, b.ID)
		}
	}
}

// settingUnit says what a valve type's setting is.
func settingUnit(t ValveType) string {
	switch t {
	case PressureReducing:
		return "outlet pressure, m"
	case PressureSustaining:
		return "inlet pressure, m"
	case FlowControl:
		return "flow, L/s"
	case Throttle:
		return "loss coefficient"
	}
	return ""
}

func (v *validator) positive(i int, prop string, x float64) {
	if !(x > 0) || !finite(x) {
		v.linkP(Error, i, prop, "must be positive, got %g", x)
	}
}

// pumpCurve checks a pump curve: one design point (flow > 0, head > 0),
// or three or more points with flow rising strictly from zero or more
// and head falling strictly, never below zero.
func (v *validator) pumpCurve(i int) {
	c := v.n.Links[i].Curve
	for k, pt := range c {
		if !finite(pt[0]) || !finite(pt[1]) {
			v.linkP(Error, i, "curve", "point %d: values must be finite", k+1)
			return
		}
	}
	switch len(c) {
	case 0:
		v.linkP(Error, i, "curve", "required for a pump, missing or empty")
		return
	case 1:
		if !(c[0][0] > 0) || !(c[0][1] > 0) {
			v.linkP(Error, i, "curve", "a one-point curve is the design point: flow and head must be positive, got [%g, %g]", c[0][0], c[0][1])
		}
		return
	case 2:
		v.linkP(Error, i, "curve", "want one point or three or more, got 2")
		return
	}
	if c[0][0] < 0 {
		v.linkP(Error, i, "curve", "point 1: flow must not be negative, got %g", c[0][0])
		return
	}
	for k := 1; k < len(c); k++ {
		if !(c[k][0] > c[k-1][0]) {
			v.linkP(Error, i, "curve", "point %d: flow must rise from point to point, %g after %g", k+1, c[k][0], c[k-1][0])
			return
		}
		if !(c[k][1] < c[k-1][1]) {
			v.linkP(Error, i, "curve", "point %d: head must fall as flow rises, %g m at %g L/s after %g m at %g L/s", k+1, c[k][1], c[k][0], c[k-1][1], c[k-1][0])
			return
		}
	}
	if last := c[len(c)-1]; last[1] < 0 {
		v.linkP(Error, i, "curve", "point %d: head must not be negative, got %g", len(c), last[1])
	}
}

// dsu is a union-find over node indices.
type dsu []int

func newDSU(n int) dsu {
	d := make(dsu, n)
	for i := range d {
		d[i] = i
	}
	return d
}

func (d dsu) find(x int) int {
	for d[x] != x {
		d[x] = d[d[x]]
		x = d[x]
	}
	return x
}

func (d dsu) union(a, b int) {
	ra, rb := d.find(a), d.find(b)
	if ra != rb {
		if ra < rb {
			d[rb] = ra
		} else {
			d[ra] = rb
		}
	}
}

// topology finds junctions with no link, parts of the network with no
// fixed-head source, and (as a warning) parts cut off from every source
// by closed links.
func (v *validator) topology() {
	n := v.n
	nn := len(n.Nodes)
	all, open := newDSU(nn), newDSU(nn)
	degree := make([]int, nn)
	for i := range n.Links {
		l := &n.Links[i]
		if l.From < 0 || l.From >= nn || l.To < 0 || l.To >= nn {
			continue
		}
		degree[l.From]++
		degree[l.To]++
		all.union(l.From, l.To)
		if l.Status == Open {
			open.union(l.From, l.To)
		}
	}
	sourced := func(d dsu) map[int]bool {
		s := map[int]bool{}
		for i := range n.Nodes {
			if n.Nodes[i].IsFixedHead() {
				s[d.find(i)] = true
			}
		}
		return s
	}
	// unsourced parts: count junctions per root, name the first junction.
	type part struct{ first, count int }
	parts := func(d dsu, src map[int]bool) ([]int, map[int]*part) {
		m := map[int]*part{}
		var roots []int
		for i := range n.Nodes {
			if n.Nodes[i].Kind != Junction || degree[i] == 0 {
				continue
			}
			r := d.find(i)
			if src[r] {
				continue
			}
			if p, ok := m[r]; ok {
				p.count++
				continue
			}
			m[r] = &part{first: i, count: 1}
			roots = append(roots, r)
		}
		return roots, m
	}
	for i := range n.Nodes {
		if degree[i] != 0 {
			continue
		}
		if k, ok := n.NodeIndex(n.Nodes[i].ID); ok && k != i {
			continue // a duplicate id: links reach the first one, reported
		}
		if n.Nodes[i].Kind == Junction {
			v.nodeP(Error, i, "", "isolated junction: no link connects it to the network")
		} else {
			v.nodeP(Warning, i, "", "%s is not connected to any link", n.Nodes[i].Kind)
		}
	}
	srcAll := sourced(all)
	roots, m := parts(all, srcAll)
	for _, r := range roots {
		p := m[r]
		v.nodeP(Error, p.first, "", "no reservoir or tank feeds the part of the network holding this junction (%s)", countJunctions(p.count))
	}
	v.aboveSources(all, degree)
	srcOpen := sourced(open)
	roots, m = parts(open, srcOpen)
	for _, r := range roots {
		p := m[r]
		if !srcAll[all.find(p.first)] {
			continue // already an error
		}
		v.nodeP(Warning, p.first, "", "closed links cut off the part of the network holding this junction (%s) from every reservoir and tank", countJunctions(p.count))
	}
}

// aboveSources warns about junctions higher than every fixed head of
// their connected part when that part has no pump: at no flow their head
// equals at most the highest source head (energy conservation: friction
// only lowers head), so their pressure is negative whatever the demand.
func (v *validator) aboveSources(d dsu, degree []int) {
	n := v.n
	top := map[int]float64{}
	pumped := map[int]bool{}
	for i := range n.Nodes {
		if nd := &n.Nodes[i]; nd.IsFixedHead() {
			r := d.find(i)
			h := nd.FixedHead()
			if nd.Kind == Tank && !math.IsInf(nd.MaxLevel, 1) {
				h = nd.Elevation + nd.MaxLevel
			}
			if old, ok := top[r]; !ok || h > old {
				top[r] = h
			}
		}
	}
	for i := range n.Links {
		if l := &n.Links[i]; l.Kind == Pump && l.From >= 0 && l.From < len(n.Nodes) {
			pumped[d.find(l.From)] = true
		}
	}
	for i := range n.Nodes {
		nd := &n.Nodes[i]
		if nd.Kind != Junction || degree[i] == 0 {
			continue
		}
		r := d.find(i)
		if h, ok := top[r]; ok && !pumped[r] && finite(nd.Elevation) && nd.Elevation > h {
			v.nodeP(Warning, i, "elevation_m", "%g m is above every reservoir and tank head of its part of the network (highest %g m) and no pump serves it: the pressure here is negative", nd.Elevation, h)
		}
	}
}

func countJunctions(k int) string {
	if k == 1 {
		return "1 junction"
	}
	return fmt.Sprintf("%d junctions", k)
}
