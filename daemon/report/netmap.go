package report

import (
	"fmt"
	"image/color"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"plumbline/model/finding"
	"plumbline/model/network"
	"plumbline/model/telemetry"
)

// proj projects WGS84 longitude/latitude onto local east/north metres
// about a reference point (equirectangular, good to a fraction of a per
// cent over a town; 111 320 m per degree of longitude at the equator and
// 110 574 m per degree of latitude, WGS84 values from memory).
type proj struct{ lon0, lat0, kx float64 }

func newProj(net *network.Network) (proj, bool) {
	var lon, lat float64
	n := 0
	for i := range net.Nodes {
		if net.Nodes[i].HasCoord {
			lon += net.Nodes[i].Coord.Lon
			lat += net.Nodes[i].Coord.Lat
			n++
		}
	}
	if n == 0 {
		return proj{}, false
	}
	lon, lat = lon/float64(n), lat/float64(n)
	return proj{lon0: lon, lat0: lat, kx: 111320 * math.Cos(lat*math.Pi/180)}, true
}

func (p proj) xy(pt network.Point) plotter.XY {
	return plotter.XY{X: (pt.Lon - p.lon0) * p.kx, Y: (pt.Lat - p.lat0) * 110574}
}

// linkLines draws the network's links as polylines coloured by zone.
type linkLines struct {
	lines  []plotter.XYs
	colors []color.Color
	width  vg.Length
}

// Plot implements plot.Plotter.
func (l *linkLines) Plot(c draw.Canvas, p *plot.Plot) {
	trX, trY := p.Transforms(&c)
	for i, line := range l.lines {
		pts := make([]vg.Point, len(line))
		for k, q := range line {
			pts[k] = vg.Point{X: trX(q.X), Y: trY(q.Y)}
		}
		c.StrokeLines(draw.LineStyle{Color: l.colors[i], Width: l.width}, c.ClipLinesXY(pts)...)
	}
}

// DataRange implements plot.DataRanger.
func (l *linkLines) DataRange() (xmin, xmax, ymin, ymax float64) {
	xmin, ymin = math.Inf(1), math.Inf(1)
	xmax, ymax = math.Inf(-1), math.Inf(-1)
	for _, line := range l.lines {
		for _, q := range line {
			xmin, xmax = math.Min(xmin, q.X), math.Max(xmax, q.X)
			ymin, ymax = math.Min(ymin, q.Y), math.Max(ymax, q.Y)
		}
	}
	return
}

// place returns the map position of a node, link (mid point) or sensor.
func (r *Report) place(pr proj, kind finding.Kind, id string) (plotter.XY, bool) {
	net := r.b.cfg.Network
	if kind == finding.SensorFault {
		s, ok := r.b.cfg.Sensor(id)
		if !ok {
			return plotter.XY{}, false
		}
		id = s.At
		if s.Quantity == telemetry.Flow {
			kind = finding.Blockage
		}
	}
	if kind == finding.Blockage {
		li, ok := net.LinkIndex(id)
		if !ok {
			return plotter.XY{}, false
		}
		l := &net.Links[li]
		if len(l.Geometry) > 0 {
			return pr.xy(l.Geometry[len(l.Geometry)/2]), true
		}
		a, b := &net.Nodes[l.From], &net.Nodes[l.To]
		if !a.HasCoord || !b.HasCoord {
			return plotter.XY{}, false
		}
		pa, pb := pr.xy(a.Coord), pr.xy(b.Coord)
		return plotter.XY{X: (pa.X + pb.X) / 2, Y: (pa.Y + pb.Y) / 2}, true
	}
	ni, ok := net.NodeIndex(id)
	if !ok || !net.Nodes[ni].HasCoord {
		return plotter.XY{}, false
	}
	return pr.xy(net.Nodes[ni].Coord), true
}

// mapPlot draws the network (zi < 0) or one zone with its loggers and
// each finding's best three candidates labelled "F<n>.<rank>". It
// returns nil when the network has no coordinates.
func (r *Report) mapPlot(zi int, title string) ([]byte, error) {
	b := r.b
	net := b.cfg.Network
	pr, ok := newProj(net)
	if !ok {
		return nil, nil
	}
	zoneIdx := b.zoneIdx
	ll := &linkLines{width: vg.Points(0.6)}
	if zi >= 0 {
		ll.width = vg.Points(0.9)
	}
	for i := range net.Links {
		l := &net.Links[i]
		a, c := &net.Nodes[l.From], &net.Nodes[l.To]
		za, oka := zoneIdx[a.Zone]
		zc, okc := zoneIdx[c.Zone]
		if zi >= 0 && !(oka && za == zi) && !(okc && zc == zi) {
			continue
		}
		var line plotter.XYs
		switch {
		case len(l.Geometry) >= 2:
			for _, g := range l.Geometry {
				line = append(line, pr.xy(g))
			}
		case a.HasCoord && c.HasCoord:
			line = plotter.XYs{pr.xy(a.Coord), pr.xy(c.Coord)}
		default:
			continue
		}
		col := color.Color(colOther)
		switch {
		case oka:
			col = zoneColours[za%len(zoneColours)]
		case okc:
			col = zoneColours[zc%len(zoneColours)]
		}
		ll.lines = append(ll.lines, line)
		ll.colors = append(ll.colors, col)
	}
	if len(ll.lines) == 0 {
		return nil, nil
	}
	p := newPlot(title, "north (m)")
	p.X.Label.Text = "east (m)"
	p.Add(ll)
	for k, z := range b.zones {
		if zi < 0 || k == zi {
			p.Legend.Add("zone "+z.z.ID, legendLine{zoneColours[k%len(zoneColours)]})
		}
	}
	var logs plotter.XYs
	for _, l := range b.loggers {
		if zi >= 0 && l.zone != zi {
			continue
		}
		if q, ok := r.place(pr, finding.SensorFault, l.id); ok {
			logs = append(logs, q)
		}
	}
	if len(logs) > 0 {
		sc, err := plotter.NewScatter(logs)
		if err != nil {
			return nil, err
		}
		sc.GlyphStyle = draw.GlyphStyle{Color: colLogger, Radius: vg.Points(2.5), Shape: draw.TriangleGlyph{}}
		p.Add(sc)
		p.Legend.Add("pressure logger", sc)
	}
	var cand plotter.XYs
	var candLabels []string
	for _, f := range r.Summary.Findings {
		if zi >= 0 && f.Zone != b.zones[zi].z.ID {
			continue
		}
		for rank, c := range topCandidates(f.Finding, 3) {
			if q, ok := r.place(pr, f.Kind, c.ID); ok {
				cand = append(cand, q)
				candLabels = append(candLabels, fmt.Sprintf("%s.%d", f.Label, rank+1))
			}
		}
	}
	if len(cand) > 0 {
		sc, err := plotter.NewScatter(cand)
		if err != nil {
			return nil, err
		}
		sc.GlyphStyle = draw.GlyphStyle{Color: colCandidate, Radius: vg.Points(4), Shape: draw.RingGlyph{}}
		p.Add(sc)
		p.Legend.Add("finding candidate (F<n>.<rank>)", sc)
		lb, err := plotter.NewLabels(plotter.XYLabels{XYs: cand, Labels: candLabels})
		if err != nil {
			return nil, err
		}
		for i := range lb.TextStyle {
			lb.TextStyle[i].Color = colCandidate
			lb.TextStyle[i].Font.Size = 9
		}
		lb.Offset = vg.Point{X: vg.Points(5), Y: vg.Points(3)}
		p.Add(lb)
	}
	xmin, xmax, ymin, ymax := ll.DataRange()
	w := 7.5 * vg.Inch
	aspect := (ymax - ymin) / math.Max(xmax-xmin, 1)
	h := vg.Length(math.Max(3, math.Min(6.5, 6.7*aspect)))*vg.Inch + 0.8*vg.Inch
	// Equal scales: widen the shorter range to the canvas shape.
	cw, ch := float64(w-0.9*vg.Inch), float64(h-1.2*vg.Inch)
	if (xmax-xmin)/cw > (ymax-ymin)/ch {
		mid, half := (ymin+ymax)/2, (xmax-xmin)/cw*ch/2
		ymin, ymax = mid-half, mid+half
	} else {
		mid, half := (xmin+xmax)/2, (ymax-ymin)/ch*cw/2
		xmin, xmax = mid-half, mid+half
	}
	pad := 0.03 * math.Max(xmax-xmin, ymax-ymin)
	p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = xmin-pad, xmax+pad, ymin-pad, ymax+pad
	return svgOf(p, w, h)
}

// legendLine is a legend thumbnail of a coloured line.
type legendLine struct{ c color.Color }

// Thumbnail implements plot.Thumbnailer.
func (l legendLine) Thumbnail(c *draw.Canvas) {
	y := c.Center().Y
	c.StrokeLine2(draw.LineStyle{Color: l.c, Width: vg.Points(2)}, c.Min.X, y, c.Max.X, y)
}
