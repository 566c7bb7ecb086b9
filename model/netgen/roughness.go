package netgen

import (
	"math"
	"strconv"
)

// Pipe materials written by the generator (the GeoJSON `material` word).
const (
	CastIron    = "cast-iron"
	DuctileIron = "ductile-iron"
	PVC         = "pvc"
	PE          = "pe"
)

// referenceYear is the year pipe ages are counted to. It is fixed (not
// the clock) so that generated networks do not change from year to year.
const referenceYear = 2026

// materialFor returns the material of a pipe laid in the given year with
// the given diameter (mm): cast iron before 1970, ductile iron 1970-1980
// and for mains of 250 mm and more until 2000, PVC for smaller pipes
// 1980-2000, PE from 2000. This follows the usual succession of main
// materials in European and North American towns (common practice, from
// memory).
func materialFor(year int, diameter float64) string {
	switch {
	case year < 1970:
		return CastIron
	case year < 1980:
		return DuctileIron
	case year < 2000:
		if diameter >= 250 {
			return DuctileIron
		}
		return PVC
	default:
		return PE
	}
}

// hazenC returns the Hazen-Williams C of a pipe of the given material and
// age (years), before noise. The values are those of the usual textbook
// tables of C by material and age (common practice, from memory; e.g.
// Walski 1984, "Analysis of Water Distribution Systems", ch. 2):
// unlined cast iron about 130 new, falling to 80-90 after 50-100 years
// of tuberculation; cement-lined ductile iron 140 new, about 125 after
// 50 years; PVC and PE about 140 throughout.
func hazenC(material string, age float64) float64 {
	switch material {
	case CastIron:
		return 130 - 50*(1-math.Exp(-age/35))
	case DuctileIron:
		return 140 - 20*(1-math.Exp(-age/40))
	default: // PVC, PE
		return 140 - 5*(1-math.Exp(-age/50))
	}
}

// absRoughness returns the Darcy-Weisbach absolute roughness (mm) of a
// pipe of the given material and age (years). Roughness grows linearly
// with age, ε = ε0 + α·t (Colebrook & White 1937, "The reduction of
// carrying capacity of pipes with age", J. ICE 7:99-118). ε0 for new cast
// iron 0.26 mm is Moody's (1944) value; α = 0.025 mm/yr for unlined cast
// iron in a moderately aggressive water, 0.03 + 0.003·t for cement-lined
// ductile iron, 0.0015 mm for PVC and 0.007 mm for PE (all common
// practice, from memory).
func absRoughness(material string, age float64) float64 {
	switch material {
	case CastIron:
		return 0.26 + 0.025*age
	case DuctileIron:
		return 0.03 + 0.003*age
	case PVC:
		return 0.0015 + 0.0001*age
	default: // PE
		return 0.007 + 0.0001*age
	}
}

// groupFor returns the calibration group of a pipe: material and decade
// of installation, e.g. "cast-iron-1950s" (shared/METHODS.md §5 fits
// roughness per material-and-age group).
func groupFor(material string, year int) string {
	return material + "-" + strconv.Itoa(year/10*10) + "s"
}

// standardDiameters are the nominal diameters (mm) the generator uses,
// the usual metric series of water mains (common practice).
var standardDiameters = [...]float64{100, 150, 200, 250, 300, 350, 400, 450, 500, 600}

// sizeUp returns the smallest standard diameter not below d, or the
// largest standard diameter.
func sizeUp(d float64) float64 {
	for _, s := range standardDiameters {
		if s >= d-1e-9 {
			return s
		}
	}
	return standardDiameters[len(standardDiameters)-1]
}

// nextSize returns the standard diameter one step above d, or d if d is
// already the largest.
func nextSize(d float64) float64 {
	for _, s := range standardDiameters {
		if s > d+1e-9 {
			return s
		}
	}
	return d
}

// hazenLoss returns the Hazen-Williams head loss (m) of flow q (L/s) in a
// pipe of length l (m), diameter d (mm) and factor c, SI form
// h = 10.67 L Q^1.852 / (C^1.852 D^4.8704) (shared/METHODS.md §1).
func hazenLoss(l, q, d, c float64) float64 {
	if q <= 0 {
		return 0
	}
	Q := q / 1000
	D := d / 1000
	return 10.67 * l * math.Pow(Q, 1.852) / (math.Pow(c, 1.852) * math.Pow(D, 4.8704))
}
