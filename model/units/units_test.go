package units

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"plumbline/model/telemetry"
)

func relClose(got, want, tol float64) bool {
	return math.Abs(got-want) <= tol*math.Abs(want)
}

// TestPublishedFactors checks every unit against a value published outside
// this project. Values are in pascal, m³/s or m as the source gives them, so
// the comparison goes through our own conversion chain.
func TestPublishedFactors(t *testing.T) {
	const pa = 1 / PascalPerMetreWater // m of water per pascal
	cases := []struct {
		q       telemetry.Quantity
		unit    string
		inCanon float64 // published value of 1 unit, already in canonical units
		tol     float64 // relative; the published value's rounding
		source  string
	}{
		// Pressure: published values in Pa, divided by 9806.65 Pa per m H2O.
		{telemetry.Pressure, "Pa", 1 * pa, 1e-15, "definition"},
		{telemetry.Pressure, "kPa", 1e3 * pa, 1e-15, "SI prefix kilo"},
		{telemetry.Pressure, "MPa", 1e6 * pa, 1e-15, "SI prefix mega"},
		{telemetry.Pressure, "bar", 1.0e5 * pa, 1e-15, "NIST SP 811 (2008) App. B.8: bar = 1.0 E+05 Pa; BIPM SI Brochure 8th ed. Table 9"},
		{telemetry.Pressure, "mbar", 1.0e2 * pa, 1e-15, "NIST SP 811 (2008) App. B.8: millibar = 1.0 E+02 Pa"},
		{telemetry.Pressure, "psi", 6.894757e3 * pa, 1e-7, "NIST SP 811 (2008) App. B.8: psi = 6.894 757 E+03 Pa"},
		{telemetry.Pressure, "m", 100 * 9.80665e1 * pa, 1e-15, "NIST SP 811 (2008) App. B.8: cmH2O conventional = 9.806 65 E+01 Pa"},
		{telemetry.Pressure, "ftH2O", 12 * 2.490889e2 * pa, 1e-6, "NIST SP 811 (2008) App. B.8: inH2O conventional = 2.490 889 E+02 Pa; 1 ft = 12 in"},
		// Flow: published values in m³/s, × 1000 L/m³.
		{telemetry.Flow, "m3/s", 1000, 1e-15, "definition, 1 m³ = 1000 L"},
		{telemetry.Flow, "m3/h", 1000.0 / 3600, 1e-15, "definition, 1 h = 3600 s"},
		{telemetry.Flow, "m3/d", 1000.0 / 86400, 1e-15, "definition, 1 d = 86400 s"},
		{telemetry.Flow, "ML/d", 1e6 / 86400, 1e-15, "definition, ML = 10^6 L"},
		{telemetry.Flow, "gpm", 6.309020e-5 * 1000, 1e-6, "NIST SP 811 (2008) App. B.8: gallon (U.S.) per minute = 6.309 020 E-05 m³/s"},
		{telemetry.Flow, "MGD", 1e6 * 4.381264e-8 * 1000, 1e-6, "NIST SP 811 (2008) App. B.8: gallon (U.S.) per day = 4.381 264 E-08 m³/s"},
		{telemetry.Flow, "L/min", 1.0 / 60, 1e-15, "definition"},
		// Length.
		{telemetry.Level, "ft", 3.048e-1, 1e-15, "NIST SP 811 (2008) App. B.8: foot = 3.048 E-01 m"},
		{telemetry.Head, "ft", 3.048e-1, 1e-15, "NIST SP 811 (2008) App. B.8: foot = 3.048 E-01 m"},
		{telemetry.Level, "in", 2.54e-2, 1e-15, "NIST SP 811 (2008) App. B.8: inch = 2.54 E-02 m"},
		{telemetry.Level, "m", 1, 0, "canonical"},
		{telemetry.Head, "cm", 0.01, 1e-15, "SI prefix centi"},
	}
	for _, c := range cases {
		got, err := ToCanonical(c.q, c.unit, 1)
		if err != nil {
			t.Errorf("%v %q: %v", c.q, c.unit, err)
			continue
		}
		if !relClose(got, c.inCanon, c.tol) {
			t.Errorf("%v 1 %s = %.12g %s, want %.12g (rel diff %.3g, tol %.1g; %s)",
				c.q, c.unit, got, c.q.CanonicalUnit(), c.inCanon, (got-c.inCanon)/c.inCanon, c.tol, c.source)
		}
	}
}

// TestPhysicalCrossChecks uses the standard atmosphere, defined independently
// of the units above, as a check that two chains agree.
func TestPhysicalCrossChecks(t *testing.T) {
	// Standard atmosphere 101 325 Pa exactly (10th CGPM 1954; NIST SP 811
	// App. B.8: atm = 1.013 25 E+05 Pa) is 14.695 95 psi (NIST SP 811
	// App. B.8 gives psi = 6.894 757 E+03 Pa, so 101325/6894.757 =
	// 14.695 95) and 10.332 27 m of conventional water (101325/9806.65).
	atmM, err := ToCanonical(telemetry.Pressure, "kPa", 101.325)
	if err != nil {
		t.Fatal(err)
	}
	psi, _ := FromCanonical(telemetry.Pressure, "psi", atmM)
	if !relClose(psi, 14.69595, 1e-6) {
		t.Errorf("1 atm = %.7g psi, want 14.69595 (tol 1e-6 rel)", psi)
	}
	if !relClose(atmM, 10.33227, 1e-6) {
		t.Errorf("1 atm = %.7g m H2O, want 10.33227 (tol 1e-6 rel)", atmM)
	}
	// 1 bar = 14.503 77 psi (NIST SP 811 App. B.8 via Pa; from the two factors).
	barPsi, _ := FromCanonical(telemetry.Pressure, "psi", 1e5/PascalPerMetreWater)
	if !relClose(barPsi, 14.50377, 1e-6) {
		t.Errorf("1 bar = %.7g psi, want 14.50377", barPsi)
	}
	// 1 MGD = 694.444 gpm (1e6 gal / 1440 min per day): two flow chains.
	mgd, _ := ToCanonical(telemetry.Flow, "MGD", 1)
	gpm, _ := FromCanonical(telemetry.Flow, "gpm", mgd)
	if !relClose(gpm, 1e6/1440, 1e-14) {
		t.Errorf("1 MGD = %.10g gpm, want %.10g", gpm, 1e6/1440.0)
	}
	// 1 ML/d = 41.6667 m3/h.
	mld, _ := ToCanonical(telemetry.Flow, "ML/d", 1)
	m3h, _ := FromCanonical(telemetry.Flow, "m3/h", mld)
	if !relClose(m3h, 1000.0/24, 1e-14) {
		t.Errorf("1 ML/d = %.10g m3/h, want %.10g", m3h, 1000.0/24)
	}
}

func TestAliases(t *testing.T) {
	cases := []struct {
		q          telemetry.Quantity
		spelling   string
		wantSymbol string
	}{
		{telemetry.Pressure, "BAR", "bar"},
		{telemetry.Pressure, " kpa ", "kPa"},
		{telemetry.Pressure, "MPA", "MPa"},
		{telemetry.Pressure, "Mpa", "MPa"},
		{telemetry.Pressure, "KPA", "kPa"},
		{telemetry.Pressure, "KPa", "kPa"},
		{telemetry.Pressure, "HPA", "mbar"},
		{telemetry.Pressure, "mBar", "mbar"},
		{telemetry.Pressure, "MH2O", "m"},
		{telemetry.Pressure, "PSI", "psi"},
		{telemetry.Pressure, "m H2O", "m"},
		{telemetry.Pressure, "mH2O", "m"},
		{telemetry.Pressure, "ft H2O", "ft"},
		{telemetry.Pressure, "hPa", "mbar"},
		{telemetry.Pressure, "", "m"},
		{telemetry.Flow, "m³/h", "m3/h"},
		{telemetry.Flow, "m^3/h", "m3/h"},
		{telemetry.Flow, "M3/H", "m3/h"},
		{telemetry.Flow, "l/s", "L/s"},
		{telemetry.Flow, "lps", "L/s"},
		{telemetry.Flow, "L/s", "L/s"},
		{telemetry.Flow, "LPS", "L/s"},
		{telemetry.Flow, "Ml/d", "ML/d"},
		{telemetry.Flow, "ML/D", "ML/d"},
		{telemetry.Flow, "MLD", "ML/d"},
		{telemetry.Flow, "Ml/Day", "ML/d"},
		{telemetry.Flow, "MEGALITRE/DAY", "ML/d"},
		{telemetry.Flow, "US gpm", "gpm"},
		{telemetry.Flow, "mgd", "MGD"},
		{telemetry.Flow, "", "L/s"},
		{telemetry.Level, "FT", "ft"},
		{telemetry.Level, "CM", "cm"},
		{telemetry.Level, "mM", "mm"},
		{telemetry.Head, "METRES", "m"},
		{telemetry.Level, "feet", "ft"},
		{telemetry.Head, "metre", "m"},
	}
	for _, c := range cases {
		got, err := Symbol(c.q, c.spelling)
		if err != nil || got != c.wantSymbol {
			t.Errorf("Symbol(%v, %q) = %q, %v; want %q", c.q, c.spelling, got, err, c.wantSymbol)
		}
	}
}

// SI prefix symbols are case-sensitive (BIPM, The International System
// of Units, 9th ed. 2019, §3): m is milli (10^-3) and M mega (10^6), so
// mPa and MPa, mbar and Mbar, mL/d and ML/d, mm and Mm each differ by a
// factor of 10^9 (SI Brochure 9th ed. Table 7). A spelling whose prefix
// letter is in the other case is refused, naming the unit and the
// spelling meant, never read as the unit that differs only in case.
func TestPrefixCase(t *testing.T) {
	cases := []struct {
		q          telemetry.Quantity
		unit, want string
	}{
		{telemetry.Pressure, "mpa", "MPa"},
		{telemetry.Pressure, "mPa", "MPa"},
		{telemetry.Pressure, "mPA", "MPa"},
		{telemetry.Pressure, "Mbar", "mbar"},
		{telemetry.Pressure, "MBAR", "mbar"},
		{telemetry.Flow, "ml/d", "ML/d"},
		{telemetry.Flow, "mL/d", "ML/d"},
		{telemetry.Flow, "mld", "MLD"},
		{telemetry.Flow, "ml/day", "Ml/day"},
		{telemetry.Level, "Mm", "mm"},
		{telemetry.Head, "MM", "mm"},
	}
	for _, c := range cases {
		_, err := Lookup(c.q, c.unit)
		var ue *UnitError
		if !errors.As(err, &ue) || !errors.Is(err, ErrUnknownUnit) {
			t.Errorf("Lookup(%v, %q) = %v, want a *UnitError wrapping ErrUnknownUnit", c.q, c.unit, err)
			continue
		}
		msg := err.Error()
		for _, part := range []string{
			fmt.Sprintf("%q is not a %v unit", c.unit, c.q),
			"SI prefixes are case-sensitive: ",
			fmt.Sprintf("did you mean %q?", c.want),
		} {
			if !strings.Contains(msg, part) {
				t.Errorf("Lookup(%v, %q): error %q lacks %q", c.q, c.unit, msg, part)
			}
		}
		if ue.Unit != c.unit || ue.Quantity != c.q {
			t.Errorf("Lookup(%v, %q): UnitError names %q %v", c.q, c.unit, ue.Unit, ue.Quantity)
		}
		if Known(c.q, c.unit) {
			t.Errorf("Known(%v, %q) = true, want false", c.q, c.unit)
		}
	}
	// The suggestion is right: the unit meant converts by 10^9 times
	// what the other prefix would give (10^6 / 10^-3).
	mega, _ := ToCanonical(telemetry.Pressure, "MPa", 1)
	if milli := 1e-3 / PascalPerMetreWater; !relClose(mega/milli, 1e9, 1e-15) {
		t.Errorf("MPa / mPa = %g, want 1e9", mega/milli)
	}
}

// TestTableCase checks every spelling of the table: as written it is its
// unit; with its letter case changed it is still its unit unless the
// first letter is a case-sensitive prefix, which must then be refused
// with the spelling suggested.
func TestTableCase(t *testing.T) {
	for _, e := range table {
		q := map[kind]telemetry.Quantity{kindPressure: telemetry.Pressure, kindFlow: telemetry.Flow, kindLength: telemetry.Level}[e.kind]
		for _, name := range append([]string{e.symbol}, e.aliases...) {
			prefixed := false
			for _, p := range e.prefixed {
				prefixed = prefixed || p == name
			}
			swapFirst := swapCase(name[:1]) + name[1:]
			variants := []string{name, strings.ToUpper(name), strings.ToLower(name), swapCase(name), name[:1] + swapCase(name[1:])}
			for _, v := range variants {
				if prefixed && v[0] != name[0] {
					continue
				}
				if sym, err := Symbol(q, v); err != nil || sym != e.symbol {
					t.Errorf("Symbol(%v, %q) = %q, %v; want %q", q, v, sym, err, e.symbol)
				}
			}
			// No variant, taken or not, contradicts the SI reading of
			// its prefix letter.
			for _, v := range append(variants, swapFirst) {
				if u, err := Lookup(q, v); err == nil {
					if msg := siReading(q, v, u); msg != "" {
						t.Error(msg)
					}
				}
			}
			if !prefixed {
				continue
			}
			_, err := Lookup(q, swapFirst)
			if err == nil || !strings.Contains(err.Error(), fmt.Sprintf("did you mean %q?", name)) {
				t.Errorf("Lookup(%v, %q) = %v, want a refusal suggesting %q", q, swapFirst, err, name)
			}
		}
	}
}

// swapCase swaps the case of ASCII letters.
func swapCase(s string) string {
	b := []byte(s)
	for i, c := range b {
		switch {
		case 'a' <= c && c <= 'z':
			b[i] = c - 'a' + 'A'
		case 'A' <= c && c <= 'Z':
			b[i] = c - 'A' + 'a'
		}
	}
	return string(b)
}

// An unknown unit's error says what it knows: the quantity the unit
// belongs to, or a near spelling; never a spelling that only adds or
// drops a prefix (mmH2O is not mH2O: a factor of 1000).
func TestHints(t *testing.T) {
	cases := []struct {
		q          telemetry.Quantity
		unit, hint string
	}{
		{telemetry.Pressure, "barr", `did you mean "bar"?`},
		{telemetry.Pressure, "kpaa", `did you mean "kPa"?`},
		{telemetry.Flow, "m3/hh", `did you mean "m3/h"?`},
		{telemetry.Pressure, "L/s", "L/s is a flow unit"},
		{telemetry.Level, "psi", "psi is a pressure unit"},
		{telemetry.Flow, "cm", "cm is a length, for level and head"},
		{telemetry.Pressure, "mmH2O", ""},
		{telemetry.Pressure, "kbar", ""},
		{telemetry.Pressure, "furlong", ""},
		{telemetry.Pressure, "   ", ""},
	}
	for _, c := range cases {
		_, err := Lookup(c.q, c.unit)
		var ue *UnitError
		if !errors.As(err, &ue) {
			t.Errorf("Lookup(%v, %q) = %v, want a *UnitError", c.q, c.unit, err)
			continue
		}
		if ue.Hint != c.hint {
			t.Errorf("Lookup(%v, %q): hint %q, want %q", c.q, c.unit, ue.Hint, c.hint)
		}
		if want := fmt.Sprintf("units: %q is not a %v unit", c.unit, c.q); !strings.HasPrefix(err.Error(), want) {
			t.Errorf("Lookup(%v, %q): error %q, want it to start %q", c.q, c.unit, err, want)
		}
	}
}

func TestUnknown(t *testing.T) {
	cases := []struct {
		q    telemetry.Quantity
		unit string
	}{
		{telemetry.Pressure, "L/s"},
		{telemetry.Flow, "bar"},
		{telemetry.Level, "psi"},
		{telemetry.Head, "gpm"},
		{telemetry.Pressure, "furlong"},
		{telemetry.Quantity(0), "m"},
		{telemetry.Quantity(99), "m"},
	}
	for _, c := range cases {
		_, err := ToCanonical(c.q, c.unit, 1)
		if !errors.Is(err, ErrUnknownUnit) {
			t.Errorf("ToCanonical(%v, %q) error = %v, want ErrUnknownUnit", c.q, c.unit, err)
		}
		if Known(c.q, c.unit) {
			t.Errorf("Known(%v, %q) = true, want false", c.q, c.unit)
		}
	}
}

// TestRoundTrip converts random values in every unit to canonical and back.
func TestRoundTrip(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for _, q := range []telemetry.Quantity{telemetry.Pressure, telemetry.Flow, telemetry.Level, telemetry.Head} {
		for _, name := range Names(q) {
			for i := 0; i < 200; i++ {
				v := (rng.Float64() - 0.5) * math.Pow(10, float64(rng.IntN(12)-4))
				c, err := ToCanonical(q, name, v)
				if err != nil {
					t.Fatalf("%v %s: %v", q, name, err)
				}
				back, err := FromCanonical(q, name, c)
				if err != nil {
					t.Fatalf("%v %s: %v", q, name, err)
				}
				if !relClose(back, v, 4e-16) && v != 0 {
					t.Fatalf("%v %s: %g → %g → %g (rel diff %g, tol 4e-16)", q, name, v, c, back, (back-v)/v)
				}
			}
		}
	}
}

func TestNoAllocLookup(t *testing.T) {
	n := testing.AllocsPerRun(100, func() {
		if _, err := Lookup(telemetry.Pressure, "bar"); err != nil {
			t.Fatal(err)
		}
		if _, err := Lookup(telemetry.Flow, "m3/h"); err != nil {
			t.Fatal(err)
		}
	})
	if n != 0 {
		t.Errorf("Lookup allocates %v times per run, want 0", n)
	}
}

func BenchmarkToCanonical(b *testing.B) {
	for b.Loop() {
		if _, err := ToCanonical(telemetry.Pressure, "kPa", 412.5); err != nil {
			b.Fatal(err)
		}
	}
}
