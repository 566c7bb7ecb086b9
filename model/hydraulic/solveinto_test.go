package hydraulic

import (
	"fmt"
	"math"
	"math/rand/v2"
	"reflect"
	"testing"

	"plumbline/model/netgen"
	"plumbline/model/network"
)

// sameSolution reports the first field in which two solutions differ,
// bit for bit (NaN equal to NaN), or "".
func sameSolution(a, b *Solution) string {
	if (a == nil) != (b == nil) {
		return fmt.Sprintf("nil %v vs %v", a == nil, b == nil)
	}
	if a == nil {
		return ""
	}
	floats := map[string][2][]float64{
		"Head": {a.Head, b.Head}, "Pressure": {a.Pressure, b.Pressure}, "Demand": {a.Demand, b.Demand}, "Leak": {a.Leak, b.Leak},
		"Flow": {a.Flow, b.Flow}, "Velocity": {a.Velocity, b.Velocity}, "Headloss": {a.Headloss, b.Headloss},
		"leakC": {a.leakC, b.leakC}, "leakN": {a.leakN, b.leakN}, "speed": {a.speed, b.speed}, "setting": {a.setting, b.setting}, "factor": {a.factor, b.factor},
	}
	for name, p := range floats {
		if len(p[0]) != len(p[1]) {
			return name + " length"
		}
		for i := range p[0] {
			if math.Float64bits(p[0][i]) != math.Float64bits(p[1][i]) && !(math.IsNaN(p[0][i]) && math.IsNaN(p[1][i])) {
				return fmt.Sprintf("%s[%d]: %v vs %v", name, i, p[0][i], p[1][i])
			}
		}
	}
	if !reflect.DeepEqual(a.State, b.State) {
		return "State"
	}
	if a.Iterations != b.Iterations || a.Converged != b.Converged ||
		math.Float64bits(a.MaxFlowChange) != math.Float64bits(b.MaxFlowChange) || math.Float64bits(a.MaxImbalance) != math.Float64bits(b.MaxImbalance) {
		return fmt.Sprintf("iterations %d/%d, converged %v/%v, dQ %v/%v, imbalance %v/%v", a.Iterations, b.Iterations, a.Converged, b.Converged, a.MaxFlowChange, b.MaxFlowChange, a.MaxImbalance, b.MaxImbalance)
	}
	return ""
}

// TestSolveIntoIsSolve: a sequence of warm solves written into reused
// memory (into the warm start itself, or into a spare) gives, bit for
// bit, what fresh solves give, whatever the previous contents: changing
// demands, leaks given by the conditions, links closed and opened again
// (the connectivity check is skipped when the closed links are those of
// the last check, so a change must be seen), a junction cut off, pump
// speeds, valve settings and resistance factors. The reference is Solve
// of a new Solver, which allocates every Solution afresh.
func TestSolveIntoIsSolve(t *testing.T) {
	town, err := netgen.Town(netgen.Options{Junctions: 400, Seed: 9, Tank: true, Zones: 2})
	if err != nil {
		t.Fatal(err)
	}
	nets := []*network.Network{town}
	r := rand.New(rand.NewPCG(1, 2))
	for len(nets) < 40 {
		nets = append(nets, randomValveNetwork(r))
	}
	for ni, net := range nets {
		s, err := NewSolver(net, Options{})
		if err != nil {
			t.Fatal(err)
		}
		nn, nl := len(net.Nodes), len(net.Links)
		var prevRef, inPlace, spare, prevSpare *Solution
		for step := 0; step < 12; step++ {
			c := &Conditions{Demand: make([]float64, nn)}
			for i := range net.Nodes {
				c.Demand[i] = net.Nodes[i].Demand * (0.5 + r.Float64())
			}
			if step%3 == 1 {
				c.LeakCoeff, c.LeakExponent = make([]float64, nn), make([]float64, nn)
				j := r.IntN(nn)
				c.LeakCoeff[j], c.LeakExponent[j] = 0.2, 0.5+r.Float64()
			}
			if step%4 == 2 {
				c.Status = make([]network.Status, nl)
				for k := range net.Links {
					c.Status[k] = net.Links[k].Status
				}
				c.Status[r.IntN(nl)] = network.Closed
			}
			if step == 6 || step == 9 {
				// Every link of one junction shut: it is cut off.
				c.Status = make([]network.Status, nl)
				j := -1
				for i := range net.Nodes {
					if !net.Nodes[i].IsFixedHead() {
						j = i
						break
					}
				}
				for k := range net.Links {
					c.Status[k] = net.Links[k].Status
					if net.Links[k].From == j || net.Links[k].To == j {
						c.Status[k] = network.Closed
					}
				}
			}
			if step%5 == 3 {
				c.ResistanceFactor = make([]float64, nl)
				for k := range c.ResistanceFactor {
					c.ResistanceFactor[k] = 1 + r.Float64()
				}
				c.ValveSetting = make([]float64, nl)
				for k := range c.ValveSetting {
					c.ValveSetting[k] = math.NaN()
					if net.Links[k].Kind == network.Valve {
						c.ValveSetting[k] = net.Links[k].Setting * (0.8 + 0.4*r.Float64())
					}
				}
			}
			// The reference is a fresh Solver each time: nothing it
			// remembers of earlier solves can hide a difference.
			ref, err := NewSolver(net, Options{})
			if err != nil {
				t.Fatal(err)
			}
			want, werr := ref.Solve(c, prevRef)
			got, gerr := s.SolveInto(c, inPlace, inPlace)
			got2, gerr2 := s.SolveInto(c, prevSpare, spare)
			if fmt.Sprint(werr) != fmt.Sprint(gerr) || fmt.Sprint(werr) != fmt.Sprint(gerr2) {
				t.Fatalf("network %d step %d: errors %v / %v / %v", ni, step, werr, gerr, gerr2)
			}
			if d := sameSolution(want, got); d != "" {
				t.Fatalf("network %d step %d: SolveInto into the warm start differs from Solve: %s", ni, step, d)
			}
			if d := sameSolution(want, got2); d != "" {
				t.Fatalf("network %d step %d: SolveInto into a spare differs from Solve: %s", ni, step, d)
			}
			if inPlace != nil && got != nil && got != inPlace {
				t.Fatalf("network %d step %d: SolveInto did not reuse dst", ni, step)
			}
			if werr != nil && want == nil {
				// An error without a solution: start afresh, as a caller
				// must after one (dst's contents are unspecified).
				prevRef, inPlace, prevSpare, spare = nil, nil, nil, nil
				continue
			}
			prevRef, inPlace = want, got
			// Swap the spare and the previous solution.
			prevSpare, spare = got2, prevSpare
		}
	}
}

// TestSolveIntoAllocatesNothing: a warm solve written into its own warm
// start allocates nothing on a network without leaks given by the
// conditions.
func TestSolveIntoAllocatesNothing(t *testing.T) {
	net := grid(20, 20, true, network.HazenWilliams)
	s, err := NewSolver(net, Options{})
	if err != nil {
		t.Fatal(err)
	}
	sol, err := s.Solve(nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	c := &Conditions{Demand: make([]float64, len(net.Nodes))}
	k := 0
	allocs := testing.AllocsPerRun(5, func() {
		k++
		for i := range net.Nodes {
			c.Demand[i] = net.Nodes[i].Demand * (1 + 0.01*float64(k%7))
		}
		if _, err := s.SolveInto(c, sol, sol); err != nil {
			t.Fatal(err)
		}
	})
	if allocs != 0 {
		t.Errorf("warm SolveInto into its warm start: %v allocations, want 0", allocs)
	}
}

// The Newton coefficients of Hazen-Williams pipes, computed inline in
// coefficients, are those of the link law lawOpen (the reference) bit for
// bit, with minor losses and resistance factors, at flows of both signs,
// tiny and zero.
func TestCoefficientsInlineIsLaw(t *testing.T) {
	net, err := netgen.Town(netgen.Options{Junctions: 300, Seed: 4})
	if err != nil {
		t.Fatal(err)
	}
	r := rand.New(rand.NewPCG(5, 6))
	for k := range net.Links {
		net.Links[k].MinorLoss = 3 * r.Float64()
	}
	s, err := NewSolver(net, Options{})
	if err != nil {
		t.Fatal(err)
	}
	c := &Conditions{ResistanceFactor: make([]float64, len(net.Links))}
	for k := range c.ResistanceFactor {
		c.ResistanceFactor[k] = 0.5 + 3*r.Float64()
	}
	sol, err := s.Solve(c, nil)
	if err != nil {
		t.Fatal(err)
	}
	pipes := 0
	for trial := 0; trial < 20; trial++ {
		for k := range sol.Flow {
			switch k % 5 {
			case 0:
				sol.Flow[k] = 0
			case 1:
				sol.Flow[k] = -1e-9 * r.Float64()
			default:
				sol.Flow[k] = 100 * (r.Float64() - 0.5)
			}
		}
		s.coefficients(sol)
		for k := range s.lm {
			m := &s.lm[k]
			if m.kind != lkPipe || m.dw || sol.State[k] != Open {
				continue
			}
			pipes++
			h, g, sc := s.lawOpen(k, sol.Flow[k], sol)
			dh := sol.Head[m.from] - sol.Head[m.to]
			if s.p[k] != 1/g || s.y[k] != (h-dh)/g || s.s[k] != sc {
				t.Fatalf("link %d at %g L/s: p, y, s = %v %v %v, law gives %v %v %v", k, sol.Flow[k], s.p[k], s.y[k], s.s[k], 1/g, (h-dh)/g, sc)
			}
		}
	}
	if pipes == 0 {
		t.Fatal("no open Hazen-Williams pipe checked")
	}
}

// SensitivitiesInto gives, bit for bit, what Sensitivities gives (the
// reference, checked against finite differences in sensitivity_test.go),
// into reused rows whatever they held, with observations of heads at
// junctions and fixed-head nodes and of flows, with and without an
// active pressure valve; the rows are reused, not reallocated.
func TestSensitivitiesIntoIsSensitivities(t *testing.T) {
	for _, withPRV := range []bool{false, true} {
		net := sensNet(withPRV)
		s, err := NewSolver(net, Options{})
		if err != nil {
			t.Fatal(err)
		}
		sol, err := s.Solve(nil, nil)
		if err != nil {
			t.Fatal(err)
		}
		var obs []Observation
		for i := range net.Nodes {
			obs = append(obs, NodeObservation(i))
		}
		for k := range net.Links {
			obs = append(obs, LinkObservation(k))
		}
		var dst *Sensitivity
		for round := 0; round < 3; round++ {
			o := obs[round:] // a different list each round
			want, err := s.Sensitivities(sol, o)
			if err != nil {
				t.Fatal(err)
			}
			var first *float64
			if dst != nil && len(dst.Outflow) > 0 {
				for i := range dst.Outflow[0] {
					dst.Outflow[0][i] = 99 // stale values must not survive
				}
				first = &dst.Outflow[0][0]
			}
			got, err := s.SensitivitiesInto(sol, o, dst)
			if err != nil {
				t.Fatal(err)
			}
			if dst != nil && got != dst {
				t.Fatal("SensitivitiesInto did not return dst")
			}
			if first != nil && &got.Outflow[0][0] != first {
				t.Error("a row of the right size was reallocated")
			}
			if !reflect.DeepEqual(got.Obs, want.Obs) || len(got.Outflow) != len(o) || len(got.Resistance) != len(o) {
				t.Fatalf("round %d: observations or rows differ", round)
			}
			for i := range o {
				for _, pair := range [][2][]float64{{got.Outflow[i], want.Outflow[i]}, {got.Resistance[i], want.Resistance[i]}} {
					for j := range pair[1] {
						if math.Float64bits(pair[0][j]) != math.Float64bits(pair[1][j]) {
							t.Fatalf("PRV %v round %d observation %d entry %d: %v, Sensitivities %v", withPRV, round, i, j, pair[0][j], pair[1][j])
						}
					}
				}
			}
			dst = got
		}
	}
}
