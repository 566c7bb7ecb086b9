package score

import (
	"fmt"
	"io"
	"strings"
	"text/tabwriter"
)

// WriteText writes the report as plain-text tables for a terminal: the
// summary per group (all, each kind, leak size bands), then one line per
// event and one per false finding. A dash marks a figure that does not
// apply or cannot be measured.
func WriteText(w io.Writer, r *Report) error {
	ew := &errWriter{w: w}
	fmt.Fprintf(ew, "observed %s to %s (%.1f days), %d zone(s) (from %s); localised = best candidate within %g m along pipes\n\n",
		r.Observed.Start.Format("2006-01-02T15:04Z"), r.Observed.End.Format("2006-01-02T15:04Z"), r.Observed.Days,
		r.Observed.Zones, r.Observed.ZonesFrom, r.Observed.WithinM)

	tw := tabwriter.NewWriter(ew, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "group\tevents\tdetected\tmissed\tfalse\tfalse/zone/30d\tTTD median\tTTD max\ttop-1\tranked\tdist median m\tlocalised\t")
	rows := append([]Summary{r.Overall, r.ByKind.Leak, r.ByKind.Blockage, r.ByKind.SensorFault}, r.LeakBands...)
	for _, s := range rows {
		fmt.Fprintf(tw, "%s\t%d\t%d\t%d\t%s\t%s\t%s\t%s\t%d\t%d\t%s\t%s\t\n",
			s.Label, s.Events, s.Detected, s.Missed, intOr(s.FalseFindings), numOr(s.FalsePerZonePer30d, "%.2f"),
			strOr(s.TimeToDetect.Median), strOr(s.TimeToDetect.Max), s.Localisation.Top1, s.Localisation.Ranked,
			numOr(s.Localisation.MedianDistanceM, "%.0f"), fracOr(s.Localisation.WithinFraction))
	}
	if err := tw.Flush(); err != nil {
		return err
	}

	if len(r.Events) > 0 {
		fmt.Fprintln(ew, "\nevents")
		tw = tabwriter.NewWriter(ew, 0, 0, 2, ' ', 0)
		fmt.Fprintln(tw, "#\tkind\tat\tzone\tstart\tsize L/s\tdetected\tfinding\ttime to detect\trank\tbest\tdistance m\t")
		for _, e := range r.Events {
			det, fi, ttd := "no", "-", "-"
			if e.Detected {
				det = "yes"
				fi = fmt.Sprint(*e.Finding)
				ttd = seconds(*e.TimeToDetectS).String()
			}
			size := "-"
			if e.SizeLPS > 0 {
				size = fmt.Sprintf("%g", e.SizeLPS)
			}
			rank := "-"
			if e.Detected {
				rank = fmt.Sprint(e.Rank)
			}
			fmt.Fprintf(tw, "%d\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t\n", e.Index, e.Kind, e.At, strOr(e.Zone),
				e.Start.Format("2006-01-02T15:04Z"), size, det, fi, ttd, rank, strOr(e.BestCandidate), numOr(e.DistanceM, "%.0f"))
		}
		if err := tw.Flush(); err != nil {
			return err
		}
	}

	if len(r.FalseFindings) > 0 {
		fmt.Fprintln(ew, "\nfalse findings")
		tw = tabwriter.NewWriter(ew, 0, 0, 2, ' ', 0)
		fmt.Fprintln(tw, "#\tkind\tzone\traised\tbest\twhy\t")
		for _, f := range r.FalseFindings {
			fmt.Fprintf(tw, "%d\t%s\t%s\t%s\t%s\t%s\t\n", f.Index, f.Kind, strOr(f.Zone), f.Raised.Format("2006-01-02T15:04Z"), strOr(f.BestCandidate), f.Reason)
		}
		if err := tw.Flush(); err != nil {
			return err
		}
		var parts []string
		for _, z := range r.FalseByZone {
			parts = append(parts, fmt.Sprintf("%s %d (%s per 30 days)", strOr(z.Zone), z.Count, numOr(z.Per30d, "%.2f")))
		}
		fmt.Fprintf(ew, "by zone: %s\n", strings.Join(parts, ", "))
	}
	return ew.err
}

// errWriter keeps the first write error.
type errWriter struct {
	w   io.Writer
	err error
}

func (e *errWriter) Write(p []byte) (int, error) {
	if e.err != nil {
		return 0, e.err
	}
	n, err := e.w.Write(p)
	e.err = err
	return n, err
}

func strOr(s string) string {
	if s == "" {
		return "-"
	}
	return s
}

func intOr(v *int) string {
	if v == nil {
		return "-"
	}
	return fmt.Sprint(*v)
}

func numOr(v *float64, format string) string {
	if v == nil {
		return "-"
	}
	return fmt.Sprintf(format, *v)
}

func fracOr(v *float64) string {
	if v == nil {
		return "-"
	}
	return fmt.Sprintf("%.0f%%", 100**v)
}
