package report

import (
	"bytes"
	"fmt"
	"image"
	"image/color"
	"math"
	"sort"
	"time"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"plumbline/model/finding"
)

// Colours of the report (our own choice).
var (
	colInflow    = color.RGBA{R: 0x1f, G: 0x5f, B: 0xa8, A: 0xff}
	colExpected  = color.RGBA{R: 0x33, G: 0x33, B: 0x33, A: 0xff}
	colShade     = color.NRGBA{R: 0xe0, G: 0x5a, B: 0x3c, A: 0x60}
	colThreshold = color.RGBA{R: 0xb0, G: 0x20, B: 0x20, A: 0xff}
	colBurst     = color.RGBA{R: 0xd4, G: 0x8a, B: 0x00, A: 0xff}
	colOnset     = color.RGBA{R: 0x80, G: 0x00, B: 0x80, A: 0xff}
	colMissing   = color.RGBA{R: 0xcc, G: 0xcc, B: 0xcc, A: 0xff}
	colFault     = color.RGBA{R: 0x00, G: 0x00, B: 0x00, A: 0xff}
	colLogger    = color.RGBA{R: 0x10, G: 0x10, B: 0x10, A: 0xff}
	colCandidate = color.RGBA{R: 0xd0, G: 0x10, B: 0x60, A: 0xff}
	zoneColours  = []color.RGBA{
		{R: 0x4c, G: 0x72, B: 0xb0, A: 0xff}, {R: 0x55, G: 0xa8, B: 0x68, A: 0xff}, {R: 0xc4, G: 0x4e, B: 0x52, A: 0xff},
		{R: 0x81, G: 0x72, B: 0xb2, A: 0xff}, {R: 0xcc, G: 0xb9, B: 0x74, A: 0xff}, {R: 0x64, G: 0xb5, B: 0xcd, A: 0xff},
	}
	colOther = color.RGBA{R: 0xbb, G: 0xbb, B: 0xbb, A: 0xff}
)

// timeTicks puts time ticks on round UTC hours or days, about six to
// twelve of them over the axis.
type timeTicks struct{ format string }

// Ticks implements plot.Ticker.
func (tt timeTicks) Ticks(min, max float64) []plot.Tick {
	span := time.Duration((max - min) * float64(time.Second))
	steps := []time.Duration{time.Hour, 2 * time.Hour, 3 * time.Hour, 6 * time.Hour, 12 * time.Hour, 24 * time.Hour,
		2 * 24 * time.Hour, 7 * 24 * time.Hour, 14 * 24 * time.Hour, 28 * 24 * time.Hour, 56 * 24 * time.Hour, 91 * 24 * time.Hour}
	step := steps[len(steps)-1]
	for _, s := range steps {
		if span/s <= 10 {
			step = s
			break
		}
	}
	minor := step / 2
	if step > 24*time.Hour {
		minor = 24 * time.Hour
	}
	var out []plot.Tick
	origin := time.Date(2000, 1, 3, 0, 0, 0, 0, time.UTC) // a Monday: weekly ticks fall on Mondays
	start := time.Unix(int64(min), 0).UTC()
	t := origin.Add(start.Sub(origin).Truncate(minor))
	for ; !t.After(time.Unix(int64(max), 0)); t = t.Add(minor) {
		x := float64(t.Unix())
		if x < min {
			continue
		}
		label := ""
		if t.Sub(origin)%step == 0 {
			label = t.Format(tt.format)
		}
		out = append(out, plot.Tick{Value: x, Label: label})
	}
	return out
}

// plotWidth is the width of every plot.
const plotWidth = 10 * vg.Inch

// svgOf renders p as SVG without the XML prologue (for inline use). The
// fonts are not embedded per plot: the HTML embeds each once.
func svgOf(p *plot.Plot, w, h vg.Length) ([]byte, error) {
	wt, err := p.WriterTo(w, h, "svg")
	if err != nil {
		return nil, err
	}
	var buf bytes.Buffer
	if _, err := wt.WriteTo(&buf); err != nil {
		return nil, err
	}
	b := buf.Bytes()
	if i := bytes.Index(b, []byte("<svg")); i > 0 {
		b = b[i:]
	}
	// Heat strips are images of a few pixels per cell: keep them sharp.
	b = bytes.ReplaceAll(b, []byte("<image "), []byte(`<image preserveAspectRatio="none" style="image-rendering:pixelated" `))
	return b, nil
}

// timeAxis sets p's x axis to times over [from, to).
func timeAxis(p *plot.Plot, from, to time.Time) {
	format := "Jan 02"
	if to.Sub(from) <= 72*time.Hour {
		format = "Jan 02\n15:04"
	} else if to.Sub(from) > 120*24*time.Hour {
		format = "2006-01-02"
	}
	p.X.Tick.Marker = timeTicks{format: format}
	p.X.Min = float64(from.Unix())
	p.X.Max = float64(to.Unix())
	p.X.Label.Text = "time (UTC)"
}

func newPlot(title, ylabel string) *plot.Plot {
	p := plot.New()
	p.Title.Text = title
	p.Y.Label.Text = ylabel
	p.Legend.Top = true
	p.Legend.Left = true
	p.Legend.TextStyle.Font.Size = 8
	p.Legend.ThumbnailWidth = vg.Points(14)
	p.Legend.YOffs = vg.Points(14)
	p.Legend.XOffs = vg.Points(4)
	p.Title.TextStyle.Font.Size = 11
	p.X.Label.TextStyle.Font.Size = 9
	p.Y.Label.TextStyle.Font.Size = 9
	p.X.Tick.Label.Font.Size = 8
	p.Y.Tick.Label.Font.Size = 8
	return p
}

// marks draws vertical lines across the plot at given x values, each
// with a short label at the top: finding onsets and raise times.
type marks struct {
	xs     []float64
	labels []string
	color  color.Color
	dashed bool
}

// Plot implements plot.Plotter.
func (m marks) Plot(c draw.Canvas, p *plot.Plot) {
	trX, _ := p.Transforms(&c)
	ls := draw.LineStyle{Color: m.color, Width: vg.Points(1)}
	if m.dashed {
		ls.Dashes = []vg.Length{vg.Points(4), vg.Points(3)}
	}
	ts := draw.TextStyle{Color: m.color, Font: font.From(plot.DefaultFont, 8), Handler: plot.DefaultTextHandler}
	for i, x := range m.xs {
		if x < p.X.Min || x > p.X.Max {
			continue
		}
		X := trX(x)
		c.StrokeLine2(ls, X, c.Min.Y, X, c.Max.Y)
		if i < len(m.labels) && m.labels[i] != "" {
			c.FillText(ts, vg.Point{X: X + vg.Points(2), Y: c.Max.Y - vg.Points(9) - vg.Points(float64(9*(i%3)))}, m.labels[i])
		}
	}
}

// binTimes returns the mid-time (unix s) of each bin.
func (b *Builder) binX(i int) float64 {
	return float64(b.origin.Add(time.Duration(i)*b.width + b.width/2).Unix())
}

// zoneFindingMarks returns the onset and raised marks of the findings of
// a zone ("" for every zone).
func zoneFindingMarks(fs []FindingSummary, zone string, kinds ...finding.Kind) (onset, raised marks) {
	onset = marks{color: colOnset, dashed: true}
	raised = marks{color: colOnset}
	for _, f := range fs {
		if zone != "" && f.Zone != zone {
			continue
		}
		if len(kinds) > 0 && !hasKind(kinds, f.Kind) {
			continue
		}
		onset.xs = append(onset.xs, float64(f.Onset.Unix()))
		onset.labels = append(onset.labels, f.Label+" onset")
		raised.xs = append(raised.xs, float64(f.Raised.Unix()))
		raised.labels = append(raised.labels, f.Label+" raised")
	}
	return onset, raised
}

func hasKind(ks []finding.Kind, k finding.Kind) bool {
	for _, x := range ks {
		if x == k {
			return true
		}
	}
	return false
}

// balancePlot draws inflow against expected consumption with the
// imbalance shaded, for zone zi or (zi < 0) summed over zones.
func (r *Report) balancePlot(zi int, title string) ([]byte, error) {
	b := r.b
	p := newPlot(title, "flow (L/s)")
	timeAxis(p, r.Summary.From, r.Summary.To)
	n := 0
	for _, z := range b.zones {
		n = max(n, len(z.bins))
	}
	var in, ex plotter.XYs
	for i := 0; i < n; i++ {
		var si, se float64
		ok := true
		for k, z := range b.zones {
			if zi >= 0 && k != zi {
				continue
			}
			if i >= len(z.bins) || z.bins[i].n == 0 {
				ok = false
				break
			}
			bin := z.bins[i]
			si += bin.inflow / float64(bin.n)
			se += bin.expected / float64(bin.n)
		}
		if !ok {
			continue
		}
		x := b.binX(i)
		in = append(in, plotter.XY{X: x, Y: si})
		ex = append(ex, plotter.XY{X: x, Y: se})
	}
	if len(in) > 1 {
		ring := append(plotter.XYs(nil), in...)
		for i := len(ex) - 1; i >= 0; i-- {
			ring = append(ring, ex[i])
		}
		poly, err := plotter.NewPolygon(ring)
		if err != nil {
			return nil, err
		}
		poly.Color = colShade
		poly.LineStyle.Width = 0
		p.Add(poly)
		p.Legend.Add("imbalance", poly)
	}
	if err := addLine(p, in, colInflow, false, "measured inflow"); err != nil {
		return nil, err
	}
	if err := addLine(p, ex, colExpected, false, "expected consumption"); err != nil {
		return nil, err
	}
	zone := ""
	if zi >= 0 {
		zone = b.zones[zi].z.ID
	}
	on, ra := zoneFindingMarks(r.Summary.Findings, zone, finding.Leak, finding.Blockage)
	p.Add(on, ra)
	return svgOf(p, plotWidth, 3.2*vg.Inch)
}

func addLine(p *plot.Plot, xys plotter.XYs, c color.Color, dashed bool, name string) error {
	if len(xys) == 0 {
		return nil
	}
	l, err := plotter.NewLine(xys)
	if err != nil {
		return err
	}
	l.Color = c
	l.Width = vg.Points(1)
	if dashed {
		l.Dashes = []vg.Length{vg.Points(5), vg.Points(3)}
	}
	p.Add(l)
	if name != "" {
		p.Legend.Add(name, l)
	}
	return nil
}

// cusumPlot draws the zone's night and burst CUSUM statistics against
// their thresholds, findings marked where raised.
func (r *Report) cusumPlot(zi int) ([]byte, error) {
	b := r.b
	z := &b.zones[zi]
	p := newPlot("Zone "+z.z.ID+": CUSUM statistics and thresholds", "statistic")
	timeAxis(p, r.Summary.From, r.Summary.To)
	var ns, nt, bs, bt plotter.XYs
	for i, bin := range z.bins {
		if bin.tn == 0 {
			continue
		}
		x := b.binX(i)
		if finite(bin.nightMax) {
			ns = append(ns, plotter.XY{X: x, Y: bin.nightMax})
		}
		nt = append(nt, plotter.XY{X: x, Y: bin.nightThr / float64(bin.tn)})
		if finite(bin.burstMax) {
			bs = append(bs, plotter.XY{X: x, Y: bin.burstMax})
		}
		bt = append(bt, plotter.XY{X: x, Y: bin.burstThr / float64(bin.tn)})
	}
	for _, s := range []struct {
		xys    plotter.XYs
		c      color.Color
		dashed bool
		name   string
	}{{ns, colInflow, false, "night CUSUM"}, {nt, colInflow, true, "night threshold"},
		{bs, colBurst, false, "burst CUSUM"}, {bt, colBurst, true, "burst threshold"}} {
		if err := addLine(p, s.xys, s.c, s.dashed, s.name); err != nil {
			return nil, err
		}
	}
	_, ra := zoneFindingMarks(r.Summary.Findings, z.z.ID, finding.Leak, finding.Blockage)
	p.Add(ra)
	p.Y.Min = 0
	return svgOf(p, plotWidth, 2.8*vg.Inch)
}

// nightPlot draws the zone's night flow night by night against the
// legitimate-use allowance, leak onsets marked with their size.
func (r *Report) nightPlot(zi int) ([]byte, error) {
	b := r.b
	z := &b.zones[zi]
	p := newPlot("Zone "+z.z.ID+": night flow by night ("+z.z.Night.String()+" local)", "flow (L/s)")
	timeAxis(p, r.Summary.From, r.Summary.To)
	var minF, meanF, allow plotter.XYs
	for _, nf := range z.nights {
		x := float64(nf.Night.Unix())
		if finite(nf.MinLPS) {
			minF = append(minF, plotter.XY{X: x, Y: nf.MinLPS})
		}
		if finite(nf.MeanLPS) {
			meanF = append(meanF, plotter.XY{X: x, Y: nf.MeanLPS})
		}
		allow = append(allow, plotter.XY{X: x, Y: nf.AllowLPS})
	}
	if err := addLine(p, meanF, colInflow, false, "night mean inflow"); err != nil {
		return nil, err
	}
	if len(minF) > 0 {
		sc, err := plotter.NewScatter(minF)
		if err != nil {
			return nil, err
		}
		sc.GlyphStyle = draw.GlyphStyle{Color: colExpected, Radius: vg.Points(2), Shape: draw.CircleGlyph{}}
		p.Add(sc)
		p.Legend.Add("night minimum", sc)
	}
	if err := addLine(p, allow, colThreshold, true, "legitimate-use allowance"); err != nil {
		return nil, err
	}
	on := marks{color: colOnset, dashed: true}
	for _, f := range r.Summary.Findings {
		if f.Zone == z.z.ID && f.Kind == finding.Leak {
			on.xs = append(on.xs, float64(f.Onset.Unix()))
			on.labels = append(on.labels, fmt.Sprintf("%s step +%.2f L/s", f.Label, f.SizeLPS))
		}
	}
	p.Add(on)
	return svgOf(p, plotWidth, 2.8*vg.Inch)
}

// rowTicks labels the rows of a heat strip.
type rowTicks []string

// Ticks implements plot.Ticker.
func (t rowTicks) Ticks(min, max float64) []plot.Tick {
	out := make([]plot.Tick, len(t))
	for i, s := range t {
		out[i] = plot.Tick{Value: float64(len(t)-1-i) + 0.5, Label: s}
	}
	return out
}

// heatStrip draws the pressure residual of each logger of a zone (zi <
// 0: every logger) over time as a strip of coloured cells: red above the
// model, blue below, grey missing, black flagged faulty; triangles mark
// the onset of sensor-fault findings.
func (r *Report) heatStrip(zi int, title string) ([]byte, float64, error) {
	b := r.b
	var rows []int
	for li, l := range b.loggers {
		if zi < 0 || l.zone == zi {
			rows = append(rows, li)
		}
	}
	if len(rows) == 0 {
		return nil, 0, nil
	}
	// Cells of at least an hour: a residual's noise averages down and
	// what stays is model error or a change.
	group := max(1, int((time.Hour+b.width-1)/b.width))
	cw := b.width * time.Duration(group)
	cols := int((r.Summary.To.Sub(b.origin) + cw - 1) / cw)
	cols = max(cols, 1)
	cell := func(l *loggerAcc, ci int) loggerBin {
		var c loggerBin
		for k := ci * group; k < (ci+1)*group && k < len(l.bins); k++ {
			o := l.bins[k]
			c.n += o.n
			c.missing += o.missing
			c.fault += o.fault
			c.sum += o.sum
		}
		return c
	}
	// Colour scale: three times the median |residual| over the cells, at
	// least 0.3 m (our choice: model noise stays pale, a shift of a few
	// tenths of a metre or more stands out).
	var abs []float64
	for _, li := range rows {
		for ci := 0; ci < cols; ci++ {
			if c := cell(&b.loggers[li], ci); c.n > 0 {
				abs = append(abs, math.Abs(c.sum/float64(c.n)))
			}
		}
	}
	scale := 0.3
	if len(abs) > 0 {
		sort.Float64s(abs)
		scale = math.Max(scale, 3*abs[len(abs)/2])
	}
	const sy = 4
	sx := max(1, 1000/cols)
	img := image.NewRGBA(image.Rect(0, 0, cols*sx, len(rows)*sy))
	for ri, li := range rows {
		l := &b.loggers[li]
		for ci := 0; ci < cols; ci++ {
			col := colMissing
			if c := cell(l, ci); c.n+c.missing+c.fault > 0 {
				switch {
				case c.fault > c.n && c.fault >= c.missing:
					col = colFault
				case c.n > 0 && c.n >= c.missing:
					col = diverging(c.sum / float64(c.n) / scale)
				}
			}
			for y := ri * sy; y < (ri+1)*sy; y++ {
				for x := ci * sx; x < (ci+1)*sx; x++ {
					img.SetRGBA(x, y, col)
				}
			}
		}
	}
	p := newPlot(title, "")
	x0 := float64(b.origin.Unix())
	x1 := float64(b.origin.Add(time.Duration(cols) * cw).Unix())
	p.Add(plotter.NewImage(img, x0, 0, x1, float64(len(rows))))
	timeAxis(p, r.Summary.From, r.Summary.To)
	p.X.Min, p.X.Max = math.Min(p.X.Min, x0), math.Max(p.X.Max, x1)
	labels := make(rowTicks, len(rows))
	rowOf := map[string]int{}
	for i, li := range rows {
		labels[i] = b.loggers[li].id
		rowOf[b.loggers[li].id] = i
	}
	p.Y.Tick.Marker = labels
	p.Y.Tick.Label.Font.Size = 7
	p.Y.Min, p.Y.Max = 0, float64(len(rows))
	var tri plotter.XYs
	for _, f := range r.Summary.Findings {
		if f.Kind != finding.SensorFault || len(f.Candidates) == 0 {
			continue
		}
		if i, ok := rowOf[f.Candidates[0].ID]; ok {
			tri = append(tri, plotter.XY{X: float64(f.Onset.Unix()), Y: float64(len(rows)-1-i) + 0.5})
		}
	}
	if len(tri) > 0 {
		sc, err := plotter.NewScatter(tri)
		if err != nil {
			return nil, 0, err
		}
		sc.GlyphStyle = draw.GlyphStyle{Color: colOnset, Radius: vg.Points(4), Shape: draw.TriangleGlyph{}}
		p.Add(sc)
	}
	h := vg.Length(len(rows))*9*vg.Points(1) + 1.2*vg.Inch
	out, err := svgOf(p, plotWidth, h)
	return out, scale, err
}

// diverging maps v in [-1, 1] to blue (below the model) through white to
// red (above).
func diverging(v float64) color.RGBA {
	v = math.Max(-1, math.Min(1, v))
	if v >= 0 {
		k := uint8(255 * (1 - v))
		return color.RGBA{R: 255, G: k, B: k, A: 255}
	}
	k := uint8(255 * (1 + v))
	return color.RGBA{R: k, G: k, B: 255, A: 255}
}
