package units

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"testing"

	"plumbline/model/telemetry"
)

// FuzzLookup checks, for any unit name and quantity, that Lookup never
// panics, that an error is a *UnitError naming the name, that a unit
// found resolves again from its symbol, and above all that two names
// differing only in letter case never resolve to two different units
// (the milli/mega confusion of SI Brochure 9th ed. §3). Seeds:
// testdata/fuzz/FuzzLookup.
func FuzzLookup(f *testing.F) {
	f.Add(uint8(1), "MPa")
	f.Add(uint8(2), "ML/d")
	f.Fuzz(func(t *testing.T, qi uint8, name string) {
		qs := []telemetry.Quantity{telemetry.Pressure, telemetry.Flow, telemetry.Level, telemetry.Head}
		q := qs[int(qi)%len(qs)]
		u, err := Lookup(q, name)
		if err != nil {
			var ue *UnitError
			if !errors.As(err, &ue) || ue.Unit != name || !errors.Is(err, ErrUnknownUnit) {
				t.Fatalf("Lookup(%v, %q): error %v, want a *UnitError naming it", q, name, err)
			}
			return
		}
		if again, err := Lookup(q, u.Symbol); err != nil || again != u {
			t.Fatalf("Lookup(%v, %q) = %+v, but its symbol gives %+v, %v", q, name, u, again, err)
		}
		if msg := siReading(q, name, u); msg != "" {
			t.Fatal(msg)
		}
		if name == "" {
			return // the canonical unit
		}
		for _, v := range []string{strings.ToUpper(name), strings.ToLower(name), swapCase(name), swapCase(name[:1]) + name[1:]} {
			if w, err := Lookup(q, v); err == nil && w != u {
				t.Fatalf("Lookup(%v, %q) = %s but Lookup(%v, %q) = %s: case changed the unit", q, name, u.Symbol, q, v, w.Symbol)
			}
		}
	})
}

// siPrefix is the factor of each one-letter SI prefix symbol (BIPM, The
// International System of Units, 9th ed. 2019, Table 7; u stands in for
// µ as in ISO 2955).
var siPrefix = map[byte]float64{
	'Y': 1e24, 'Z': 1e21, 'E': 1e18, 'P': 1e15, 'T': 1e12, 'G': 1e9, 'M': 1e6, 'k': 1e3, 'h': 1e2,
	'd': 1e-1, 'c': 1e-2, 'm': 1e-3, 'u': 1e-6, 'n': 1e-9, 'p': 1e-12, 'f': 1e-15, 'a': 1e-18, 'z': 1e-21, 'y': 1e-24,
}

// siReading checks a name that Lookup took as u against the reading the
// SI gives it: when the name is an SI prefix letter, in its own case,
// before a name that is itself a unit r of the quantity ("mpa" is m and
// "pa"), u must be that prefix times r ("mpa" can only be 10^-3 Pa, so
// taking it as MPa is wrong). It returns what is wrong, or "".
func siReading(q telemetry.Quantity, name string, u Unit) string {
	n := normalise(name)
	if len(n) < 2 {
		return ""
	}
	f, ok := siPrefix[n[0]]
	if !ok {
		return ""
	}
	r, err := Lookup(q, n[1:])
	if err != nil {
		return ""
	}
	if want := f * r.Factor; math.Abs(u.Factor-want) > 1e-12*want {
		return fmt.Sprintf("%v %q taken as %s (factor %g), but the SI reads it as %c (%g) × %s = %g",
			q, name, u.Symbol, u.Factor, n[0], f, r.Symbol, want)
	}
	return ""
}
