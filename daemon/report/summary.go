package report

import (
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strconv"
	"time"

	"plumbline/model/finding"
	"plumbline/model/leakage"
)

// Cautions are printed in every report and summary.
var Cautions = []string{
	"Findings are hypotheses ranked from telemetry and a hydraulic model; each needs field confirmation (listening, correlation, step testing) before it is acted on.",
	"Valve operation, excavation and pressure changes follow the utility's own procedures and local codes; this report does not authorise any of them.",
	"Leakage figures are estimates: night excess over the legitimate-use allowance scaled by a night-day factor from logger pressures under FAVAD; UARL and ILI depend on the configured mains length, connections and pressure.",
}

// Meta describes the replay behind a report.
type Meta struct {
	Run      string
	From, To time.Time
	Readings int
}

// Summary is the JSON summary of a report (written beside the HTML).
type Summary struct {
	Run      string    `json:"run"`
	From     time.Time `json:"from"`
	To       time.Time `json:"to"`
	Step     string    `json:"step"`
	Steps    int       `json:"steps"`
	Readings int       `json:"readings"`
	// N1 is the FAVAD exponent used for the night-day factors.
	N1       float64          `json:"n1"`
	Network  ZoneSummary      `json:"network"`
	Zones    []ZoneSummary    `json:"zones"`
	Findings []FindingSummary `json:"findings"`
	Cautions []string         `json:"cautions"`
}

// ZoneSummary holds one zone's figures (or, as Summary.Network, the sum
// over zones). Optional figures are null where the data do not give them.
type ZoneSummary struct {
	Zone string `json:"zone"`
	// BalanceSteps is the number of steps with a zone balance; the
	// volumes are the exact sums of flow × step length over them, m³.
	BalanceSteps     int      `json:"balance_steps"`
	InflowM3         float64  `json:"inflow_m3"`
	ExpectedM3       float64  `json:"expected_m3"`
	ImbalanceM3      float64  `json:"imbalance_m3"`
	MeanImbalanceLPS *float64 `json:"mean_imbalance_lps"`
	// Nights counted; the mean night excess is the night-window mean
	// inflow minus the legitimate-use allowance, averaged over them.
	Nights            int      `json:"nights"`
	NightAllowanceLPS float64  `json:"night_allowance_lps"`
	NightExcessLPS    *float64 `json:"night_excess_lps"`
	// Pressures are zone means of the loggers' measured values, m.
	MeanPressureM  *float64 `json:"mean_pressure_m"`
	NightPressureM *float64 `json:"night_pressure_m"`
	// NDFHours is the night-day factor, h/day; NDFFrom says "loggers"
	// or "assumed" (24 h/day when the zone has no pressure data).
	NDFHours *float64 `json:"ndf_h_per_day"`
	NDFFrom  string   `json:"ndf_from,omitempty"`
	// Real losses: night excess × NDF.
	RealLossesM3PerDay *float64 `json:"real_losses_m3_per_day"`
	RealLossesLPS      *float64 `json:"real_losses_lps"`
	// UARL of Lambert et al. (1999) in L/day, the pressure it used and
	// where that came from ("config" or "loggers"), whether the zone is
	// inside the formula's range, and ILI = CARL/UARL.
	UARLLPerDay   *float64 `json:"uarl_l_per_day"`
	UARLPressureM *float64 `json:"uarl_pressure_m"`
	UARLFrom      string   `json:"uarl_pressure_from,omitempty"`
	UARLInRange   *bool    `json:"uarl_in_range,omitempty"`
	ILI           *float64 `json:"ili"`
	// Loggers, and the fractions of logger steps missing or flagged.
	Loggers         int     `json:"loggers"`
	MissingFraction float64 `json:"missing_fraction"`
	FaultFraction   float64 `json:"fault_fraction"`
	Findings        int     `json:"findings"`
}

// FindingSummary is a finding with the report's figures.
type FindingSummary struct {
	// Label is "F1", "F2" ... in the order raised, as on the plots.
	Label string `json:"label"`
	finding.Finding
	// VolumeLostM3 is a leak's size × (end of period − onset), m³.
	VolumeLostM3 *float64 `json:"volume_lost_m3,omitempty"`
}

// Report is a finished report: the summary and the aggregates behind the
// plots.
type Report struct {
	Summary Summary
	b       *Builder
}

// Finish turns the aggregates and the replay's findings into a Report.
// The Builder must not be used afterwards.
func (b *Builder) Finish(m Meta, findings []finding.Finding) *Report {
	s := Summary{Run: m.Run, From: m.From.UTC(), To: m.To.UTC(), Step: b.step.String(), Steps: b.steps,
		Readings: m.Readings, N1: b.n1, Cautions: Cautions}
	if s.From.IsZero() {
		s.From = b.first
	}
	if s.To.IsZero() || s.To.Year() >= 9999 {
		s.To = b.last.Add(b.step)
	}
	end := s.To
	perZone := map[string]int{}
	for i, f := range findings {
		fs := FindingSummary{Label: "F" + strconv.Itoa(i+1), Finding: f}
		if f.Kind == finding.Leak && f.SizeLPS > 0 && end.After(f.Onset) {
			v := f.SizeLPS * end.Sub(f.Onset).Seconds() / 1000
			fs.VolumeLostM3 = &v
		}
		perZone[f.Zone]++
		s.Findings = append(s.Findings, fs)
	}
	if s.Findings == nil {
		s.Findings = []FindingSummary{}
	}
	net := ZoneSummary{Zone: "network"}
	var netLoss, netUARL, netExcess float64
	lossAll, uarlAll, excessAll := len(b.zones) > 0, len(b.zones) > 0, len(b.zones) > 0
	var netLogSteps, netMissing, netFaults int
	for zi := range b.zones {
		z := b.zoneSummary(zi)
		z.Findings = perZone[z.Zone]
		s.Zones = append(s.Zones, z)
		net.BalanceSteps = max(net.BalanceSteps, z.BalanceSteps)
		net.InflowM3 += z.InflowM3
		net.ExpectedM3 += z.ExpectedM3
		net.ImbalanceM3 += z.ImbalanceM3
		net.Nights = max(net.Nights, z.Nights)
		net.NightAllowanceLPS += z.NightAllowanceLPS
		net.Loggers += z.Loggers
		net.Findings += z.Findings
		if z.NightExcessLPS != nil {
			netExcess += *z.NightExcessLPS
		} else {
			excessAll = false
		}
		if z.RealLossesM3PerDay != nil {
			netLoss += *z.RealLossesM3PerDay
		} else {
			lossAll = false
		}
		if z.UARLLPerDay != nil {
			netUARL += *z.UARLLPerDay
		} else {
			uarlAll = false
		}
	}
	for _, l := range b.loggers {
		netLogSteps += l.steps
		netMissing += l.missing
		netFaults += l.faults
	}
	net.Loggers = len(b.loggers)
	if netLogSteps > 0 {
		net.MissingFraction = float64(netMissing) / float64(netLogSteps)
		net.FaultFraction = float64(netFaults) / float64(netLogSteps)
	}
	if net.BalanceSteps > 0 {
		net.MeanImbalanceLPS = ptr(net.ImbalanceM3 * 1000 / (float64(net.BalanceSteps) * b.step.Seconds()))
	}
	if excessAll {
		net.NightExcessLPS = ptr(netExcess)
	}
	if lossAll {
		net.RealLossesM3PerDay = ptr(netLoss)
		net.RealLossesLPS = ptr(netLoss * 1000 / leakage.SecondsPerDay)
		if uarlAll {
			net.UARLLPerDay = ptr(netUARL)
			if ili, err := leakage.ILI(netLoss*1000, netUARL); err == nil {
				net.ILI = ptr(ili)
			}
		}
	}
	net.Findings = len(findings)
	s.Network = net
	roundZone(&s.Network)
	for i := range s.Zones {
		roundZone(&s.Zones[i])
	}
	for i := range s.Findings {
		roundP(s.Findings[i].VolumeLostM3)
	}
	return &Report{Summary: s, b: b}
}

// zoneSummary computes one zone's figures.
func (b *Builder) zoneSummary(zi int) ZoneSummary {
	z := &b.zones[zi]
	out := ZoneSummary{Zone: z.z.ID, BalanceSteps: z.balanceSteps, InflowM3: z.inflowM3, ExpectedM3: z.expectedM3,
		ImbalanceM3: z.imbalanceM3, NightAllowanceLPS: z.z.NightUseLPS, Loggers: len(z.loggers)}
	if z.balanceSteps > 0 {
		out.MeanImbalanceLPS = ptr(z.imbalanceM3 * 1000 / (float64(z.balanceSteps) * b.step.Seconds()))
	}
	var steps, missing, faults int
	for _, li := range z.loggers {
		steps += b.loggers[li].steps
		missing += b.loggers[li].missing
		faults += b.loggers[li].faults
	}
	if steps > 0 {
		out.MissingFraction = float64(missing) / float64(steps)
		out.FaultFraction = float64(faults) / float64(steps)
	}
	sum, n := 0.0, 0
	for _, nf := range z.nights {
		if finite(nf.MeanLPS) {
			sum += nf.MeanLPS - nf.AllowLPS
			n++
		}
	}
	out.Nights = n
	if n > 0 {
		out.NightExcessLPS = ptr(sum / float64(n))
	}
	hourly := make([]float64, 24)
	psum, pn := 0.0, 0
	for h := range hourly {
		hourly[h] = math.NaN()
		if z.hourN[h] > 0 {
			hourly[h] = z.hourSum[h] / float64(z.hourN[h])
			psum += z.hourSum[h]
			pn += z.hourN[h]
		}
	}
	if pn > 0 {
		out.MeanPressureM = ptr(psum / float64(pn))
	}
	ndf, from := 24.0, "assumed"
	if z.nightPN > 0 {
		night := z.nightPSum / float64(z.nightPN)
		out.NightPressureM = ptr(night)
		if v, err := leakage.NightDayFactor(hourly, night, b.n1); err == nil {
			ndf, from = v, "loggers"
		}
	}
	out.NDFHours, out.NDFFrom = ptr(ndf), from
	if out.NightExcessLPS != nil {
		if d, err := leakage.DailyLossesM3(*out.NightExcessLPS, ndf); err == nil {
			out.RealLossesM3PerDay = ptr(d)
			out.RealLossesLPS = ptr(d * 1000 / leakage.SecondsPerDay)
		}
	}
	if z.z.MainsLengthKm > 0 || z.z.ServiceConnections > 0 {
		sys := leakage.System{MainsKm: z.z.MainsLengthKm, Connections: z.z.ServiceConnections,
			PrivateKm: z.z.ServiceLengthKm, PressureM: z.z.AveragePressureM}
		out.UARLFrom = "config"
		if sys.PressureM <= 0 && out.MeanPressureM != nil {
			sys.PressureM, out.UARLFrom = *out.MeanPressureM, "loggers"
		}
		if u, err := leakage.UARL(sys); err == nil && sys.PressureM > 0 {
			out.UARLLPerDay = ptr(u)
			out.UARLPressureM = ptr(sys.PressureM)
			in := sys.InRange()
			out.UARLInRange = &in
			if out.RealLossesM3PerDay != nil {
				if ili, err := leakage.ILI(*out.RealLossesM3PerDay*1000, u); err == nil {
					out.ILI = ptr(ili)
				}
			}
		} else {
			out.UARLFrom = ""
		}
	}
	return out
}

// sig is the number of significant digits the summary keeps: far below
// what the inputs resolve, and enough that the last bits of a sum do not
// make a golden file platform-dependent.
const sig = 9

func round(x float64) float64 {
	if !finite(x) || x == 0 {
		return x
	}
	v, _ := strconv.ParseFloat(strconv.FormatFloat(x, 'g', sig, 64), 64)
	return v
}

func roundP(x *float64) {
	if x != nil {
		*x = round(*x)
	}
}

func roundZone(z *ZoneSummary) {
	for _, x := range []*float64{&z.InflowM3, &z.ExpectedM3, &z.ImbalanceM3, &z.NightAllowanceLPS, &z.MissingFraction, &z.FaultFraction} {
		*x = round(*x)
	}
	for _, x := range []*float64{z.MeanImbalanceLPS, z.NightExcessLPS, z.MeanPressureM, z.NightPressureM, z.NDFHours,
		z.RealLossesM3PerDay, z.RealLossesLPS, z.UARLLPerDay, z.UARLPressureM, z.ILI} {
		roundP(x)
	}
}

func ptr[T any](v T) *T { return &v }

// WriteJSON writes the summary as indented JSON.
func (r *Report) WriteJSON(w io.Writer) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(r.Summary)
}

// csvHeader is the header of the CSV summary: one row per zone, then the
// network.
var csvHeader = []string{"zone", "balance_steps", "inflow_m3", "expected_m3", "imbalance_m3", "mean_imbalance_lps",
	"nights", "night_allowance_lps", "night_excess_lps", "mean_pressure_m", "night_pressure_m", "ndf_h_per_day",
	"real_losses_lps", "real_losses_m3_per_day", "uarl_l_per_day", "ili", "loggers", "missing_fraction", "fault_fraction", "findings"}

// WriteCSV writes the zone figures as CSV (empty cells where a figure is
// not available).
func (r *Report) WriteCSV(w io.Writer) error {
	cw := csv.NewWriter(w)
	if err := cw.Write(csvHeader); err != nil {
		return err
	}
	rows := append(append([]ZoneSummary(nil), r.Summary.Zones...), r.Summary.Network)
	for _, z := range rows {
		rec := []string{z.Zone, strconv.Itoa(z.BalanceSteps), num(z.InflowM3), num(z.ExpectedM3), num(z.ImbalanceM3), opt(z.MeanImbalanceLPS),
			strconv.Itoa(z.Nights), num(z.NightAllowanceLPS), opt(z.NightExcessLPS), opt(z.MeanPressureM), opt(z.NightPressureM), opt(z.NDFHours),
			opt(z.RealLossesLPS), opt(z.RealLossesM3PerDay), opt(z.UARLLPerDay), opt(z.ILI), strconv.Itoa(z.Loggers),
			num(z.MissingFraction), num(z.FaultFraction), strconv.Itoa(z.Findings)}
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

func num(x float64) string { return strconv.FormatFloat(x, 'g', 10, 64) }

func opt(x *float64) string {
	if x == nil {
		return ""
	}
	return num(*x)
}

// topCandidates returns a finding's first n candidates (best first, as
// the detector orders them).
func topCandidates(f finding.Finding, n int) []finding.Candidate {
	if len(f.Candidates) > n {
		return f.Candidates[:n]
	}
	return f.Candidates
}

func wrapFile(path string, err error) error {
	if err == nil {
		return nil
	}
	return fmt.Errorf("report %s: %w", path, err)
}
