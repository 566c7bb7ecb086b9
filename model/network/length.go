package network

import "math"

// EarthRadius is the mean radius of the Earth in m, R1 = (2a+b)/3 of the
// GRS 80 ellipsoid as adopted by the IUGG (Moritz 2000, "Geodetic
// Reference System 1980", J. Geodesy 74:128-133): 6371008.8 m. Lengths
// from geometry use a sphere of this radius; on the ellipsoid the true
// distance differs by at most about 0.5 %, far below the uncertainty of
// a mapped pipe route.
const EarthRadius = 6371008.8

// GreatCircle returns the great-circle distance in m between two WGS84
// positions on a sphere of radius EarthRadius, by the haversine formula
// (Sinnott 1984, "Virtues of the haversine", Sky and Telescope 68(2):159),
// which stays accurate for the short distances of pipes where the
// spherical law of cosines loses digits.
func GreatCircle(a, b Point) float64 {
	const rad = math.Pi / 180
	phi1, phi2 := a.Lat*rad, b.Lat*rad
	dphi := (b.Lat - a.Lat) * rad
	dlam := (b.Lon - a.Lon) * rad
	s1 := math.Sin(dphi / 2)
	s2 := math.Sin(dlam / 2)
	h := s1*s1 + math.Cos(phi1)*math.Cos(phi2)*s2*s2
	if h > 1 {
		h = 1 // rounding near antipodes
	}
	return 2 * EarthRadius * math.Asin(math.Sqrt(h))
}

// PolylineLength returns the length in m of a polyline of WGS84
// positions, the sum of the great-circle lengths of its segments.
func PolylineLength(pts []Point) float64 {
	var s float64
	for i := 1; i < len(pts); i++ {
		s += GreatCircle(pts[i-1], pts[i])
	}
	return s
}
