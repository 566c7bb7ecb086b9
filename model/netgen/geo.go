package netgen

import (
	"math"

	"plumbline/model/network"
)

// defaultOrigin is the WGS84 position of the lower-left corner of a
// generated town: an arbitrary point in open country, standing for no
// real place. Never written (read-only package data).
var defaultOrigin = network.Point{Lon: 126.1837, Lat: -24.9312}

// vec is a position in local metres: x east, y north of the origin.
type vec struct{ x, y float64 }

func (a vec) add(b vec) vec        { return vec{a.x + b.x, a.y + b.y} }
func (a vec) norm() float64        { return math.Hypot(a.x, a.y) }
func (a vec) dist2(b vec) float64  { dx, dy := a.x-b.x, a.y-b.y; return dx*dx + dy*dy }
func (a vec) scale(s float64) vec  { return vec{a.x * s, a.y * s} }
func polar(r, theta float64) vec   { return vec{r * math.Cos(theta), r * math.Sin(theta)} }
func (a vec) dist(b vec) float64   { return math.Sqrt(a.dist2(b)) }
func lerp(a, b vec, t float64) vec { return vec{a.x + (b.x-a.x)*t, a.y + (b.y-a.y)*t} }
func mid(a, b vec) vec             { return lerp(a, b, 0.5) }

const degree = math.Pi / 180

// projection places local metres on the sphere of radius
// network.EarthRadius: y along a meridian (1 m = 1/R rad of latitude),
// x along the parallel of the origin (1 m = 1/(R cos φ0) rad of
// longitude), rounded to 1e-7° (about 1 cm). Over a town of tens of
// km the east-west scale then drifts by at most a few tenths of a
// percent from true; stored lengths are measured on the sphere
// (sphereLength), so they match the geometry.
type projection struct {
	lon0, lat0 float64 // degrees
	cos0       float64
}

func newProjection(origin network.Point) projection {
	return projection{lon0: origin.Lon, lat0: origin.Lat, cos0: math.Cos(origin.Lat * degree)}
}

func (p projection) point(v vec) network.Point {
	return network.Point{
		Lon: roundTo(p.lon0+v.x/(network.EarthRadius*p.cos0)/degree, 1e-7),
		Lat: roundTo(p.lat0+v.y/network.EarthRadius/degree, 1e-7),
	}
}

// sphereLength returns the distance in m between two nearby positions on
// the sphere of radius network.EarthRadius, by the equirectangular
// approximation at the mean latitude. For the pipe lengths here (below
// 2 km) it agrees with the haversine great-circle distance to better
// than 1e-6 relative, at a fraction of the cost.
func sphereLength(a, b network.Point) float64 {
	phi := (a.Lat + b.Lat) / 2 * degree
	dx := (b.Lon - a.Lon) * degree * math.Cos(phi)
	dy := (b.Lat - a.Lat) * degree
	return network.EarthRadius * math.Hypot(dx, dy)
}

// roundTo rounds v to a multiple of step; for steps below 1 (0.1, 0.01,
// 0.0001) it divides by the integer 1/step, so that the result is the
// double nearest the decimal and prints short.
func roundTo(v, step float64) float64 {
	if step < 1 {
		inv := math.Round(1 / step)
		return math.Round(v*inv) / inv
	}
	return math.Round(v/step) * step
}
