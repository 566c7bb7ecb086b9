package main

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"plumbline/model/calib"
	"plumbline/model/network"
	"plumbline/model/scenario"
)

// calReport is the part of `plumbline calibrate --report x.json` the
// table uses (calib.Result's JSON).
type calReport struct {
	Parameters []struct {
		Kind         string  `json:"kind"`
		Group        string  `json:"group"`
		Prior        float64 `json:"prior"`
		Estimate     float64 `json:"estimate"`
		StdErr       float64 `json:"std_err"`
		Identifiable bool    `json:"identifiable"`
	} `json:"parameters"`
	Suspects []struct {
		Link   string `json:"link"`
		Closed bool   `json:"closed"`
	} `json:"suspects"`
	// Applied are the links calibrate shut in the calibrated network.
	Applied []struct {
		Link string `json:"link"`
	} `json:"applied"`
}

// groupFit is one roughness group of one calibration against its truth.
type groupFit struct {
	name                  string
	prior, truth, est, se float64
	identified            bool
	departure             float64 // |ln(truth/prior)|
}

// within2 says whether the truth lies within two standard errors of the
// estimate.
func (g groupFit) within2() bool { return math.Abs(g.est-g.truth) <= 2*g.se }

// calRun is one calibrated run's calibration against the truth.
type calRun struct {
	groups []groupFit
	// shut are the links shut in truth but open in the records; named
	// those of them among the suspects or shut by calibrate, applied those
	// shut by calibrate; others the suspects (and links shut by calibrate)
	// that are not shut in truth.
	shut, named, applied []string
	others               int
}

// trueNets finds and caches true networks.
type trueNets struct {
	dir  string
	nets map[string]*network.Network
}

// trueName is the true network's file name of a condition, as
// testdata/scenarios/gen and scripts/bench-detect.sh name it.
func trueName(net, cond string) string {
	if cond == "realistic" {
		return "true-" + net + ".geojson"
	}
	return "true-" + net + "-" + cond + ".geojson"
}

// get returns the true network of (net, cond): from the folder, else the
// scenario's true_network; nil when there is none.
func (t *trueNets) get(net, cond string, sc *scenario.Scenario) (*network.Network, error) {
	var path string
	if t.dir != "" {
		path = filepath.Join(t.dir, trueName(net, cond))
		if _, err := os.Stat(path); err != nil {
			path = ""
		}
	}
	if path == "" {
		path = sc.TrueNetwork
	}
	if path == "" {
		return nil, nil
	}
	if n, ok := t.nets[path]; ok {
		return n, nil
	}
	n, err := network.ReadFile(path)
	if err != nil {
		return nil, err
	}
	t.nets[path] = n
	return n, nil
}

// readCalibration reads one run's calibration report and holds it
// against the truth; nil when the run has no report or no true network
// is known.
func readCalibration(path string, rec *network.Network, truths *trueNets, net, cond string, sc *scenario.Scenario) (*calRun, error) {
	data, err := os.ReadFile(path)
	if errors.Is(err, fs.ErrNotExist) {
		return nil, nil
	}
	if err != nil {
		return nil, err
	}
	var rep calReport
	if err := json.Unmarshal(data, &rep); err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	tn, err := truths.get(net, cond, sc)
	if err != nil || tn == nil {
		return nil, err
	}
	if len(tn.Links) != len(rec.Links) {
		return nil, fmt.Errorf("true network of %s/%s: %d links, the records %d", net, cond, len(tn.Links), len(rec.Links))
	}
	truth := groupTruth(rec, tn)
	out := &calRun{}
	for _, p := range rep.Parameters {
		if p.Kind != "roughness" {
			continue
		}
		tv, ok := truth[p.Group]
		if !ok {
			continue
		}
		out.groups = append(out.groups, groupFit{name: p.Group, prior: p.Prior, truth: tv, est: p.Estimate, se: p.StdErr,
			identified: p.Identifiable, departure: math.Abs(math.Log(tv / p.Prior))})
	}
	suspects, applied := map[string]bool{}, map[string]bool{}
	for _, s := range rep.Suspects {
		suspects[s.Link] = true
	}
	for _, a := range rep.Applied {
		suspects[a.Link], applied[a.Link] = true, true
	}
	for l := range rec.Links {
		if tn.Links[l].Status == network.Closed && rec.Links[l].Status != network.Closed {
			id := rec.Links[l].ID
			out.shut = append(out.shut, id)
			if suspects[id] {
				out.named = append(out.named, id)
				delete(suspects, id)
			}
			if applied[id] {
				out.applied = append(out.applied, id)
			}
		}
	}
	out.others = len(suspects)
	return out, nil
}

// groupTruth returns each roughness group's true roughness: the
// length-weighted geometric mean of the true network's roughness over the
// group's pipes (grouped by their records, calib.GroupOf) whose recorded
// roughness is positive, the mean the calibration reports its
// estimate as.
func groupTruth(rec, tn *network.Network) map[string]float64 {
	sl, sw := map[string]float64{}, map[string]float64{}
	for l := range rec.Links {
		lk := &rec.Links[l]
		if lk.Kind != network.Pipe || lk.Roughness <= 0 || tn.Links[l].Roughness <= 0 {
			continue
		}
		g := calib.GroupOf(lk)
		sl[g] += lk.Length * math.Log(tn.Links[l].Roughness)
		sw[g] += lk.Length
	}
	out := map[string]float64{}
	for g, w := range sw {
		out[g] = math.Exp(sl[g] / w)
	}
	return out
}

// printCalibration prints the calibration lines of a calibrated
// condition.
func printCalibration(w io.Writer, cals []calRun) {
	if len(cals) == 0 {
		return
	}
	var ident, inside, groups int
	byGroup := map[string][]groupFit{}
	worst := ""
	worstDep := 0.0
	for _, c := range cals {
		for _, g := range c.groups {
			groups++
			byGroup[g.name] = append(byGroup[g.name], g)
			if g.departure > worstDep || (g.departure == worstDep && g.name < worst) {
				worst, worstDep = g.name, g.departure
			}
			if !g.identified {
				continue
			}
			ident++
			if g.within2() {
				inside++
			}
		}
	}
	fmt.Fprintf(w, "calibration: %d runs; roughness groups identified %d of %d, true C within 2 s.e. of the estimate in %d of those (%s)\n",
		len(cals), ident, groups, inside, pct(inside, ident))
	if worst != "" {
		gs := byGroup[worst]
		var est []float64
		var id, in int
		for _, g := range gs {
			if g.identified {
				id++
				est = append(est, g.est)
				if g.within2() {
					in++
				}
			}
		}
		sort.Float64s(est)
		rng := "-"
		if len(est) > 0 {
			rng = fmt.Sprintf("median %.1f, %.1f to %.1f", median(est), est[0], est[len(est)-1])
		}
		fmt.Fprintf(w, "  group departing most from its record, %s: recorded %.1f, true %.1f; identified in %d of %d runs, estimate %s, true within 2 s.e. in %d of %d\n",
			worst, gs[0].prior, gs[0].truth, id, len(gs), rng, in, id)
	}
	shut := map[string]int{}
	named := map[string]int{}
	applied := map[string]int{}
	others := 0
	for _, c := range cals {
		for _, l := range c.shut {
			shut[l]++
		}
		for _, l := range c.named {
			named[l]++
		}
		for _, l := range c.applied {
			applied[l]++
		}
		others += c.others
	}
	var ids []string
	for l := range shut {
		ids = append(ids, l)
	}
	sort.Strings(ids)
	var parts []string
	for _, l := range ids {
		parts = append(parts, fmt.Sprintf("%s named in %d of %d runs (shut by calibrate in %d)", l, named[l], shut[l], applied[l]))
	}
	if len(parts) > 0 {
		fmt.Fprintf(w, "  links shut in truth, open in the records: %s; other links suspected: %d in %d runs\n", strings.Join(parts, ", "), others, len(cals))
	} else {
		fmt.Fprintf(w, "  no link shut in truth; links suspected of being shut or throttled: %d in %d runs\n", others, len(cals))
	}
}
