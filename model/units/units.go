package units

import (
	"errors"
	"fmt"
	"sort"
	"strconv"
	"strings"

	"plumbline/internal/spell"
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
	// prefixed lists the spellings (symbol or aliases) whose first letter
	// is an SI prefix that a change of case turns into another one, m
	// (milli) and M (mega): that letter must be written as listed (BIPM,
	// The International System of Units, 9th ed. 2019, §3: prefix symbols
	// are case-sensitive). The rest of such a spelling, and every other
	// spelling, is matched in any letter case.
	prefixed []string
}

// table lists every unit; the first spelling of each is its symbol.
var table = []entry{
	// Pressure, canonical m of water.
	{kindPressure, "m", 1, []string{"mH2O", "mwc", "mWS", "m of water", "metre of water", "meter of water"}, nil},
	{kindPressure, "ft", Foot, []string{"ftH2O", "ftwc", "ft of water", "foot of water", "feet of water"}, nil},
	{kindPressure, "Pa", 1 / PascalPerMetreWater, []string{"pascal"}, nil},
	// k (kilo) and h (hecto) have no prefix of the other case (K and H
	// are the kelvin and the henry), so "KPA" and "HPA" can only mean kPa
	// and hPa.
	{kindPressure, "kPa", 1e3 / PascalPerMetreWater, []string{"kilopascal"}, nil},
	{kindPressure, "MPa", 1e6 / PascalPerMetreWater, []string{"megapascal"}, []string{"MPa"}}, // not mPa
	{kindPressure, "bar", 1e5 / PascalPerMetreWater, []string{"bars"}, nil},
	{kindPressure, "mbar", 1e2 / PascalPerMetreWater, []string{"hPa", "millibar"}, []string{"mbar"}}, // not Mbar
	{kindPressure, "psi", PascalPerPSI / PascalPerMetreWater, []string{"lbf/in2", "psig"}, nil},
	// Flow, canonical L/s. The litre's symbol is l or L (SI Brochure 9th
	// ed. Table 8), so its case never matters.
	{kindFlow, "L/s", 1, []string{"lps", "l/sec"}, nil},
	{kindFlow, "L/min", 1.0 / 60, []string{"lpm"}, nil},
	{kindFlow, "L/h", 1.0 / 3600, []string{"lph"}, nil},
	{kindFlow, "m3/s", 1000, []string{"m³/s", "cumecs"}, nil},
	{kindFlow, "m3/h", 1000.0 / 3600, []string{"m³/h", "m3/hr", "cmh"}, nil},
	{kindFlow, "m3/d", 1000.0 / SecondsPerDay, []string{"m³/d", "m3/day", "cmd"}, nil},
	{kindFlow, "ML/d", 1e6 / SecondsPerDay, []string{"MLD", "Ml/day", "megalitre/day"}, []string{"ML/d", "MLD", "Ml/day"}}, // not mL/d
	{kindFlow, "gpm", LitrePerUSGallon / 60, []string{"US gpm", "gal/min"}, nil},
	// M here is "million", and there is no milligallon: "mgd" is MGD.
	{kindFlow, "MGD", LitrePerUSGallon * 1e6 / SecondsPerDay, []string{"US MGD", "Mgal/d"}, nil},
	// Length (level, head), canonical m.
	{kindLength, "m", 1, []string{"metre", "meter", "metres", "meters", "mH2O"}, nil},
	{kindLength, "cm", 0.01, nil, nil},
	{kindLength, "mm", 0.001, nil, []string{"mm"}}, // not Mm
	{kindLength, "ft", Foot, []string{"foot", "feet", "ftH2O"}, nil},
	{kindLength, "in", Inch, []string{"inch", "inches"}, nil},
}

type key struct {
	kind kind
	name string
}

// spelling is one way of writing a unit, under its case-folded form.
type spelling struct {
	unit Unit
	// name is the spelling as the table writes it, for suggestions.
	name string
	// prefix is the SI prefix letter whose case must match, 0 if none.
	prefix byte
}

// Indexes of the table, built once at package initialisation and never
// written afterwards (read-only shared state): exact maps (kind,
// spelling) to the unit for the spellings as the table writes them
// (the fast path); folded maps (kind, case-folded spelling) to every
// spelling with that folded form.
var exact, folded = buildIndex()

func buildIndex() (map[key]Unit, map[key][]spelling) {
	ex := make(map[key]Unit, 4*len(table))
	fo := make(map[key][]spelling, 2*len(table))
	for _, e := range table {
		u := Unit{Symbol: e.symbol, Factor: e.factor, kind: e.kind}
		for _, n := range append([]string{e.symbol}, e.aliases...) {
			// Two units may never share a spelling (a broken table, not
			// bad input, hence the panics).
			for _, k := range []key{{e.kind, n}, {e.kind, normalise(n)}} {
				if old, dup := ex[k]; dup && old.Symbol != u.Symbol {
					panic("units: unit name " + n + " used twice")
				}
				ex[k] = u
			}
			sp := spelling{unit: u, name: n}
			for _, p := range e.prefixed {
				if p == n {
					sp.prefix = n[0]
				}
			}
			k := key{e.kind, fold(normalise(n))}
			dup := false
			for _, old := range fo[k] {
				switch {
				case old.unit.Symbol == u.Symbol:
					dup = true
				case old.prefix == 0 || sp.prefix == 0 || old.prefix == sp.prefix:
					// Only spellings told apart by the case of their
					// prefix letter may fold together.
					panic("units: unit names " + old.name + " and " + n + " differ only in letter case")
				}
			}
			if !dup {
				fo[k] = append(fo[k], sp)
			}
		}
	}
	return ex, fo
}

// normalise drops spaces and "^" and maps "³" to "3", keeping letter case.
func normalise(s string) string {
	clean := true
	for i := 0; i < len(s); i++ {
		c := s[i]
		if c == ' ' || c == '\t' || c == '^' || c >= 0x80 {
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
		switch r {
		case ' ', '\t', '^':
		case '³':
			b.WriteByte('3')
		default:
			b.WriteRune(r)
		}
	}
	return b.String()
}

// fold lower-cases the ASCII letters of s.
func fold(s string) string {
	for i := 0; i < len(s); i++ {
		if 'A' <= s[i] && s[i] <= 'Z' {
			return strings.ToLower(s)
		}
	}
	return s
}

// prefixName names the SI prefixes whose letter case the table tells
// apart, for messages.
func prefixName(c byte) string {
	switch c {
	case 'm':
		return "milli"
	case 'M':
		return "mega"
	}
	return "no prefix"
}

// UnitError is the error about a unit name that is not known for the
// quantity asked. It wraps ErrUnknownUnit.
type UnitError struct {
	// Unit is the name as given.
	Unit string
	// Quantity is the quantity it was asked for.
	Quantity telemetry.Quantity
	// Hint says what is wrong and suggests a spelling (`did you mean
	// "MPa"?`), or is empty when there is nothing to suggest.
	Hint string
}

// Error names the unit and the quantity, with the hint if there is one.
func (e *UnitError) Error() string {
	msg := fmt.Sprintf("units: %q is not a %v unit", e.Unit, e.Quantity)
	if e.Hint != "" {
		msg += " (" + e.Hint + ")"
	}
	return msg
}

// Unwrap returns ErrUnknownUnit.
func (e *UnitError) Unwrap() error { return ErrUnknownUnit }

// Detail is what a validator adds to "is not a unit": the hint, or
// else the units known for the quantity ("known: L/s, L/h, ...").
func (e *UnitError) Detail() string {
	if e.Hint != "" {
		return e.Hint
	}
	return "known: " + strings.Join(Names(e.Quantity), ", ")
}

// Lookup resolves a unit name for a quantity. An empty name means the
// canonical unit. Spaces do not count, and neither does letter case
// except in the SI prefix letters m and M of the spellings that begin
// with one (see the table). The error is a *UnitError naming unit and
// quantity, with the right spelling where one is near.
func Lookup(q telemetry.Quantity, unit string) (Unit, error) {
	k := kindOf(q)
	if k == 0 {
		return Unit{}, fmt.Errorf("units: unit %q for unknown quantity %v: %w", unit, q, ErrUnknownUnit)
	}
	if unit == "" {
		unit = q.CanonicalUnit()
	}
	// Fast path: a spelling as the table writes it (no allocation).
	if u, ok := exact[key{k, unit}]; ok {
		return u, nil
	}
	n := normalise(unit)
	if u, ok := exact[key{k, n}]; ok {
		return u, nil
	}
	if n == "" {
		return Unit{}, &UnitError{Unit: unit, Quantity: q}
	}
	cands := folded[key{k, fold(n)}]
	for _, c := range cands {
		if c.prefix == 0 || c.prefix == n[0] {
			return c.unit, nil
		}
	}
	return Unit{}, &UnitError{Unit: unit, Quantity: q, Hint: hint(k, q, n, cands)}
}

// hint explains why n, normalised, is not a unit of kind k: a prefix
// letter in the wrong case (cands are the spellings it folds to), a
// unit of another quantity, or a near misspelling.
func hint(k kind, q telemetry.Quantity, n string, cands []spelling) string {
	if len(cands) > 0 {
		var names []string
		for _, c := range cands {
			names = append(names, strconv.Quote(c.name))
		}
		return fmt.Sprintf("SI prefixes are case-sensitive: %c is %s, %c is %s; did you mean %s?",
			n[0], prefixName(n[0]), cands[0].prefix, prefixName(cands[0].prefix), strings.Join(names, " or "))
	}
	f := fold(n)
	for _, other := range []telemetry.Quantity{telemetry.Pressure, telemetry.Flow, telemetry.Level} {
		ko := kindOf(other)
		if ko == k {
			continue
		}
		if _, ok := folded[key{ko, f}]; ok {
			if ko == kindLength {
				return fmt.Sprintf("%s is a length, for level and head", n)
			}
			return fmt.Sprintf("%s is a %v unit", n, other)
		}
	}
	var words []string
	for _, e := range table {
		if e.kind != k {
			continue
		}
		for _, name := range append([]string{e.symbol}, e.aliases...) {
			words = append(words, fold(normalise(name)))
		}
	}
	s := spell.Nearest(f, words)
	// A prefix added or dropped ("mmH2O", "kbar") is another unit, not a
	// slip of the pen: suggesting it would hide a factor of a thousand.
	if s == "" || strings.HasSuffix(f, s) || strings.HasSuffix(s, f) {
		return ""
	}
	if c := folded[key{k, s}]; len(c) > 0 {
		return fmt.Sprintf("did you mean %q?", c[0].unit.Symbol)
	}
	return ""
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
