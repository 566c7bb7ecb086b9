package network

import (
	"encoding/json"
	"fmt"
	"maps"
	"time"
)

// NodeKind says what a node is: a junction with demand, or a fixed-head
// source (reservoir or tank).
type NodeKind uint8

const (
	// Junction is a node whose head is unknown and whose outflow (demand
	// and leak) is given.
	Junction NodeKind = iota
	// Reservoir is a fixed-head source of unlimited volume.
	Reservoir
	// Tank is a storage node: a fixed head within one steady state, its
	// level carried between steps by an extended-period run.
	Tank
)

// String returns the GeoJSON `kind` word of the node kind.
func (k NodeKind) String() string {
	switch k {
	case Junction:
		return "junction"
	case Reservoir:
		return "reservoir"
	case Tank:
		return "tank"
	}
	return fmt.Sprintf("NodeKind(%d)", uint8(k))
}

// LinkKind says what a link is.
type LinkKind uint8

const (
	// Pipe is a conduit with friction and minor losses.
	Pipe LinkKind = iota
	// Pump adds head along its curve.
	Pump
	// Valve is a control or isolating valve; see ValveType.
	Valve
)

// String returns the GeoJSON `kind` word of the link kind.
func (k LinkKind) String() string {
	switch k {
	case Pipe:
		return "pipe"
	case Pump:
		return "pump"
	case Valve:
		return "valve"
	}
	return fmt.Sprintf("LinkKind(%d)", uint8(k))
}

// ValveType is the control a valve link performs.
type ValveType uint8

const (
	// NotAValve is the zero value, for pipes and pumps.
	NotAValve ValveType = iota
	// PressureReducing holds its outlet pressure (Setting, m) at most.
	PressureReducing
	// PressureSustaining holds its inlet pressure (Setting, m) at least.
	PressureSustaining
	// FlowControl limits its flow to Setting (L/s).
	FlowControl
	// Throttle adds a minor loss of coefficient Setting (dimensionless).
	Throttle
	// Isolating is open or closed, nothing else.
	Isolating
)

// String returns the GeoJSON `valve` word of the valve type.
func (v ValveType) String() string {
	switch v {
	case NotAValve:
		return ""
	case PressureReducing:
		return "pressure-reducing"
	case PressureSustaining:
		return "pressure-sustaining"
	case FlowControl:
		return "flow-control"
	case Throttle:
		return "throttle"
	case Isolating:
		return "isolating"
	}
	return fmt.Sprintf("ValveType(%d)", uint8(v))
}

// ParseValveType maps a GeoJSON `valve` word to its ValveType.
func ParseValveType(s string) (ValveType, bool) {
	for v := PressureReducing; v <= Isolating; v++ {
		if v.String() == s {
			return v, true
		}
	}
	return NotAValve, false
}

// Status is the status a link is given in the network file (or by an
// operator): open or closed. The solver's own states (active valve,
// check valve shut) are kept by the solver, not here.
type Status uint8

const (
	// Open lets water through (the default).
	Open Status = iota
	// Closed is a link that carries no flow.
	Closed
)

// String returns the GeoJSON `status` word.
func (s Status) String() string {
	if s == Closed {
		return "closed"
	}
	return "open"
}

// HeadlossFormula selects the friction law of every pipe in a network.
type HeadlossFormula uint8

const (
	// HazenWilliams: roughness is the C factor.
	HazenWilliams HeadlossFormula = iota
	// DarcyWeisbach: roughness is the absolute roughness in mm, the
	// friction factor from Colebrook-White.
	DarcyWeisbach
)

// String returns the file word of the formula.
func (f HeadlossFormula) String() string {
	if f == DarcyWeisbach {
		return "darcy-weisbach"
	}
	return "hazen-williams"
}

// DefaultViscosity is the kinematic viscosity of water at 20 °C, m²/s
// (common practice; shared/CONTRACT.md default).
const DefaultViscosity = 1.004e-6

// DefaultPatternStep is the time step of demand patterns when a file gives none.
const DefaultPatternStep = time.Hour

// Point is a WGS84 position: longitude then latitude, as RFC 7946 orders them.
type Point struct {
	Lon, Lat float64
}

// Node is a junction, reservoir or tank. Units are canonical
// (shared/CONTRACT.md): m, L/s.
type Node struct {
	ID   string
	Kind NodeKind
	// Coord is the node's position; HasCoord is false for a null geometry.
	Coord    Point
	HasCoord bool
	// Elevation is the ground level of a junction and the bottom of a tank,
	// m. For a reservoir it equals Head.
	Elevation float64
	// Head is a reservoir's fixed head, m.
	Head float64
	// Demand is a junction's base demand, L/s.
	Demand float64
	// Pattern names the demand pattern; empty means a constant multiplier 1.
	Pattern string
	// Zone is the district (pressure zone or DMA) the node belongs to.
	Zone string
	// LeakCoeff and LeakExponent give a fixed leak outflow
	// q = LeakCoeff · p^LeakExponent (q in L/s, p in m), FAVAD (May 1994).
	LeakCoeff, LeakExponent float64
	// Level is a tank's initial water level above its bottom, m; MinLevel
	// and MaxLevel bound it; TankDiameter gives its plan area (m). The
	// reader sets MaxLevel to +Inf when the file gives no max_level_m
	// (no upper bound) and TankDiameter to 0 when it gives no diameter_m
	// (plan area unknown).
	Level, MinLevel, MaxLevel, TankDiameter float64
	// Extra keeps the feature's properties this package does not know
	// (names, labels, asset numbers), compact JSON by key, so that a file
	// read and written again keeps them. Nil when there are none.
	Extra map[string]json.RawMessage
}

// IsFixedHead reports whether the node's head is given, not solved for.
func (n *Node) IsFixedHead() bool { return n.Kind != Junction }

// FixedHead returns the head of a reservoir, or a tank's bottom plus level.
// It is meaningless for a junction.
func (n *Node) FixedHead() float64 {
	if n.Kind == Tank {
		return n.Elevation + n.Level
	}
	return n.Head
}

// Link is a pipe, pump or valve between two nodes.
type Link struct {
	ID   string
	Kind LinkKind
	// From and To are node indices into Network.Nodes; positive flow runs
	// from From to To.
	From, To int
	// Length in m (pipes), Diameter in mm (pipes and valves).
	Length, Diameter float64
	// Roughness is the Hazen-Williams C or the Darcy-Weisbach absolute
	// roughness in mm, per Network.Headloss.
	Roughness float64
	// MinorLoss is the minor-loss coefficient K (head loss K·v²/2g).
	MinorLoss float64
	Status    Status
	// CheckValve lets a pipe carry flow only From→To.
	CheckValve bool
	// Material, Installed (year) and Group describe the pipe for calibration.
	Material  string
	Installed int
	Group     string
	// Curve is a pump's head curve as (flow L/s, head m) points.
	Curve [][2]float64
	// Speed is a pump's relative speed (1 = nominal).
	Speed float64
	// Valve is the valve type; Setting its setting in the type's unit.
	Valve      ValveType
	Setting    float64
	HasSetting bool
	// Geometry is the link's polyline; empty for a null geometry.
	Geometry []Point
	// Extra keeps unknown feature properties, as Node.Extra does.
	Extra map[string]json.RawMessage
}

// Network is a water distribution network: nodes, links and the file-wide
// settings. Build one with New (or a reader) so that the id indexes hold;
// a Network is not safe for concurrent mutation but may be read by many
// goroutines.
type Network struct {
	Nodes       []Node
	Links       []Link
	Headloss    HeadlossFormula
	Viscosity   float64 // m²/s
	Patterns    map[string][]float64
	PatternStep time.Duration
	// Extra keeps the file's unknown top-level members (compact JSON by
	// key) so that a rewrite keeps them. Nil when there are none.
	Extra map[string]json.RawMessage

	nodeIndex map[string]int
	linkIndex map[string]int
}

// New returns a network of the given nodes and links with default settings.
// Link From/To must already be node indices. It builds the id indexes; a
// duplicate id keeps its first index (validation reports duplicates).
func New(nodes []Node, links []Link) *Network {
	n := &Network{
		Nodes:       nodes,
		Links:       links,
		Viscosity:   DefaultViscosity,
		Patterns:    map[string][]float64{},
		PatternStep: DefaultPatternStep,
	}
	n.Reindex()
	return n
}

// Reindex rebuilds the id indexes after Nodes or Links were changed.
func (n *Network) Reindex() {
	n.nodeIndex = make(map[string]int, len(n.Nodes))
	for i := range n.Nodes {
		if _, dup := n.nodeIndex[n.Nodes[i].ID]; !dup {
			n.nodeIndex[n.Nodes[i].ID] = i
		}
	}
	n.linkIndex = make(map[string]int, len(n.Links))
	for i := range n.Links {
		if _, dup := n.linkIndex[n.Links[i].ID]; !dup {
			n.linkIndex[n.Links[i].ID] = i
		}
	}
}

// NodeIndex returns the index of the node with the given id.
func (n *Network) NodeIndex(id string) (int, bool) {
	i, ok := n.nodeIndex[id]
	return i, ok
}

// LinkIndex returns the index of the link with the given id.
func (n *Network) LinkIndex(id string) (int, bool) {
	i, ok := n.linkIndex[id]
	return i, ok
}

// PatternValue returns the multiplier of the named pattern at time offset t
// from the start of the pattern (patterns repeat). An empty or unknown name
// gives 1.
func (n *Network) PatternValue(name string, t time.Duration) float64 {
	p := n.Patterns[name]
	if len(p) == 0 {
		return 1
	}
	step := n.PatternStep
	if step <= 0 {
		step = DefaultPatternStep
	}
	k := int(t/step) % len(p)
	if k < 0 {
		k += len(p)
	}
	return p[k]
}

// Clone returns a deep copy of the network.
func (n *Network) Clone() *Network {
	c := *n
	c.Nodes = append([]Node(nil), n.Nodes...)
	for i := range c.Nodes {
		c.Nodes[i].Extra = maps.Clone(c.Nodes[i].Extra)
	}
	c.Links = make([]Link, len(n.Links))
	for i, l := range n.Links {
		l.Curve = append([][2]float64(nil), l.Curve...)
		l.Geometry = append([]Point(nil), l.Geometry...)
		l.Extra = maps.Clone(l.Extra)
		c.Links[i] = l
	}
	c.Extra = maps.Clone(n.Extra)
	c.Patterns = make(map[string][]float64, len(n.Patterns))
	for k, v := range n.Patterns {
		c.Patterns[k] = append([]float64(nil), v...)
	}
	c.Reindex()
	return &c
}

// Zones returns the distinct zone names of the nodes, in first-seen order.
func (n *Network) Zones() []string {
	seen := map[string]bool{}
	var out []string
	for i := range n.Nodes {
		z := n.Nodes[i].Zone
		if z != "" && !seen[z] {
			seen[z] = true
			out = append(out, z)
		}
	}
	return out
}
