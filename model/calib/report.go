package calib

import (
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strings"
	"text/tabwriter"
)

// WriteJSON writes the result as indented JSON with snake_case keys
// (the calibrated network is not included: write it with
// network.WriteFile).
func (r *Result) WriteJSON(w io.Writer) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	if err := enc.Encode(r); err != nil {
		return fmt.Errorf("calibration report: %w", err)
	}
	return nil
}

// WriteText writes the result as a plain-text report: summary, the
// parameter table, per-sensor fit before and after, validation on the
// held-out days and the suspected closed or throttled valves.
func (r *Result) WriteText(w io.Writer) error {
	var b strings.Builder
	fmt.Fprintf(&b, "Calibration: %s after %d iterations (%d evaluations), %s\n", r.Status, r.Iterations, r.Evaluations, r.Elapsed.Round(1e6))
	fmt.Fprintf(&b, "Fit data: %d snapshots, %d readings, days %s\n", r.FitSnapshots, r.Rows, strings.Join(r.FitDays, " "))
	fmt.Fprintf(&b, "Misfit per reading ((r/σ)², 1 = sensor accuracy): before %.4g, after %.4g\n", r.MisfitBefore, r.MisfitAfter)
	fmt.Fprintf(&b, "Day-to-day variation of zone consumption: %.1f %% found, %.1f %% assumed in the standard errors\n\n", 100*r.DayVariation, 100*r.DayVariationUsed)

	tw := tabwriter.NewWriter(&b, 2, 4, 2, ' ', 0)
	fmt.Fprintln(&b, "Parameters (estimate ± one standard error)")
	fmt.Fprintln(tw, "name\tprior\testimate\t± s.e.\tunit\tidentifiable\tnote")
	var unident []string
	for _, p := range r.Parameters {
		note := ""
		if p.AtBound {
			note = "at bound"
		}
		if p.MaxCorrelation > 0.9 {
			note = strings.TrimSpace(note + fmt.Sprintf(" corr %.2f with %s", p.MaxCorrelation, p.CorrelatedWith))
		}
		id := "yes"
		if !p.Identifiable {
			id = "NO"
			unident = append(unident, p.Name)
		}
		fmt.Fprintf(tw, "%s\t%.4g\t%.4g\t%.2g\t%s\t%s\t%s\n", p.Name, p.Prior, p.Estimate, p.StdErr, p.Unit, id, note)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	if len(unident) > 0 {
		fmt.Fprintf(&b, "\nNot identifiable from these readings (left at the recorded value): %s\n", strings.Join(unident, ", "))
	}
	if len(r.PipeEffects) > 0 {
		fmt.Fprintf(&b, "\nPipes the readings see one by one, fitted about their group (factor on the group's roughness; the pipe's own roughness):\n")
		tw := tabwriter.NewWriter(&b, 2, 4, 2, ' ', 0)
		fmt.Fprintln(tw, "pipe\tgroup\tfactor\t± s.e.\tprior\testimate\t± s.e.\tnote")
		for _, p := range r.PipeEffects {
			note := ""
			if p.AtBound {
				note = "at bound: more than roughness?"
			}
			fmt.Fprintf(tw, "%s\t%s\t%.3f\t%.2g\t%.4g\t%.4g\t%.2g\t%s\n", p.Link, p.Group, p.Factor, p.StdErr, p.Prior, p.Estimate, p.EstimateStdErr, note)
		}
		if err := tw.Flush(); err != nil {
			return err
		}
	}

	writeSensors := func(title string, fits []SensorFit) error {
		fmt.Fprintf(&b, "\n%s\n", title)
		tw := tabwriter.NewWriter(&b, 2, 4, 2, ' ', 0)
		fmt.Fprintln(tw, "sensor\tquantity\tunit\tσ\tn\tRMSE before\tbias before\tRMSE after\tbias after")
		for _, s := range fits {
			fmt.Fprintf(tw, "%s\t%s\t%s\t%.3g\t%d\t%.3g\t%+.3g\t%.3g\t%+.3g\n", s.ID, s.Quantity, s.Unit, s.Sigma, s.Before.Count, s.Before.RMSE, s.Before.Bias, s.After.RMSE, s.After.Bias)
		}
		return tw.Flush()
	}
	if err := writeSensors("Sensors on the fit data (residual = measured − modelled)", r.Sensors); err != nil {
		return err
	}
	if r.Validation.Snapshots > 0 {
		fmt.Fprintf(&b, "\nValidation on held-out days %s: %d snapshots, misfit per reading before %.4g, after %.4g\n",
			strings.Join(r.Validation.Days, " "), r.Validation.Snapshots, r.Validation.MisfitBefore, r.Validation.MisfitAfter)
		if err := writeSensors("Sensors on the held-out days", r.Validation.Sensors); err != nil {
			return err
		}
	} else {
		fmt.Fprintln(&b, "\nValidation: no day held out (fewer than two days of readings, or HoldOut < 0)")
	}
	fmt.Fprintln(&b, "\nSuspected closed or throttled valves")
	if len(r.Suspects) == 0 {
		fmt.Fprintln(&b, "none: no link needs a resistance far above what roughness explains")
	}
	for _, s := range r.Suspects {
		f := "closed"
		if !s.Closed && !math.IsInf(s.Factor, 1) {
			f = fmt.Sprintf("throttled ×%.0f", s.Factor)
		}
		fmt.Fprintf(&b, "- %s (%s): %s\n", s.Link, f, s.Evidence)
	}
	if len(r.Suspects) > 0 {
		fmt.Fprintln(&b, "These are hypotheses from the readings; confirm in the field by the utility's valve-operation procedures.")
	}
	if len(r.Applied) > 0 {
		fmt.Fprintln(&b, "\nChanged in the calibrated network")
		for _, a := range r.Applied {
			fmt.Fprintf(&b, "- %s shut: the fit with it shut validates better on the held-out days (misfit per reading %.4g, against %.4g with it open as recorded)\n",
				a.Link, a.ValidationShut, a.ValidationAsRecorded)
		}
		fmt.Fprintln(&b, "This changes the model only. A link in series with the one named fits the same; confirm on site which valve is shut, and")
		fmt.Fprintln(&b, "operate valves only under the utility's procedures and local codes (pressure changes, water quality after a flow reversal).")
	}
	if len(r.Warnings) > 0 {
		fmt.Fprintln(&b, "\nWarnings")
		for _, w := range r.Warnings {
			fmt.Fprintf(&b, "- %s\n", w)
		}
	}
	_, err := io.WriteString(w, b.String())
	return err
}
