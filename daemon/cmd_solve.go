package main

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"text/tabwriter"

	"plumbline/model/hydraulic"
	"plumbline/model/network"
)

// solveOutput is the --json form of `plumbline solve` (issue contract:
// exactly these keys).
type solveOutput struct {
	Converged       bool        `json:"converged"`
	Iterations      int         `json:"iterations"`
	MaxImbalanceLPS float64     `json:"max_imbalance_lps"`
	Nodes           []solveNode `json:"nodes"`
	Links           []solveLink `json:"links"`
}

type solveNode struct {
	ID        string  `json:"id"`
	HeadM     float64 `json:"head_m"`
	PressureM float64 `json:"pressure_m"`
	DemandLPS float64 `json:"demand_lps"`
	LeakLPS   float64 `json:"leak_lps"`
}

type solveLink struct {
	ID         string  `json:"id"`
	FlowLPS    float64 `json:"flow_lps"`
	VelocityMS float64 `json:"velocity_ms"`
	HeadlossM  float64 `json:"headloss_m"`
	Status     string  `json:"status"`
}

// runSolve implements `plumbline solve`: one steady-state solve of a
// network file at base demand times a multiplier.
func runSolve(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("solve", "--network F [--demand-multiplier X] [--json]", stderr)
	path := fs.String("network", "", "network file (GeoJSON)")
	mult := fs.Float64("demand-multiplier", 1, "multiplier applied to every junction's base demand")
	asJSON := fs.Bool("json", false, "print the solution as JSON")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if *path == "" {
		fs.Usage()
		return errUsage
	}
	if *mult < 0 {
		return fmt.Errorf("--demand-multiplier %g: must not be negative", *mult)
	}
	net, err := network.ReadFile(*path)
	if err != nil {
		return err
	}
	s, err := hydraulic.NewSolver(net, hydraulic.Options{})
	if err != nil {
		return fmt.Errorf("%s: %w", *path, err)
	}
	demand := make([]float64, len(net.Nodes))
	for i := range net.Nodes {
		if net.Nodes[i].Kind == network.Junction {
			demand[i] = net.Nodes[i].Demand * *mult
		}
	}
	sol, err := s.Solve(&hydraulic.Conditions{Demand: demand}, nil)
	if err != nil {
		return fmt.Errorf("%s: %w", *path, err)
	}
	out := solveOutput{Converged: sol.Converged, Iterations: sol.Iterations, MaxImbalanceLPS: sol.MaxImbalance}
	out.Nodes = make([]solveNode, len(net.Nodes))
	for i := range net.Nodes {
		out.Nodes[i] = solveNode{ID: net.Nodes[i].ID, HeadM: sol.Head[i], PressureM: sol.Pressure[i], DemandLPS: sol.Demand[i], LeakLPS: sol.Leak[i]}
	}
	out.Links = make([]solveLink, len(net.Links))
	for i := range net.Links {
		out.Links[i] = solveLink{ID: net.Links[i].ID, FlowLPS: sol.Flow[i], VelocityMS: sol.Velocity[i], HeadlossM: sol.Headloss[i], Status: sol.State[i].String()}
	}
	if *asJSON {
		enc := json.NewEncoder(stdout)
		enc.SetIndent("", " ")
		return enc.Encode(out)
	}
	return printSolveTable(stdout, *path, &out)
}

func printSolveTable(w io.Writer, name string, out *solveOutput) error {
	fmt.Fprintf(w, "%s: converged=%v after %d iterations, largest junction imbalance %.2g L/s\n\n", name, out.Converged, out.Iterations, out.MaxImbalanceLPS)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "node\thead m\tpressure m\tdemand L/s\tleak L/s\t")
	for _, n := range out.Nodes {
		fmt.Fprintf(tw, "%s\t%.3f\t%.3f\t%.3f\t%.3f\t\n", n.ID, n.HeadM, n.PressureM, n.DemandLPS, n.LeakLPS)
	}
	fmt.Fprintln(tw, "\t\t\t\t\t")
	fmt.Fprintln(tw, "link\tflow L/s\tvelocity m/s\thead loss m\tstatus\t")
	for _, l := range out.Links {
		fmt.Fprintf(tw, "%s\t%.3f\t%.3f\t%.3f\t%s\t\n", l.ID, l.FlowLPS, l.VelocityMS, l.HeadlossM, l.Status)
	}
	return tw.Flush()
}
