package network

import (
	"math"
	"math/rand/v2"
	"testing"
)

// chordDistance is an independent great-circle distance: the straight
// chord between the two points as unit vectors in 3-D, turned into the
// arc 2R·asin(c/2) (plain vector geometry, e.g. Bowring 1996 or any
// spherical-trigonometry text).
func chordDistance(a, b Point) float64 {
	const rad = math.Pi / 180
	xyz := func(p Point) [3]float64 {
		la, lo := p.Lat*rad, p.Lon*rad
		return [3]float64{math.Cos(la) * math.Cos(lo), math.Cos(la) * math.Sin(lo), math.Sin(la)}
	}
	u, v := xyz(a), xyz(b)
	dx, dy, dz := u[0]-v[0], u[1]-v[1], u[2]-v[2]
	c := math.Sqrt(dx*dx + dy*dy + dz*dz)
	return 2 * EarthRadius * math.Asin(c/2)
}

func TestGreatCircleKnownArcs(t *testing.T) {
	// Arcs whose length is a plain fraction of the circumference of a
	// sphere of radius R: along a meridian or the equator the distance is
	// R·Δθ (geometry of the sphere); pole to equator is πR/2.
	r := EarthRadius
	cases := []struct {
		name string
		a, b Point
		want float64
	}{
		{"equator 1°", Point{0, 0}, Point{1, 0}, r * math.Pi / 180},
		{"meridian 1° at 45°S", Point{9, -46}, Point{9, -45}, r * math.Pi / 180},
		{"pole to equator", Point{30, 0}, Point{-150, 90}, r * math.Pi / 2},
		{"antipodes on the equator", Point{0, 0}, Point{180, 0}, r * math.Pi},
		{"same point", Point{9.1, -45.2}, Point{9.1, -45.2}, 0},
		{"1e-5° meridian step (about 1.1 m)", Point{9.1, -45.2}, Point{9.1, -45.19999}, r * 1e-5 * math.Pi / 180},
	}
	for _, c := range cases {
		got := GreatCircle(c.a, c.b)
		if d := math.Abs(got - c.want); d > 1e-6*math.Max(1, c.want) {
			t.Errorf("%s: got %.6f m, want %.6f m (diff %.3g, tol 1e-6 rel)", c.name, got, c.want, d)
		}
	}
	// 1° of latitude on the IUGG mean sphere is 111195.08 m (R·π/180,
	// R = 6371008.8 m, Moritz 2000).
	if got := GreatCircle(Point{0, 10}, Point{0, 11}); math.Abs(got-111195.08) > 0.01 {
		t.Errorf("1° of latitude: got %.3f m, want 111195.08 m ±0.01", got)
	}
}

func TestGreatCircleAgainstChord(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for k := 0; k < 2000; k++ {
		a := Point{rng.Float64()*360 - 180, rng.Float64()*180 - 90}
		// mix of short (pipe-sized) and long arcs
		scale := []float64{1e-4, 1e-2, 1, 90}[k%4]
		b := Point{a.Lon + (rng.Float64()*2-1)*scale, math.Max(-90, math.Min(90, a.Lat+(rng.Float64()*2-1)*scale))}
		got, want := GreatCircle(a, b), chordDistance(a, b)
		if d := math.Abs(got - want); d > 1e-9*EarthRadius {
			t.Fatalf("%v to %v: haversine %.6f m, chord %.6f m (diff %.3g m, tol %.3g m)", a, b, got, want, d, 1e-9*EarthRadius)
		}
		if got < 0 || got > math.Pi*EarthRadius*(1+1e-12) {
			t.Fatalf("%v to %v: %g m is outside [0, πR]", a, b, got)
		}
	}
}

func TestPolylineLengthIsSumOfSegments(t *testing.T) {
	// Along the equator a polyline of n equal steps has length R·total
	// angle, whatever the number of vertices (additivity of arc length).
	pts := []Point{{0, 0}, {0.25, 0}, {0.5, 0}, {1, 0}}
	want := EarthRadius * math.Pi / 180
	if got := PolylineLength(pts); math.Abs(got-want) > 1e-6 {
		t.Errorf("got %.6f m, want %.6f m", got, want)
	}
	if got := PolylineLength(pts[:1]); got != 0 {
		t.Errorf("one point: got %g m, want 0", got)
	}
}
