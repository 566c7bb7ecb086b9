package report

import (
	"bytes"
	"encoding/base64"
	"fmt"
	"html/template"
	"io"
	"os"
	"strings"
	"time"

	"golang.org/x/image/font/sfnt"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"

	"plumbline/model/finding"
)

// figure is one plot of the page.
type figure struct {
	SVG     template.HTML
	Caption string
}

// section is the network part or one zone's part of the page.
type section struct {
	ID, Title string
	Summary   ZoneSummary
	Figures   []figure
}

type page struct {
	Title    string
	S        Summary
	FontCSS  template.CSS
	Sections []section
	Rows     []ZoneSummary
	Findings []findingRow
	Plots    int
}

type findingRow struct {
	Label, Kind, Zone, Onset, Raised, Size, Volume, Candidates, Evidence string
}

// figures renders every plot: for the network, the map, the summed
// balance and the heat strip of every logger; for each zone, its balance,
// CUSUM, night flow, heat strip and map.
func (r *Report) sections() ([]section, int, error) {
	var out []section
	count := 0
	add := func(s *section, svg []byte, err error, caption string) error {
		if err != nil {
			return fmt.Errorf("report: %s: %w", s.Title, err)
		}
		if svg == nil {
			return nil
		}
		s.Figures = append(s.Figures, figure{SVG: template.HTML(svg), Caption: caption})
		count++
		return nil
	}
	net := section{ID: "network", Title: "Network", Summary: r.Summary.Network}
	svg, err := r.mapPlot(-1, "Network map: zones, pressure loggers, finding candidates")
	if err := add(&net, svg, err, "Links coloured by zone; triangles are pressure loggers; rings are the best three candidates of each finding, labelled finding.rank."); err != nil {
		return nil, 0, err
	}
	svg, err = r.balancePlot(-1, "Network: measured inflow against expected consumption (all zones)")
	if err := add(&net, svg, err, "Sum over zones of net metered inflow and of expected consumption; the shaded band is the imbalance. Dashed lines: estimated onsets; solid: when raised."); err != nil {
		return nil, 0, err
	}
	svg, scale, err := r.heatStrip(-1, "Network: pressure residual per logger (measured − model)")
	if err := add(&net, svg, err, heatCaption(scale)); err != nil {
		return nil, 0, err
	}
	out = append(out, net)
	for zi := range r.b.zones {
		z := r.b.zones[zi].z
		s := section{ID: "zone-" + z.ID, Title: "Zone " + z.ID, Summary: r.Summary.Zones[zi]}
		svg, err := r.balancePlot(zi, "Zone "+z.ID+": measured inflow against expected consumption")
		if err := add(&s, svg, err, "Net metered inflow and expected consumption (patterns plus modelled leakage); the shaded band is the imbalance."); err != nil {
			return nil, 0, err
		}
		svg, err = r.cusumPlot(zi)
		if err := add(&s, svg, err, "Highest CUSUM statistic in each time bin (solid) against its threshold (dashed); vertical lines mark findings where raised."); err != nil {
			return nil, 0, err
		}
		svg, err = r.nightPlot(zi)
		if err := add(&s, svg, err, "Each night's mean and minimum inflow in the night window against the legitimate-use allowance; dashed lines mark the estimated onset of detected steps."); err != nil {
			return nil, 0, err
		}
		svg, scale, err := r.heatStrip(zi, "Zone "+z.ID+": pressure residual per logger")
		if err := add(&s, svg, err, heatCaption(scale)); err != nil {
			return nil, 0, err
		}
		svg, err = r.mapPlot(zi, "Zone "+z.ID+": map")
		if err := add(&s, svg, err, "The zone's links, its loggers and the candidates of its findings."); err != nil {
			return nil, 0, err
		}
		out = append(out, s)
	}
	return out, count, nil
}

func heatCaption(scale float64) string {
	return fmt.Sprintf("Red: measured above the model, blue: below, full colour at ±%.2f m; grey: missing data; black: readings flagged faulty (stuck, spike, out of range). Triangles: onsets of sensor-fault findings.", scale)
}

// WriteHTML writes the report page: one self-contained HTML document.
// It returns the number of plots (inline SVG elements) it holds.
func (r *Report) WriteHTML(w io.Writer) (int, error) {
	secs, n, err := r.sections()
	if err != nil {
		return 0, err
	}
	css, err := fontCSS()
	if err != nil {
		return 0, err
	}
	pg := page{Title: "Retrospective report " + r.Summary.From.Format("2006-01-02") + " to " + r.Summary.To.Format("2006-01-02"),
		S: r.Summary, FontCSS: css, Sections: secs, Rows: append(append([]ZoneSummary(nil), r.Summary.Zones...), r.Summary.Network), Plots: n}
	for _, f := range r.Summary.Findings {
		pg.Findings = append(pg.Findings, findingRow{Label: f.Label, Kind: string(f.Kind), Zone: f.Zone,
			Onset: f.Onset.UTC().Format("2006-01-02 15:04"), Raised: f.Raised.UTC().Format("2006-01-02 15:04"),
			Size: SizeText(f.Finding), Volume: optf(f.VolumeLostM3, "%.0f"), Candidates: candText(f.Finding), Evidence: f.Evidence})
	}
	var buf bytes.Buffer
	if err := pageTmpl.Execute(&buf, pg); err != nil {
		return 0, fmt.Errorf("report: page: %w", err)
	}
	_, err = w.Write(buf.Bytes())
	return n, err
}

// SizeText is a finding's size in words: a leak's flow, a blockage's
// open fraction (or that it was not estimated: a zone-wide loss of
// pressure gives none), "-" for other kinds.
func SizeText(f finding.Finding) string {
	switch f.Kind {
	case finding.Leak:
		return fmt.Sprintf("%.2f L/s", f.SizeLPS)
	case finding.Blockage:
		if f.OpenFrac <= 0 {
			return "open fraction not estimated"
		}
		return fmt.Sprintf("about %.0f%% open", 100*f.OpenFrac)
	}
	return "-"
}

func candText(f finding.Finding) string {
	var parts []string
	for _, c := range topCandidates(f, 3) {
		parts = append(parts, fmt.Sprintf("%s (%.2f)", c.ID, c.Score))
	}
	if len(parts) == 0 {
		return "-"
	}
	return strings.Join(parts, ", ")
}

func optf(x *float64, format string) string {
	if x == nil {
		return "–"
	}
	return fmt.Sprintf(format, *x)
}

// fontCSS returns the @font-face rule embedding the plot font (the
// Liberation face gonum/plot draws with) as a data URL, under the family
// name the SVG text refers to.
func fontCSS() (template.CSS, error) {
	face := font.DefaultCache.Lookup(plot.DefaultFont, 12)
	if face.Face == nil {
		return "", fmt.Errorf("report: plot font %v not available", plot.DefaultFont)
	}
	var nb sfnt.Buffer
	family, err := face.Face.Name(&nb, sfnt.NameIDFamily)
	if err != nil {
		return "", fmt.Errorf("report: plot font name: %w", err)
	}
	var raw bytes.Buffer
	if _, err := face.Face.WriteSourceTo(nil, &raw); err != nil {
		return "", fmt.Errorf("report: plot font data: %w", err)
	}
	return template.CSS(fmt.Sprintf("@font-face{font-family:%q;font-style:normal;font-weight:normal;src:url(data:font/ttf;base64,%s) format(\"truetype\");}",
		family, base64.StdEncoding.EncodeToString(raw.Bytes()))), nil
}

// Files are the paths a report was written to.
type Files struct {
	HTML, JSON, CSV string
	// Plots is the number of SVG plots in the HTML.
	Plots int
}

// WriteFiles writes the HTML to htmlPath and the JSON and CSV summaries
// beside it (same name, extensions .json and .csv).
func (r *Report) WriteFiles(htmlPath string) (Files, error) {
	base := strings.TrimSuffix(htmlPath, ".html")
	base = strings.TrimSuffix(base, ".htm")
	f := Files{HTML: htmlPath, JSON: base + ".json", CSV: base + ".csv"}
	if f.JSON == htmlPath {
		f.JSON, f.CSV = htmlPath+".json", htmlPath+".csv"
	}
	var buf bytes.Buffer
	n, err := r.WriteHTML(&buf)
	if err != nil {
		return f, err
	}
	f.Plots = n
	if err := os.WriteFile(f.HTML, buf.Bytes(), 0o644); err != nil {
		return f, wrapFile(f.HTML, err)
	}
	buf.Reset()
	if err := r.WriteJSON(&buf); err != nil {
		return f, wrapFile(f.JSON, err)
	}
	if err := os.WriteFile(f.JSON, buf.Bytes(), 0o644); err != nil {
		return f, wrapFile(f.JSON, err)
	}
	buf.Reset()
	if err := r.WriteCSV(&buf); err != nil {
		return f, wrapFile(f.CSV, err)
	}
	if err := os.WriteFile(f.CSV, buf.Bytes(), 0o644); err != nil {
		return f, wrapFile(f.CSV, err)
	}
	return f, nil
}

var pageTmpl = template.Must(template.New("page").Funcs(template.FuncMap{
	"t":    func(t time.Time) string { return t.UTC().Format("2006-01-02 15:04 UTC") },
	"f0":   func(x float64) string { return fmt.Sprintf("%.0f", x) },
	"f2":   func(x float64) string { return fmt.Sprintf("%.2f", x) },
	"o0":   func(x *float64) string { return optf(x, "%.0f") },
	"o1":   func(x *float64) string { return optf(x, "%.1f") },
	"o2":   func(x *float64) string { return optf(x, "%.2f") },
	"uarl": func(x *float64) string { return fmt.Sprintf("%.1f", *x/1000) },
	"pct":  func(x float64) string { return fmt.Sprintf("%.1f %%", 100*x) },
}).Parse(pageHTML))

const pageHTML = `<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{{.Title}}</title>
<style>
{{.FontCSS}}
body{font-family:"Liberation Serif",serif;margin:1.5em auto;max-width:1000px;color:#222;background:#fff;line-height:1.35}
h1{font-size:1.6em;margin-bottom:.2em}h2{border-bottom:1px solid #999;margin-top:2em}
table{border-collapse:collapse;font-size:.85em;margin:.6em 0}th,td{border:1px solid #bbb;padding:.2em .45em;vertical-align:top}
th{background:#eee}td.n{text-align:right;font-variant-numeric:tabular-nums}
.caution{border:2px solid #b02020;background:#fff4f2;padding:.5em 1em;margin:1em 0}
figure{margin:1.2em 0}figure svg{width:100%;height:auto;display:block}figcaption{font-size:.85em;color:#444}
nav a{margin-right:1em}.meta{color:#555}
</style>
</head>
<body>
<h1>{{.Title}}</h1>
<p class="meta">Period {{t .S.From}} to {{t .S.To}} · run {{.S.Run}} · {{.S.Steps}} steps of {{.S.Step}} · {{.S.Readings}} readings · FAVAD N1 = {{.S.N1}} · {{.Plots}} plots</p>
<div class="caution"><strong>Cautions.</strong><ul>{{range .S.Cautions}}<li>{{.}}</li>{{end}}</ul></div>
<nav>{{range .Sections}}<a href="#{{.ID}}">{{.Title}}</a>{{end}}<a href="#findings">Findings</a><a href="#leakage">Leakage figures</a></nav>

<h2 id="findings">Findings</h2>
{{if .Findings}}<table>
<tr><th>#</th><th>kind</th><th>zone</th><th>onset</th><th>raised</th><th>size</th><th>volume lost so far (m³)</th><th>best candidates (score)</th><th>evidence</th></tr>
{{range .Findings}}<tr><td>{{.Label}}</td><td>{{.Kind}}</td><td>{{.Zone}}</td><td>{{.Onset}}</td><td>{{.Raised}}</td><td class="n">{{.Size}}</td><td class="n">{{.Volume}}</td><td>{{.Candidates}}</td><td>{{.Evidence}}</td></tr>
{{end}}</table>{{else}}<p>No findings in this period.</p>{{end}}

<h2 id="leakage">Water balance and leakage figures</h2>
<table>
<tr><th>zone</th><th>inflow (m³)</th><th>expected (m³)</th><th>imbalance (m³)</th><th>mean imbalance (L/s)</th><th>nights</th><th>night allowance (L/s)</th><th>night excess (L/s)</th><th>mean / night pressure (m)</th><th>NDF (h/day)</th><th>real losses (L/s)</th><th>real losses (m³/day)</th><th>UARL (m³/day)</th><th>ILI</th><th>loggers: missing / faulty</th></tr>
{{range .Rows}}<tr><td>{{.Zone}}</td><td class="n">{{f0 .InflowM3}}</td><td class="n">{{f0 .ExpectedM3}}</td><td class="n">{{f0 .ImbalanceM3}}</td><td class="n">{{o2 .MeanImbalanceLPS}}</td><td class="n">{{.Nights}}</td><td class="n">{{f2 .NightAllowanceLPS}}</td><td class="n">{{o2 .NightExcessLPS}}</td><td class="n">{{o1 .MeanPressureM}} / {{o1 .NightPressureM}}</td><td class="n">{{o1 .NDFHours}}{{if eq .NDFFrom "assumed"}} (assumed){{end}}</td><td class="n">{{o2 .RealLossesLPS}}</td><td class="n">{{o1 .RealLossesM3PerDay}}</td><td class="n">{{if .UARLLPerDay}}{{uarl .UARLLPerDay}}{{else}}–{{end}}</td><td class="n">{{o2 .ILI}}</td><td class="n">{{.Loggers}}: {{pct .MissingFraction}} / {{pct .FaultFraction}}</td></tr>
{{end}}</table>
<p class="meta">Real losses = night excess (night-window mean inflow minus the legitimate-use allowance, mean over the nights) × night-day factor, where NDF = Σ over the 24 hours of (P<sub>h</sub>/P<sub>night</sub>)<sup>N1</sup> from the zone's logger pressures (FAVAD, May 1994; Lambert 2001). UARL (L/day) = (18·Lm + 0.8·Nc + 25·Lp)·P (Lambert et al. 1999), shown where the configuration gives mains length and service connections; ILI = current real losses / UARL. The imbalance volume is the sum over steps of (inflow − expected) × step length.</p>

{{range .Sections}}<h2 id="{{.ID}}">{{.Title}}</h2>
{{range .Figures}}<figure>{{.SVG}}<figcaption>{{.Caption}}</figcaption></figure>
{{end}}{{end}}
<div class="caution"><strong>Cautions.</strong><ul>{{range .S.Cautions}}<li>{{.}}</li>{{end}}</ul></div>
</body>
</html>
`
