package web

import (
	"math"
	"testing"

	"plumbline/model/network"
)

// TestProjectionDistances checks the map plane against great-circle
// distances: over the demo town (a few km) the equirectangular plane with
// true scale at the centre latitude keeps distances within 0.1 %. Reference:
// network.GreatCircle (haversine on the mean sphere, Sinnott 1984); the
// bound follows from the projection's scale error, which grows with
// (Δφ)²/2 away from the standard parallel (Snyder 1987, USGS PP 1395,
// equidistant cylindrical; from memory), far below 1e-3 for Δφ < 0.05°.
func TestProjectionDistances(t *testing.T) {
	d := loadDemo(t)
	net := d.cfg.Network
	md := BuildMap(net)
	var pos []int
	for i := range net.Nodes {
		if net.Nodes[i].HasCoord {
			pos = append(pos, i)
		}
	}
	worst := 0.0
	checked := 0
	for a := 0; a < len(pos); a += 37 {
		for b := a + 11; b < len(pos); b += 53 {
			na, nb := md.Nodes[pos[a]], md.Nodes[pos[b]]
			plane := math.Hypot(*na.X-*nb.X, *na.Y-*nb.Y)
			sphere := network.GreatCircle(net.Nodes[pos[a]].Coord, net.Nodes[pos[b]].Coord)
			if sphere < 50 {
				continue
			}
			rel := math.Abs(plane-sphere) / sphere
			worst = math.Max(worst, rel)
			checked++
		}
	}
	if checked < 20 {
		t.Fatalf("only %d pairs checked", checked)
	}
	if worst > 1e-3 {
		t.Errorf("plane vs great-circle distance: worst relative difference %.2e, want <= 1e-3", worst)
	}
	// The centre of the bounding box in degrees is the origin of the plane.
	x, y := md.Projection.Project(md.Projection.Lon0, md.Projection.Lat0)
	if x != 0 || y != 0 {
		t.Errorf("Project(centre) = (%v, %v), want (0, 0)", x, y)
	}
	if !(md.Bounds.MinX < 0 && md.Bounds.MaxX > 0 && math.Abs(md.Bounds.MinX+md.Bounds.MaxX) < 1 && math.Abs(md.Bounds.MinY+md.Bounds.MaxY) < 1) {
		t.Errorf("bounds %+v not centred on the origin (within 1 m)", md.Bounds)
	}
}

// TestMapWithoutGeometry: links without geometry are drawn between their
// end nodes; features without any position stay listed, undrawn.
func TestMapWithoutGeometry(t *testing.T) {
	nodes := []network.Node{
		{ID: "R", Kind: network.Reservoir, Coord: network.Point{Lon: 10, Lat: 50}, HasCoord: true},
		{ID: "A", Kind: network.Junction, Zone: "z", Coord: network.Point{Lon: 10.01, Lat: 50}, HasCoord: true},
		{ID: "B", Kind: network.Junction, Zone: "y"},
	}
	links := []network.Link{
		{ID: "P1", Kind: network.Pipe, From: 0, To: 1, Diameter: 150},
		{ID: "P2", Kind: network.Pipe, From: 1, To: 2, Diameter: 100},
	}
	md := BuildMap(network.New(nodes, links))
	if len(md.Links[0].XY) != 2 || md.Links[0].Zone != "z" {
		t.Errorf("P1: got %+v, want a straight line R-A in zone z", md.Links[0])
	}
	if len(md.Links[1].XY) != 0 || md.Links[1].Zone != "" {
		t.Errorf("P2: got %+v, want no polyline (B unpositioned) and no zone (z to y)", md.Links[1])
	}
	if md.Nodes[2].X != nil || md.Nodes[2].Lon != nil {
		t.Errorf("B: got position %v, want none", md.Nodes[2])
	}
	// 0.01° of longitude at 50°N: R·0.01·π/180·cos 50° = 714.7 m (the
	// length of a degree of parallel, Snyder 1987; arithmetic here).
	want := earthRadiusM * 0.01 * math.Pi / 180 * math.Cos(50*math.Pi/180)
	if got := md.Links[0].XY[1][0] - md.Links[0].XY[0][0]; math.Abs(got-want) > 0.02 {
		t.Errorf("P1 length in the plane: got %.2f m, want %.2f m", got, want)
	}
}
