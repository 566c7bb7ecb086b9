package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"

	"go.yaml.in/yaml/v3"

	"plumbline/alerts"
	"plumbline/daemon/config"
	"plumbline/model/network"
)

// checkOutput is the --json form of `plumbline check`.
type checkOutput struct {
	OK       bool           `json:"ok"`
	Problems []checkProblem `json:"problems"`
	// Summary is present when the files are valid.
	Summary *checkSummary `json:"summary,omitempty"`
}

// checkProblem is one problem: place is "file:line" (or "file"),
// feature the feature, sensor or zone id ("" if none), property the key
// at fault ("" if none), severity "error" or "warning".
type checkProblem struct {
	Place    string `json:"place"`
	Feature  string `json:"feature"`
	Property string `json:"property,omitempty"`
	Message  string `json:"message"`
	Severity string `json:"severity"`
	// text is the one-line form printed without --json.
	text string
}

// checkSummary counts what a valid network (and configuration) holds.
type checkSummary struct {
	Network    string `json:"network"`
	Junctions  int    `json:"junctions"`
	Reservoirs int    `json:"reservoirs"`
	Tanks      int    `json:"tanks"`
	Pipes      int    `json:"pipes"`
	Pumps      int    `json:"pumps"`
	Valves     int    `json:"valves"`
	// Zones counts the zones of the network file's nodes; with --config,
	// ConfigZones the configured ones and Sensors the sensors.
	Zones       int    `json:"zones"`
	Config      string `json:"config,omitempty"`
	Sensors     int    `json:"sensors,omitempty"`
	ConfigZones int    `json:"config_zones,omitempty"`
}

// errCheckFailed is returned when the checked files have errors; the
// problems are already on stdout.
var errCheckFailed = errors.New("check failed")

// runCheck implements `plumbline check`: it validates a network file
// (--network) or a service configuration with its network, sensors file
// and alerts section (--config) and prints every problem, one per line with its place, on stdout,
// errors and warnings alike; then, if there is no error, a one-line
// summary. With --json stdout holds one JSON object instead
// ({"ok", "problems", "summary"}). The exit status is non-zero when
// there is any error (warnings alone do not fail).
func runCheck(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("check", "--network F | --config F [--json]", stderr)
	netPath := fs.String("network", "", "network file (GeoJSON) to check")
	cfgPath := fs.String("config", "", "service configuration (YAML) to check, with the network it names")
	asJSON := fs.Bool("json", false, "print the result as JSON on stdout")
	flagsUsage := fs.Usage
	fs.Usage = func() {
		flagsUsage()
		fmt.Fprint(stderr, `
Every problem, error or warning, is printed on stdout, one per line:
  file:line: feature or sensor or zone: property: message
then, when there is no error, a summary of what the files hold. With
--json, stdout holds {"ok", "problems": [{"place", "feature", "property",
"message", "severity"}], "summary"} instead. The exit status is 1 when
there is an error; warnings alone do not fail.
`)
	}
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if (*netPath == "") == (*cfgPath == "") {
		fmt.Fprintln(stderr, "give exactly one of --network and --config")
		fs.Usage()
		return errUsage
	}
	var (
		probs   []checkProblem
		summary *checkSummary
	)
	if *netPath != "" {
		data, err := os.ReadFile(*netPath)
		if err != nil {
			return fmt.Errorf("network: %w", err)
		}
		n, ps := network.Parse(data, *netPath)
		for _, p := range ps {
			probs = append(probs, fromNetworkProblem(p))
		}
		if n != nil {
			summary = checkSummarise(n, *netPath)
		}
	} else {
		data, err := os.ReadFile(*cfgPath)
		if err != nil {
			return fmt.Errorf("configuration: %w", err)
		}
		c, ps := config.Inspect(data, *cfgPath)
		for _, p := range ps {
			probs = append(probs, fromConfigProblem(p))
		}
		if c != nil && c.Alerts.Kind != 0 {
			probs = append(probs, alertsProblems(*cfgPath, &c.Alerts)...)
		}
		if c != nil && !config.HasErrors(ps) {
			summary = checkSummarise(c.Network, c.NetworkPath)
			summary.Config = *cfgPath
			summary.Sensors = len(c.Sensors)
			summary.ConfigZones = len(c.Zones)
		}
	}
	nErr := 0
	for _, p := range probs {
		if p.Severity == "error" {
			nErr++
		}
	}
	if *asJSON {
		out := checkOutput{OK: nErr == 0, Problems: probs, Summary: summary}
		if out.Problems == nil {
			out.Problems = []checkProblem{}
		}
		enc := json.NewEncoder(stdout)
		enc.SetIndent("", "  ")
		if err := enc.Encode(out); err != nil {
			return fmt.Errorf("write result: %w", err)
		}
	} else {
		for _, p := range probs {
			fmt.Fprintln(stdout, p.text)
		}
		if summary != nil {
			fmt.Fprintln(stdout, summary.line(len(probs)))
		}
	}
	if nErr > 0 {
		return fmt.Errorf("%w: %s", errCheckFailed, checkPlural(nErr, "error"))
	}
	return nil
}

// alertsProblems checks the alerts section with package alerts (which
// owns its format) and places its errors in the configuration file.
func alertsProblems(file string, node *yaml.Node) []checkProblem {
	_, err := alerts.DecodeConfig(node)
	if err == nil {
		return nil
	}
	var list alerts.ConfigErrors
	if !errors.As(err, &list) {
		var one alerts.ConfigError
		if !errors.As(err, &one) {
			return []checkProblem{{Place: file, Property: "alerts", Message: err.Error(), Severity: "error",
				text: fmt.Sprintf("%s: alerts: %v", file, err)}}
		}
		list = alerts.ConfigErrors{one}
	}
	out := make([]checkProblem, 0, len(list))
	for _, e := range list {
		p := checkProblem{Place: file, Property: "alerts", Message: e.Msg, Severity: "error"}
		if e.Line > 0 {
			p.Place = fmt.Sprintf("%s:%d", file, e.Line)
		}
		if e.Path != "" {
			p.Property = "alerts." + e.Path
		}
		p.text = fmt.Sprintf("%s: %s: %s", p.Place, p.Property, p.Message)
		out = append(out, p)
	}
	return out
}

func fromNetworkProblem(p network.Problem) checkProblem {
	return checkProblem{Place: p.Place(), Feature: p.Feature, Property: p.Property,
		Message: p.Message, Severity: p.Severity.String(), text: p.String()}
}

func fromConfigProblem(p config.Problem) checkProblem {
	return checkProblem{Place: p.Place(), Feature: p.ID, Property: p.Key,
		Message: p.Message, Severity: p.Severity.String(), text: p.String()}
}

func checkSummarise(n *network.Network, path string) *checkSummary {
	s := &checkSummary{Network: path, Zones: len(n.Zones())}
	for i := range n.Nodes {
		switch n.Nodes[i].Kind {
		case network.Junction:
			s.Junctions++
		case network.Reservoir:
			s.Reservoirs++
		case network.Tank:
			s.Tanks++
		}
	}
	for i := range n.Links {
		switch n.Links[i].Kind {
		case network.Pipe:
			s.Pipes++
		case network.Pump:
			s.Pumps++
		case network.Valve:
			s.Valves++
		}
	}
	return s
}

// line is the summary printed after a successful check.
func (s *checkSummary) line(warnings int) string {
	var b strings.Builder
	if s.Config != "" {
		fmt.Fprintf(&b, "ok: %s: %s, %s; ", s.Config, checkPlural(s.Sensors, "sensor"), checkPlural(s.ConfigZones, "zone"))
	} else {
		b.WriteString("ok: ")
	}
	fmt.Fprintf(&b, "network %s: %s, %s, %s, %s, %s, %s, %s",
		s.Network, checkPlural(s.Junctions, "junction"), checkPlural(s.Reservoirs, "reservoir"), checkPlural(s.Tanks, "tank"),
		checkPlural(s.Pipes, "pipe"), checkPlural(s.Pumps, "pump"), checkPlural(s.Valves, "valve"), checkPlural(s.Zones, "zone"))
	if warnings > 0 {
		fmt.Fprintf(&b, " (%s)", checkPlural(warnings, "warning"))
	}
	return b.String()
}

func checkPlural(n int, word string) string {
	if n == 1 {
		return "1 " + word
	}
	return fmt.Sprintf("%d %ss", n, word)
}
