package web

import (
	"context"
	"fmt"
	"io"
	"math"
	"net/http"
	"sort"
	"sync"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"plumbline/alerts"
	"plumbline/daemon/config"
	"plumbline/model/finding"
	"plumbline/model/hydraulic"
	"plumbline/model/network"
	"plumbline/model/telemetry"
)

// demo is a View of the demo town built from real data: the demo
// configuration's network, sensors and zones, two steady-state solves
// (as built, and with a 2 L/s FAVAD leak at one junction), and a real
// alerts manager holding the alert of the leak finding.
type demo struct {
	cfg      *config.Config
	view     View
	leak     string   // the leak junction (rank 1 candidate)
	cands    []string // candidate junction ids, best first
	blocked  []string // blockage candidate link ids, best first
	manager  *alerts.Manager
	leakZone string
}

// demoProvider is the Provider of the tests: the demo view with the live
// alerts of a real alerts.Manager, and a settable readiness.
type demoProvider struct {
	d       *demo
	mu      sync.Mutex
	ready   bool
	reasons []string
	metrics string
}

func (p *demoProvider) View() View {
	v := p.d.view
	if p.d.manager != nil {
		al, err := p.d.manager.Alerts(false)
		if err == nil {
			v.Alerts = al
		}
	}
	return v
}

func (p *demoProvider) Ready() (bool, []string) {
	p.mu.Lock()
	defer p.mu.Unlock()
	return p.ready, append([]string(nil), p.reasons...)
}

func (p *demoProvider) WriteMetrics(w io.Writer) error {
	p.mu.Lock()
	defer p.mu.Unlock()
	_, err := io.WriteString(w, p.metrics)
	return err
}

// loadDemo builds the demo view. The step is fixed so runs are repeatable.
func loadDemo(t testing.TB) *demo {
	t.Helper()
	cfg, err := config.LoadFile("../../configs/demo-town.yaml")
	if err != nil {
		t.Fatalf("demo config: %v", err)
	}
	net := cfg.Network
	solver, err := hydraulic.NewSolver(net, hydraulic.Options{})
	if err != nil {
		t.Fatal(err)
	}
	base, err := solver.Solve(nil, nil)
	if err != nil {
		t.Fatalf("solve as built: %v", err)
	}
	// The leak: at the junction nearest the mean position of the zone
	// with the most junctions after the first (a district, not the trunk).
	zones := net.Zones()
	if len(zones) < 2 {
		t.Fatalf("demo network has zones %v, want 2 or more", zones)
	}
	zone := zones[1]
	var cx, cy float64
	var members []int
	for i := range net.Nodes {
		nd := &net.Nodes[i]
		if nd.Kind == network.Junction && nd.Zone == zone && nd.HasCoord {
			members = append(members, i)
			cx, cy = cx+nd.Coord.Lon, cy+nd.Coord.Lat
		}
	}
	centre := network.Point{Lon: cx / float64(len(members)), Lat: cy / float64(len(members))}
	sort.Slice(members, func(a, b int) bool {
		da := network.GreatCircle(net.Nodes[members[a]].Coord, centre)
		db := network.GreatCircle(net.Nodes[members[b]].Coord, centre)
		return da < db || (da == db && net.Nodes[members[a]].ID < net.Nodes[members[b]].ID)
	})
	leakIdx := members[0]
	// Candidates: the leak junction and the two junctions nearest to it.
	near := append([]int(nil), members[1:]...)
	sort.Slice(near, func(a, b int) bool {
		return network.GreatCircle(net.Nodes[near[a]].Coord, net.Nodes[leakIdx].Coord) <
			network.GreatCircle(net.Nodes[near[b]].Coord, net.Nodes[leakIdx].Coord)
	})
	candIdx := []int{leakIdx, near[0], near[1]}
	const leakLPS = 2.0
	coeff := make([]float64, len(net.Nodes))
	expo := make([]float64, len(net.Nodes))
	for i := range expo {
		expo[i] = 0.5
	}
	coeff[leakIdx] = leakLPS / math.Sqrt(base.Pressure[leakIdx]) // 2 L/s at the as-built pressure
	leaky, err := solver.Solve(&hydraulic.Conditions{LeakCoeff: coeff, LeakExponent: expo}, base)
	if err != nil {
		t.Fatalf("solve with leak: %v", err)
	}

	step := time.Date(2026, 3, 2, 3, 0, 0, 0, time.UTC)
	var sensors []SensorView
	flowOf := map[string][2]float64{} // sensor -> measured, expected
	for k, s := range cfg.Sensors {
		sv := SensorView{ID: s.ID, Quantity: s.Quantity.String(), At: s.At, Zone: s.Zone, Quality: telemetry.OK.String()}
		switch s.Quantity {
		case telemetry.Flow:
			li, ok := net.LinkIndex(s.At)
			if !ok {
				t.Fatalf("sensor %s: no link %s", s.ID, s.At)
			}
			sv.Unit, sv.Value, sv.Expected = "L/s", leaky.Flow[li], base.Flow[li]
			flowOf[s.ID] = [2]float64{sv.Value, sv.Expected}
		default:
			ni, ok := net.NodeIndex(s.At)
			if !ok {
				t.Fatalf("sensor %s: no node %s", s.ID, s.At)
			}
			sv.Unit, sv.Value, sv.Expected = "m", leaky.Pressure[ni], base.Pressure[ni]
		}
		sv.Residual = sv.Value - sv.Expected
		// Two sensors in poor health, to show the quality marks.
		switch k {
		case 3:
			sv.Quality = telemetry.Stale.String()
		case 5:
			sv.Quality, sv.Value, sv.Residual = telemetry.Missing.String(), math.NaN(), math.NaN()
		}
		sensors = append(sensors, sv)
	}
	var zv []ZoneView
	for zi, z := range cfg.Zones {
		var in, exp float64
		for _, id := range z.Inlets {
			in, exp = in+flowOf[id][0], exp+flowOf[id][1]
		}
		for _, id := range z.Outlets {
			in, exp = in-flowOf[id][0], exp-flowOf[id][1]
		}
		v := ZoneView{ID: z.ID, InflowLPS: in, ExpectedLPS: exp, ImbalanceLPS: in - exp}
		// Fifteen nights: the allowance plus a little weather, and tonight
		// the leak's flow on top in the leak's zone.
		for n := 0; n < 15; n++ {
			mnf := z.NightUseLPS * (0.85 + 0.08*math.Sin(float64(n+zi)))
			if n == 14 && z.ID == zone {
				mnf += v.ImbalanceLPS
			}
			night := step.AddDate(0, 0, n-14).Add(-time.Hour)
			v.Nights = append(v.Nights, NightView{Night: night, MinLPS: mnf, AllowLPS: z.NightUseLPS, ExcessLPS: mnf - z.NightUseLPS})
		}
		zv = append(zv, v)
	}
	var cands []finding.Candidate
	var ids []string
	for r, i := range candIdx {
		cands = append(cands, finding.Candidate{ID: net.Nodes[i].ID, Score: 0.9 - 0.15*float64(r)})
		ids = append(ids, net.Nodes[i].ID)
	}
	var imb float64
	for _, z := range zv {
		if z.ID == zone {
			imb = z.ImbalanceLPS
		}
	}
	f := finding.Finding{Kind: finding.Leak, Zone: zone, Onset: step.Add(-2 * time.Hour), Raised: step, SizeLPS: imb, Candidates: cands,
		Evidence: fmt.Sprintf("zone inflow %+.2f L/s over the model; pressure residuals fit %s", imb, ids[0])}
	// A blockage in the first zone: the pipe whose midpoint is nearest the
	// zone's mean position, then the two pipes nearest to it.
	bz := zones[0]
	var bx, by float64
	var bn int
	for i := range net.Nodes {
		if nd := &net.Nodes[i]; nd.Zone == bz && nd.HasCoord {
			bx, by, bn = bx+nd.Coord.Lon, by+nd.Coord.Lat, bn+1
		}
	}
	bcentre := network.Point{Lon: bx / float64(bn), Lat: by / float64(bn)}
	mid := func(k int) network.Point {
		l := &net.Links[k]
		a, b := net.Nodes[l.From].Coord, net.Nodes[l.To].Coord
		return network.Point{Lon: (a.Lon + b.Lon) / 2, Lat: (a.Lat + b.Lat) / 2}
	}
	var pipes []int
	for k := range net.Links {
		l := &net.Links[k]
		if l.Kind == network.Pipe && net.Nodes[l.From].Zone == bz && net.Nodes[l.To].Zone == bz {
			pipes = append(pipes, k)
		}
	}
	sort.Slice(pipes, func(a, b int) bool {
		return network.GreatCircle(mid(pipes[a]), bcentre) < network.GreatCircle(mid(pipes[b]), bcentre)
	})
	first := pipes[0]
	rest := append([]int(nil), pipes[1:]...)
	sort.Slice(rest, func(a, b int) bool {
		return network.GreatCircle(mid(rest[a]), mid(first)) < network.GreatCircle(mid(rest[b]), mid(first))
	})
	var bcands []finding.Candidate
	var blinks []string
	for r, k := range []int{first, rest[0], rest[1]} {
		bcands = append(bcands, finding.Candidate{ID: net.Links[k].ID, Score: 0.8 - 0.2*float64(r)})
		blinks = append(blinks, net.Links[k].ID)
	}
	bf := finding.Finding{Kind: finding.Blockage, Zone: bz, Onset: step.Add(-6 * time.Hour), Raised: step.Add(-time.Hour), OpenFrac: 0.3,
		Candidates: bcands, Evidence: "head loss across " + blinks[0] + " above the model at every demand level"}
	return &demo{cfg: cfg, leak: ids[0], cands: ids, blocked: blinks, leakZone: zone, view: View{
		Updated: step.Add(20 * time.Second), Step: step, Zones: zv, Sensors: sensors, Findings: []finding.Finding{f, bf},
	}}
}

// openAlerts opens a real alerts manager in a temporary data_dir and
// raises the alert of the demo's finding.
func (d *demo) openAlerts(t testing.TB, token string) http.Handler {
	t.Helper()
	cfg, err := alerts.ParseConfig([]byte("receivers: [{id: duty}]\nroutes: [{levels: [{notify: [duty]}]}]\nmax_shelve: 8h\n"))
	if err != nil {
		t.Fatal(err)
	}
	m, err := alerts.Open(alerts.Options{Config: cfg, DataDir: t.TempDir(), Logger: zerolog.Nop(), TickInterval: -1,
		Now: func() time.Time { return d.view.Step.Add(time.Minute) }})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { m.Close() })
	for _, f := range d.view.Findings {
		if _, err := m.Observe(context.Background(), f); err != nil {
			t.Fatal(err)
		}
	}
	api, err := alerts.NewAPI(m, []byte(token))
	if err != nil {
		t.Fatal(err)
	}
	d.manager = m
	return api
}
