package units

import (
	"errors"
	"fmt"
	"sort"
	"strings"

	"plumbline/model/telemetry"
)

// ErrUnknownUnit is wrapped by every error about a unit name that is not
// known for the quantity asked.
var ErrUnknownUnit = errors.New("unknown unit")

// Exact base definitions (see doc.go for the sources).
const (
	// StandardGravity is g_n in m/s² (3rd CGPM 1901).
	StandardGravity = 9.80665
	// WaterDensity is the conventional density of water, kg/m³, used for
	// columns of water (NIST SP 811 (2008) "conventional").
	WaterDensity = 1000.0
	// PascalPerMetreWater is the pressure of 1 m of conventional water.
	PascalPerMetreWater = WaterDensity * StandardGravity // 9806.65 Pa
	// Foot is the international foot in metres.
	Foot = 0.3048
	// Inch is the international inch in metres.
	Inch = 0.0254
	// PoundMass is the avoirdupois pound in kilograms.
	PoundMass = 0.45359237
	// PascalPerPSI is one pound-force per square inch in pascals.
	PascalPerPSI = PoundMass * StandardGravity / (Inch * Inch)
	// LitrePerUSGallon is the US liquid gallon (231 in³) in litres.
	LitrePerUSGallon = 231 * Inch * Inch * Inch * 1000
	// SecondsPerDay is the length of a day in seconds.
	SecondsPerDay = 86400.0
)

// kind groups quantities that share a set of units.
type kind uint8

const (
	kindPressure kind = iota + 1
	kindFlow
	kindLength
)

func kindOf(q telemetry.Quantity) kind {
	switch q {
	case telemetry.Pressure:
		return kindPressure
	case telemetry.Flow:
		return kindFlow
	case telemetry.Level, telemetry.Head:
		return kindLength
	}
	return 0
}

// Unit is a resolved unit: Symbol is its preferred spelling and Factor the
// multiplier to the canonical unit of its quantity.
type Unit struct {
	Symbol string
	Factor float64
	kind   kind
}

// ToCanonical converts v from u into the canonical unit.
func (u Unit) ToCanonical(v float64) float64 { return v * u.Factor }

// FromCanonical converts a canonical value v into u.
func (u Unit) FromCanonical(v float64) float64 { return v / u.Factor }

type entry struct {
	kind    kind
	symbol  string
	factor  float64
	aliases []string
}

// table lists every unit; the first spelling of each is its symbol.
var table = []entry{
	// Pressure, canonical m of water.
	{kindPressure, "m", 1, []string{"mH2O", "mwc", "mWS", "m of water", "metre of water", "meter of water"}},
	{kindPressure, "ft", Foot, []string{"ftH2O", "ftwc", "ft of water", "foot of water", "feet of water"}},
	{kindPressure, "Pa", 1 / PascalPerMetreWater, []string{"pascal"}},
	{kindPressure, "kPa", 1e3 / PascalPerMetreWater, []string{"kilopascal"}},
	{kindPressure, "MPa", 1e6 / PascalPerMetreWater, []string{"megapascal"}},
	{kindPressure, "bar", 1e5 / PascalPerMetreWater, []string{"bars"}},
	{kindPressure, "mbar", 1e2 / PascalPerMetreWater, []string{"hPa", "millibar"}},
	{kindPressure, "psi", PascalPerPSI / PascalPerMetreWater, []string{"lbf/in2", "psig"}},
	// Flow, canonical L/s.
	{kindFlow, "L/s", 1, []string{"lps", "l/sec"}},
	{kindFlow, "L/min", 1.0 / 60, []string{"lpm"}},
	{kindFlow, "L/h", 1.0 / 3600, []string{"lph"}},
	{kindFlow, "m3/s", 1000, []string{"m³/s", "cumecs"}},
	{kindFlow, "m3/h", 1000.0 / 3600, []string{"m³/h", "m3/hr", "cmh"}},
	{kindFlow, "m3/d", 1000.0 / SecondsPerDay, []string{"m³/d", "m3/day", "cmd"}},
	{kindFlow, "ML/d", 1e6 / SecondsPerDay, []string{"MLD", "Ml/day", "megalitre/day"}},
	{kindFlow, "gpm", LitrePerUSGallon / 60, []string{"US gpm", "gal/min"}},
	{kindFlow, "MGD", LitrePerUSGallon * 1e6 / SecondsPerDay, []string{"US MGD", "Mgal/d"}},
	// Length (level, head), canonical m.
	{kindLength, "m", 1, []string{"metre", "meter", "metres", "meters", "mH2O"}},
	{kindLength, "cm", 0.01, nil},
	{kindLength, "mm", 0.001, nil},
	{kindLength, "ft", Foot, []string{"foot", "feet", "ftH2O"}},
	{kindLength, "in", Inch, []string{"inch", "inches"}},
}

type key struct {
	kind kind
	name string
}

// index maps (kind, normalised name) to the unit. Built once at package
// initialisation and never written afterwards (read-only shared state).
var index = buildIndex()

func buildIndex() map[key]Unit {
	m := make(map[key]Unit, 4*len(table))
	for _, e := range table {
		u := Unit{Symbol: e.symbol, Factor: e.factor, kind: e.kind}
		for _, n := range append([]string{e.symbol}, e.aliases...) {
			// The exact spelling (fast path, no allocation) and the
			// normalised one; two units may never share a name.
			for _, k := range []key{{e.kind, n}, {e.kind, normalise(n)}} {
				if old, dup := m[k]; dup && old.Symbol != u.Symbol {
					panic("units: unit name " + n + " used twice") // broken table, not bad input
				}
				m[k] = u
			}
		}
	}
	return m
}

// normalise lower-cases s, drops spaces and maps "³" and "^3" to "3".
func normalise(s string) string {
	clean := true
	for i := 0; i < len(s); i++ {
		c := s[i]
		if c == ' ' || c == '\t' || c == '^' || c >= 0x80 || ('A' <= c && c <= 'Z') {
			clean = false
			break
		}
	}
	if clean {
		return s
	}
	var b strings.Builder
	b.Grow(len(s))
	for _, r := range s {
		switch {
		case r == ' ' || r == '\t':
		case r == '³':
			b.WriteByte('3')
		case r == '^':
		case 'A' <= r && r <= 'Z':
			b.WriteRune(r + ('a' - 'A'))
		default:
			b.WriteRune(r)
		}
	}
	return b.String()
}

// Lookup resolves a unit name for a quantity. An empty name means the
// canonical unit. The error wraps ErrUnknownUnit and names unit and quantity.
func Lookup(q telemetry.Quantity, unit string) (Unit, error) {
	k := kindOf(q)
	if k == 0 {
		return Unit{}, fmt.Errorf("units: unit %q for unknown quantity %v: %w", unit, q, ErrUnknownUnit)
	}
	if unit == "" {
		unit = q.CanonicalUnit()
	}
	// Fast path: exact spelling (no allocation).
	if u, ok := index[key{k, unit}]; ok {
		return u, nil
	}
	if u, ok := index[key{k, normalise(unit)}]; ok {
		return u, nil
	}
	return Unit{}, fmt.Errorf("units: %q is not a %v unit: %w", unit, q, ErrUnknownUnit)
}

// Known reports whether unit is a known unit for quantity q.
func Known(q telemetry.Quantity, unit string) bool {
	_, err := Lookup(q, unit)
	return err == nil
}

// ToCanonical converts v, measured in unit, into q's canonical unit.
func ToCanonical(q telemetry.Quantity, unit string, v float64) (float64, error) {
	u, err := Lookup(q, unit)
	if err != nil {
		return 0, err
	}
	return u.ToCanonical(v), nil
}

// FromCanonical converts v, in q's canonical unit, into unit.
func FromCanonical(q telemetry.Quantity, unit string, v float64) (float64, error) {
	u, err := Lookup(q, unit)
	if err != nil {
		return 0, err
	}
	return u.FromCanonical(v), nil
}

// Symbol returns the preferred spelling of unit for q ("m³/h" → "m3/h"),
// for recording in readings; the error is as Lookup's.
func Symbol(q telemetry.Quantity, unit string) (string, error) {
	u, err := Lookup(q, unit)
	if err != nil {
		return "", err
	}
	return u.Symbol, nil
}

// Names returns the preferred symbols of every unit known for q, sorted,
// for help texts and error messages.
func Names(q telemetry.Quantity) []string {
	k := kindOf(q)
	var out []string
	for _, e := range table {
		if e.kind == k {
			out = append(out, e.symbol)
		}
	}
	sort.Strings(out)
	return out
}
