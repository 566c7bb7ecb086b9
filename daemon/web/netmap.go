package web

import (
	"math"

	"plumbline/model/network"
)

// earthRadiusM is the mean Earth radius, m (IUGG mean radius R1,
// Moritz 2000: 6371008.8 m).
const earthRadiusM = 6371008.8

// MapData is the network drawn on the operator page, computed once from
// the network file: every node and link with its position in WGS84
// degrees and in a local plane (metres east and north of the centre of the
// network's bounding box, equirectangular projection with true scale at
// the centre latitude; Snyder 1987, "Map Projections: A Working Manual",
// USGS Professional Paper 1395, equidistant cylindrical projection).
// At town scale (a few km) the plane distorts distances by far less than
// a pixel of the page.
type MapData struct {
	Projection Projection `json:"projection"`
	// Bounds is the projected bounding box of everything positioned.
	Bounds Bounds    `json:"bounds"`
	Nodes  []MapNode `json:"nodes"`
	Links  []MapLink `json:"links"`
	// Zones are the zones' label anchors and extents.
	Zones []MapZone `json:"zones"`
}

// Projection names the plane the x/y values are in.
type Projection struct {
	Name string  `json:"name"` // "equirectangular"
	Lon0 float64 `json:"lon0"` // centre longitude, degrees
	Lat0 float64 `json:"lat0"` // centre latitude (true scale), degrees
	Unit string  `json:"unit"` // "m"
}

// Bounds is a projected bounding box, m.
type Bounds struct {
	MinX float64 `json:"min_x"`
	MinY float64 `json:"min_y"`
	MaxX float64 `json:"max_x"`
	MaxY float64 `json:"max_y"`
}

// MapNode is one node. Lon, Lat, X and Y are null when the node has no
// geometry in the file.
type MapNode struct {
	ID   string   `json:"id"`
	Kind string   `json:"kind"`
	Zone string   `json:"zone"`
	Lon  *float64 `json:"lon"`
	Lat  *float64 `json:"lat"`
	X    *float64 `json:"x"`
	Y    *float64 `json:"y"`
}

// MapLink is one link with its polyline, in degrees (LonLat, [lon, lat]
// pairs) and projected (XY, [x, y] pairs in m). A link without geometry
// is drawn straight between its end nodes when both are positioned;
// otherwise both lists are empty and the link is not drawn.
type MapLink struct {
	ID         string  `json:"id"`
	Kind       string  `json:"kind"`
	From       string  `json:"from"`
	To         string  `json:"to"`
	DiameterMM float64 `json:"diameter_mm"`
	// Valve is the valve type for valves ("" otherwise).
	Valve string `json:"valve,omitempty"`
	// Zone is the zone of both end nodes (or of the one that has a zone);
	// "" for a link between two zones.
	Zone   string       `json:"zone"`
	LonLat [][2]float64 `json:"lonlat"`
	XY     [][2]float64 `json:"xy"`
}

// MapZone is a zone's label anchor and extent, m.
type MapZone struct {
	ID string `json:"id"`
	// X and Y are the mean position of the zone's positioned nodes.
	X float64 `json:"x"`
	Y float64 `json:"y"`
	// MinX ... MaxY bound the zone's positioned nodes.
	MinX  float64 `json:"min_x"`
	MinY  float64 `json:"min_y"`
	MaxX  float64 `json:"max_x"`
	MaxY  float64 `json:"max_y"`
	Nodes int     `json:"nodes"`
}

// BuildMap computes the map data of net. It never fails: features without
// geometry are kept without positions.
func BuildMap(net *network.Network) MapData {
	md := MapData{Projection: Projection{Name: "equirectangular", Unit: "m"}, Nodes: []MapNode{}, Links: []MapLink{}, Zones: []MapZone{}}
	if net == nil {
		return md
	}
	// Bounding box in degrees over node points and link vertices.
	minLon, minLat, maxLon, maxLat := math.Inf(1), math.Inf(1), math.Inf(-1), math.Inf(-1)
	grow := func(p network.Point) {
		minLon, maxLon = math.Min(minLon, p.Lon), math.Max(maxLon, p.Lon)
		minLat, maxLat = math.Min(minLat, p.Lat), math.Max(maxLat, p.Lat)
	}
	for i := range net.Nodes {
		if net.Nodes[i].HasCoord {
			grow(net.Nodes[i].Coord)
		}
	}
	for i := range net.Links {
		for _, p := range net.Links[i].Geometry {
			grow(p)
		}
	}
	if minLon > maxLon { // nothing positioned
		for i := range net.Nodes {
			nd := &net.Nodes[i]
			md.Nodes = append(md.Nodes, MapNode{ID: nd.ID, Kind: nd.Kind.String(), Zone: nd.Zone})
		}
		for i := range net.Links {
			md.Links = append(md.Links, mapLink(net, i, nil))
		}
		return md
	}
	pr := Projection{Name: "equirectangular", Lon0: (minLon + maxLon) / 2, Lat0: (minLat + maxLat) / 2, Unit: "m"}
	md.Projection = pr
	b := Bounds{MinX: math.Inf(1), MinY: math.Inf(1), MaxX: math.Inf(-1), MaxY: math.Inf(-1)}
	proj := func(p network.Point) [2]float64 {
		x, y := pr.Project(p.Lon, p.Lat)
		b.MinX, b.MaxX = math.Min(b.MinX, x), math.Max(b.MaxX, x)
		b.MinY, b.MaxY = math.Min(b.MinY, y), math.Max(b.MaxY, y)
		return [2]float64{x, y}
	}
	type acc struct {
		x, y                   float64
		minX, minY, maxX, maxY float64
		n                      int
	}
	zoneAcc := map[string]*acc{}
	var zoneOrder []string
	for i := range net.Nodes {
		nd := &net.Nodes[i]
		mn := MapNode{ID: nd.ID, Kind: nd.Kind.String(), Zone: nd.Zone}
		if nd.HasCoord {
			xy := proj(nd.Coord)
			lon, lat, x, y := nd.Coord.Lon, nd.Coord.Lat, round(xy[0]), round(xy[1])
			mn.Lon, mn.Lat, mn.X, mn.Y = &lon, &lat, &x, &y
			if nd.Zone != "" {
				a := zoneAcc[nd.Zone]
				if a == nil {
					a = &acc{minX: math.Inf(1), minY: math.Inf(1), maxX: math.Inf(-1), maxY: math.Inf(-1)}
					zoneAcc[nd.Zone] = a
					zoneOrder = append(zoneOrder, nd.Zone)
				}
				a.x, a.y, a.n = a.x+xy[0], a.y+xy[1], a.n+1
				a.minX, a.maxX = math.Min(a.minX, xy[0]), math.Max(a.maxX, xy[0])
				a.minY, a.maxY = math.Min(a.minY, xy[1]), math.Max(a.maxY, xy[1])
			}
		}
		md.Nodes = append(md.Nodes, mn)
	}
	for i := range net.Links {
		md.Links = append(md.Links, mapLink(net, i, proj))
	}
	for _, z := range zoneOrder {
		a := zoneAcc[z]
		md.Zones = append(md.Zones, MapZone{ID: z, X: round(a.x / float64(a.n)), Y: round(a.y / float64(a.n)),
			MinX: round(a.minX), MinY: round(a.minY), MaxX: round(a.maxX), MaxY: round(a.maxY), Nodes: a.n})
	}
	b.MinX, b.MinY, b.MaxX, b.MaxY = round(b.MinX), round(b.MinY), round(b.MaxX), round(b.MaxY)
	md.Bounds = b
	return md
}

// Project maps WGS84 degrees to metres east (x) and north (y) of the
// projection centre: x = R·Δλ·cos φ0, y = R·Δφ (radians).
func (p Projection) Project(lon, lat float64) (x, y float64) {
	rad := math.Pi / 180
	return earthRadiusM * (lon - p.Lon0) * rad * math.Cos(p.Lat0*rad), earthRadiusM * (lat - p.Lat0) * rad
}

// mapLink returns link i; proj is nil when nothing is positioned.
func mapLink(net *network.Network, i int, proj func(network.Point) [2]float64) MapLink {
	l := &net.Links[i]
	ml := MapLink{ID: l.ID, Kind: l.Kind.String(), DiameterMM: l.Diameter, LonLat: [][2]float64{}, XY: [][2]float64{}}
	if l.Kind == network.Valve {
		ml.Valve = l.Valve.String()
	}
	var from, to *network.Node
	if l.From >= 0 && l.From < len(net.Nodes) {
		from = &net.Nodes[l.From]
		ml.From = from.ID
	}
	if l.To >= 0 && l.To < len(net.Nodes) {
		to = &net.Nodes[l.To]
		ml.To = to.ID
	}
	switch {
	case from == nil || to == nil:
	case from.Zone == to.Zone:
		ml.Zone = from.Zone
	case from.Zone == "":
		ml.Zone = to.Zone
	case to.Zone == "":
		ml.Zone = from.Zone
	}
	if proj == nil {
		return ml
	}
	pts := l.Geometry
	if len(pts) < 2 && from != nil && to != nil && from.HasCoord && to.HasCoord {
		pts = []network.Point{from.Coord, to.Coord}
	}
	if len(pts) < 2 {
		return ml
	}
	for _, p := range pts {
		xy := proj(p)
		ml.LonLat = append(ml.LonLat, [2]float64{p.Lon, p.Lat})
		ml.XY = append(ml.XY, [2]float64{round(xy[0]), round(xy[1])})
	}
	return ml
}

// round keeps centimetres: enough for drawing, and a smaller answer.
func round(x float64) float64 { return math.Round(x*100) / 100 }
