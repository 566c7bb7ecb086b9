// Package units converts readings between the units they arrive in and the
// canonical units plumbline keeps inside (shared/CONTRACT.md "Units"):
//
//	pressure  m of water (conventional water column, see below)
//	flow      L/s
//	level     m
//	head      m
//
// # Definitions
//
// Every factor is derived from an exact published definition rather than a
// rounded table value:
//
//   - bar = 10^5 Pa (BIPM, The International System of Units, 8th ed. 2006,
//     Table 9; NIST SP 811 (2008) Appendix B.8). mbar = hPa = 100 Pa.
//   - Standard acceleration of gravity g_n = 9.80665 m/s² (3rd CGPM 1901;
//     NIST SP 811 (2008) Appendix B.8 note).
//   - "m of water" is the conventional metre of water, a column of water of
//     density exactly 1000 kg/m³ under g_n: 1 m H2O = 9806.65 Pa (NIST SP
//     811 (2008) Appendix B.8, "centimeter of water, conventional (cmH2O)
//     9.80665 E+01 Pa"). The density of real water at 4 °C (999.972 kg/m³)
//     or at 20 °C (998.2 kg/m³) is NOT used: the conventional value is what
//     pressure transducers calibrated in mH2O use, and the 0.2 % difference
//     at 20 °C is below the accuracy of field sensors.
//   - ft = 0.3048 m exactly (international foot, 1959; NIST SP 811 (2008)
//     Appendix B.8 "foot (ft) 3.048 E-01 m"). ft of water is the
//     conventional column: 0.3048 m of water = 2989.067 Pa (NIST lists
//     2988.98 Pa for "foot of water (39.2 °F)", the real-density column,
//     which we do not use, for the reason above).
//   - psi = lbf/in², lbf = 0.45359237 kg × g_n, in = 0.0254 m (NIST SP 811
//     (2008) Appendix B.8: pound (avoirdupois) 4.535 923 7 E-01 kg exactly,
//     psi 6.894 757 E+03 Pa).
//   - US gallon = 231 in³ = 3.785411784 L exactly (NIST SP 811 (2008)
//     Appendix B.8 "gallon [U.S.] 3.785 412 E-03 m³"). gpm is US gallons
//     per minute; MGD is US million gallons per day (not imperial).
//   - ML/d is megalitres per day (10^6 L / 86 400 s), the water trade's
//     unit. "ml/d" is millilitres per day, 10^9 times less, and is not
//     read as ML/d (see Names below).
//
// # Names
//
// Unit names are matched after removing spaces and turning "³" and "^3"
// into "3"; several aliases are accepted (see the table in units.go, or
// Names). For pressure, a bare "m" or "ft" means a column of water
// (m H2O, ft H2O); for level and head it is a length.
//
// Letter case does not matter, except in an SI prefix whose other case
// is another prefix: SI prefix symbols are case-sensitive (BIPM, The
// International System of Units, 9th ed. 2019, §3), and m (milli) and M
// (mega) are 10^9 apart. So MPa, mbar, ML/d (also MLD, Ml/day) and mm
// must have that first letter as written: "MPA" and "Mpa" are MPa, but
// "mpa" and "mPa" are refused, as are "Mbar", "ml/d", "mld" and "Mm".
// Everywhere else case is harmless and ignored: "kpa" and "KPA" are kPa
// (K is not a prefix), "l/s", "L/s" and "LPS" are L/s (the litre is l or
// L), "M3/H" is m3/h, "mgd" is MGD (there is no milligallon), "BAR" is
// bar.
//
// # Errors
//
// An unknown unit, or a unit of the wrong quantity (L/s for a pressure
// sensor), is a *UnitError wrapping ErrUnknownUnit that names the unit and
// the quantity, with a Hint where one helps: the prefix letter in the
// wrong case and the spelling meant (`"mpa" is not a pressure unit (SI
// prefixes are case-sensitive: m is milli, M is mega; did you mean
// "MPa"?)`), the quantity the unit belongs to, or a near misspelling
// (never one that only adds or drops a prefix: mmH2O is not mH2O).
// Conversion itself never fails: every conversion is linear with a zero
// offset, value_canonical = value × Factor.
//
// # Speed
//
// Lookup resolves a unit once (a sensor's configured unit, say) into a Unit
// whose ToCanonical is a single multiplication. Lookup and Known do not
// allocate for the spellings listed in the table.
package units
