// Command plotday draws one day of a zone inflow meter and of a pressure
// logger from a readings file (CSV, `time,sensor,value,unit[,quality]`,
// as `plumbline simulate` writes it) into an SVG: the README's picture of
// what the simulator produces.
//
//	plumbline simulate --network configs/demo-town.geojson \
//	    --scenario testdata/scenarios/demo-mixed.yaml --out /tmp/r.csv --truth /tmp/t.json
//	go run ./scripts/plotday -in /tmp/r.csv -day 2026-03-04 \
//	    -flow F-in-central -pressure P-central-01 -out docs/simulated-day.svg
//
// Values are converted to canonical units (L/s, m of water) from the
// unit each reading names; times are UTC. The SVG does not embed fonts
// (it stays small; viewers fall back to a serif face), and the same
// input gives the same bytes.
package main

import (
	"bytes"
	"encoding/csv"
	"errors"
	"flag"
	"fmt"
	"image/color"
	"io"
	"os"
	"strconv"
	"strings"
	"time"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
	"gonum.org/v1/plot/vg/vgsvg"

	"plumbline/model/telemetry"
	"plumbline/model/units"
)

func main() {
	in := flag.String("in", "", "readings file (CSV)")
	day := flag.String("day", "", "day to draw, YYYY-MM-DD (UTC)")
	flow := flag.String("flow", "F-in-central", "zone inflow meter (sensor id)")
	pressure := flag.String("pressure", "P-central-01", "pressure logger (sensor id)")
	out := flag.String("out", "docs/simulated-day.svg", "SVG file to write")
	title := flag.String("title", "", "title above the plots (default: sensors and day)")
	flag.Parse()
	if err := run(*in, *day, *flow, *pressure, *out, *title); err != nil {
		fmt.Fprintln(os.Stderr, "plotday:", err)
		os.Exit(1)
	}
}

func run(in, day, flow, pressure, out, title string) error {
	if in == "" || day == "" {
		return errors.New("-in and -day are required")
	}
	from, err := time.Parse("2006-01-02", day)
	if err != nil {
		return fmt.Errorf("-day %q: want YYYY-MM-DD", day)
	}
	f, err := os.Open(in)
	if err != nil {
		return err
	}
	defer f.Close()
	want := map[string]telemetry.Quantity{flow: telemetry.Flow, pressure: telemetry.Pressure}
	series, err := readDay(f, in, from, from.Add(24*time.Hour), want)
	if err != nil {
		return err
	}
	for id := range want {
		if len(series[id]) == 0 {
			return fmt.Errorf("%s: no readings of %s on %s", in, id, day)
		}
	}
	if title == "" {
		title = fmt.Sprintf("Simulated %s: zone inflow %s and pressure logger %s", day, flow, pressure)
	}
	img, err := draw2(series[flow], series[pressure], flow, pressure, title, strings.HasSuffix(out, ".png"))
	if err != nil {
		return err
	}
	return os.WriteFile(out, img, 0o644)
}

// readDay returns, per wanted sensor, its readings in [from, to) in
// canonical units. Bad rows are errors naming the file and line.
func readDay(r io.Reader, name string, from, to time.Time, want map[string]telemetry.Quantity) (map[string]plotter.XYs, error) {
	cr := csv.NewReader(r)
	cr.FieldsPerRecord = -1
	out := map[string]plotter.XYs{}
	line := 0
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		line++
		if err != nil {
			return nil, fmt.Errorf("%s: %w", name, err)
		}
		if line == 1 && len(rec) > 0 && rec[0] == "time" {
			continue
		}
		if len(rec) < 4 {
			return nil, fmt.Errorf("%s:%d: want time,sensor,value,unit, got %d fields", name, line, len(rec))
		}
		q, ok := want[rec[1]]
		if !ok {
			continue
		}
		t, err := time.Parse(time.RFC3339, rec[0])
		if err != nil {
			return nil, fmt.Errorf("%s:%d: time: %w", name, line, err)
		}
		if t.Before(from) || !t.Before(to) {
			continue
		}
		v, err := strconv.ParseFloat(rec[2], 64)
		if err != nil {
			return nil, fmt.Errorf("%s:%d: value: %w", name, line, err)
		}
		c, err := units.ToCanonical(q, rec[3], v)
		if err != nil {
			return nil, fmt.Errorf("%s:%d: sensor %s: %w", name, line, rec[1], err)
		}
		out[rec[1]] = append(out[rec[1]], plotter.XY{X: float64(t.Unix()), Y: c})
	}
	return out, nil
}

// draw2 stacks the flow plot above the pressure plot, sharing the time
// axis, and returns the SVG (or, with png, a PNG at 120 dpi).
func draw2(flow, pressure plotter.XYs, flowID, pressureID, title string, png bool) ([]byte, error) {
	top, err := panel(flow, title, fmt.Sprintf("%s, L/s", flowID), color.RGBA{R: 0x1f, G: 0x5f, B: 0xa8, A: 0xff})
	if err != nil {
		return nil, err
	}
	bottom, err := panel(pressure, "", fmt.Sprintf("%s, m", pressureID), color.RGBA{R: 0xb0, G: 0x40, B: 0x20, A: 0xff})
	if err != nil {
		return nil, err
	}
	bottom.X.Label.Text = "time of day (UTC)"

	const w, h = 8 * vg.Inch, 5.5 * vg.Inch
	var c vg.CanvasWriterTo = vgsvg.New(w, h)
	if png {
		c = vgimg.PngCanvas{Canvas: vgimg.NewWith(vgimg.UseWH(w, h), vgimg.UseDPI(120))}
	}
	dc := draw.New(c)
	tiles := draw.Tiles{Rows: 2, Cols: 1, PadTop: vg.Points(4), PadBottom: vg.Points(4), PadLeft: vg.Points(4), PadRight: vg.Points(10), PadY: vg.Points(6)}
	cs := plot.Align([][]*plot.Plot{{top}, {bottom}}, tiles, dc)
	top.Draw(cs[0][0])
	bottom.Draw(cs[1][0])
	var buf bytes.Buffer
	if _, err := c.WriteTo(&buf); err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}

// panel is one plot of a day of readings: the day from midnight to
// midnight (UTC) of the first reading, ticks every 3 hours.
func panel(xy plotter.XYs, title, ylabel string, c color.Color) (*plot.Plot, error) {
	p := plot.New()
	p.Title.Text = title
	p.Y.Label.Text = ylabel
	day := time.Unix(int64(xy[0].X), 0).UTC().Truncate(24 * time.Hour)
	p.X.Min = float64(day.Unix())
	p.X.Max = float64(day.Add(24 * time.Hour).Unix())
	var ticks []plot.Tick
	for h := 0; h <= 24; h++ {
		t := plot.Tick{Value: float64(day.Add(time.Duration(h) * time.Hour).Unix())}
		if h%3 == 0 {
			t.Label = fmt.Sprintf("%02d:00", h)
		}
		ticks = append(ticks, t)
	}
	p.X.Tick.Marker = plot.ConstantTicks(ticks)
	p.Add(plotter.NewGrid())
	l, err := plotter.NewLine(xy)
	if err != nil {
		return nil, err
	}
	l.Width = vg.Points(1)
	l.Color = c
	p.Add(l)
	return p, nil
}
