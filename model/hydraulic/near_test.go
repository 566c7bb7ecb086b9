package hydraulic

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"plumbline/model/netgen"
	"plumbline/model/network"
)

// nearSettled and nearGaveUp count the solves where SolveNear settled a
// link status SolveInto gave up on, and the other way round.
var nearSettled, nearGaveUp int

// agreeNear checks a SolveNear solution against SolveInto's from the same
// start (the full Newton solve it stands in for): the same error or none,
// the same link states, flows within the flow tolerance (Options: 1e-3
// L/s, the bound both solves' convergence tests put on the last step),
// heads within 1e-3 m, and the solution itself converged, with continuity
// at every junction within the imbalance tolerance (Kirchhoff's junction
// rule, checkBalance) and every open link's head difference equal to its
// law's head loss (the energy equation; the laws are checked against
// their handbook formulas in headloss_test.go).
func agreeNear(t *testing.T, where string, s *Solver, got, want *Solution, gerr, werr error) {
	t.Helper()
	var nc *NotConvergedError
	if (gerr == nil) != (werr == nil) {
		if gerr == nil && errors.As(werr, &nc) && len(nc.Oscillating) > 0 {
			// Where a link's status flips back and forth the two
			// iterations can end differently: the full solve gave up,
			// this one settled. Its solution must still be one.
			nearSettled++
			checkSolution(t, where, s, got)
			return
		}
		if werr == nil && errors.As(gerr, &nc) && len(nc.Oscillating) > 0 {
			nearGaveUp++
			return
		}
		t.Fatalf("%s: SolveNear error %v, SolveInto %v", where, gerr, werr)
	}
	if gerr != nil {
		var g, w *NotConvergedError
		var dg, dw *DisconnectedError
		if errors.As(gerr, &g) != errors.As(werr, &w) || errors.As(gerr, &dg) != errors.As(werr, &dw) {
			t.Fatalf("%s: SolveNear error %v, SolveInto %v", where, gerr, werr)
		}
		return
	}
	checkSolution(t, where, s, got)
	for k := range want.Flow {
		if got.State[k] != want.State[k] {
			t.Fatalf("%s: link %s %v, SolveInto %v", where, s.net.Links[k].ID, got.State[k], want.State[k])
		}
		if d := math.Abs(got.Flow[k] - want.Flow[k]); d > s.opt.FlowTolerance {
			t.Fatalf("%s: link %s flow %.9g, SolveInto %.9g", where, s.net.Links[k].ID, got.Flow[k], want.Flow[k])
		}
	}
	for i := range want.Head {
		if d := math.Abs(got.Head[i] - want.Head[i]); d > 1e-3 {
			t.Fatalf("%s: node %s head %.9g, SolveInto %.9g", where, s.net.Nodes[i].ID, got.Head[i], want.Head[i])
		}
	}
}

// checkSolution checks that sol is one: converged, continuity at every
// junction within the imbalance tolerance (Kirchhoff's junction rule,
// checkBalance), and every open link's head difference its law's head
// loss at its flow (the energy equation; the laws are checked against
// their handbook formulas in headloss_test.go).
func checkSolution(t *testing.T, where string, s *Solver, sol *Solution) {
	t.Helper()
	if !sol.Converged || sol.MaxImbalance > s.opt.ImbalanceTolerance {
		t.Fatalf("%s: converged %v, imbalance %g", where, sol.Converged, sol.MaxImbalance)
	}
	checkBalance(t, s, sol, s.opt.ImbalanceTolerance)
	for k := range sol.Flow {
		if sol.State[k] != Open {
			continue
		}
		m := &s.lm[k]
		h, _, _ := s.lawOpen(k, sol.Flow[k], sol)
		if d := math.Abs(h - (sol.Head[m.from] - sol.Head[m.to])); d > 1e-4 {
			t.Fatalf("%s: link %s energy equation off by %.3g m", where, s.net.Links[k].ID, d)
		}
	}
}

// TestSolveNearTown runs the localisation's kind of sequence on generated
// towns (a Hazen-Williams one with a tank and two zones, and a
// Darcy-Weisbach one with leaks): a blockage's open fraction stepped down
// from 60% to 1%, each solve starting from the one before, then leaks of a
// few L/s at junctions, each from the reference, all with one Near. Every
// solution agrees with the full Newton solve's (agreeNear); the iterations
// stay Newton's (at most a tenth more over the run; Kelley 1995, §5.4: the
// kept slopes' 5% error adds a linear term of that order to the quadratic
// convergence), and the factor of the town without leaks is refreshed in
// part, not refactored.
func TestSolveNearTown(t *testing.T) {
	for _, tc := range []struct {
		name string
		opt  netgen.Options
		dw   bool
	}{
		{"hazen-williams", netgen.Options{Junctions: 5000, Seed: 3, Tank: true, Zones: 2}, false},
		{"darcy-weisbach-leaks", netgen.Options{Junctions: 1000, Seed: 5}, true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			net, err := netgen.Town(tc.opt)
			if err != nil {
				t.Fatal(err)
			}
			if tc.dw {
				net.Headloss = network.DarcyWeisbach
				for k := range net.Links {
					net.Links[k].Roughness = 0.1
				}
				for i := range net.Nodes {
					if net.Nodes[i].Kind == network.Junction && i%7 == 0 {
						net.Nodes[i].LeakCoeff, net.Nodes[i].LeakExponent = 0.01, 1.1
					}
				}
			}
			s, err := NewSolver(net, Options{})
			if err != nil {
				t.Fatal(err)
			}
			ref, err := s.Solve(nil, nil)
			if err != nil {
				t.Fatal(err)
			}
			n := s.NewNear()
			r := rand.New(rand.NewPCG(1, 9))
			full, near := 0, 0
			factor := make([]float64, len(net.Links))
			for b := 0; b < 6; b++ {
				l := r.IntN(len(net.Links))
				for k := range factor {
					factor[k] = 1
				}
				warm := ref
				for _, f := range []float64{0.6, 0.3, 0.12, 0.04, 0.01} {
					factor[l] = 1 / (f * f)
					c := &Conditions{ResistanceFactor: factor}
					want, werr := s.SolveInto(c, warm, nil)
					got, gerr := s.SolveNear(c, warm, nil, n)
					agreeNear(t, fmt.Sprintf("link %s at %g open", net.Links[l].ID, f), s, got, want, gerr, werr)
					if werr != nil {
						break
					}
					full += want.Iterations
					near += got.Iterations
					warm = want
				}
			}
			dem := make([]float64, len(net.Nodes))
			for b := 0; b < 6; b++ {
				j := r.IntN(len(net.Nodes))
				for i := range dem {
					dem[i] = net.Nodes[i].Demand
				}
				dem[j] += 1 + 4*r.Float64()
				c := &Conditions{Demand: dem}
				want, werr := s.SolveInto(c, ref, nil)
				got, gerr := s.SolveNear(c, ref, nil, n)
				agreeNear(t, fmt.Sprintf("leak at %s", net.Nodes[j].ID), s, got, want, gerr, werr)
				if werr == nil {
					full += want.Iterations
					near += got.Iterations
				}
			}
			st := n.Stats()
			t.Logf("iterations: full %d, near %d; rows refactored %.3f of the factor's", full, near, float64(st.Rows)/float64(st.Order))
			if full == 0 || float64(near) > 1.1*float64(full) {
				t.Errorf("SolveNear took %d iterations where SolveInto took %d", near, full)
			}
			// A junction with a leak in head form has a new diagonal at
			// every step (its leak's slope): the leaky town's factor is
			// refactored nearly everywhere.
			if st.Steps != near || !tc.dw && float64(st.Rows) > 0.5*float64(st.Order) {
				t.Errorf("%d steps for %d iterations, %d of %d rows refactored: the kept factor is not being reused", st.Steps, near, st.Rows, st.Order)
			}
		})
	}
}

// TestSolveNearValves: on random small networks with pressure-reducing,
// pressure-sustaining and flow-control valves and check valves, under
// random demands, resistance factors, closures and leaks, SolveNear
// agrees with SolveInto (agreeNear): the status logic is the same, and so
// are the errors of networks that cannot be solved. Also with the dense
// factorisation (gonum) in place of model/sparse.
func TestSolveNearValves(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 17))
	solved := 0
	for trial := 0; trial < 150; trial++ {
		net := randomValveNetwork(r)
		s, err := NewSolver(net, Options{dense: trial%3 == 0})
		if err != nil {
			t.Fatal(err)
		}
		n := s.NewNear()
		var warm *Solution
		nn, nl := len(net.Nodes), len(net.Links)
		for step := 0; step < 6; step++ {
			c := &Conditions{Demand: make([]float64, nn), ResistanceFactor: make([]float64, nl)}
			for i := range net.Nodes {
				c.Demand[i] = net.Nodes[i].Demand * (0.7 + 0.6*r.Float64())
			}
			for k := range c.ResistanceFactor {
				c.ResistanceFactor[k] = 1
			}
			c.ResistanceFactor[r.IntN(nl)] = 1 + 100*r.Float64()
			if step%3 == 1 {
				c.LeakCoeff, c.LeakExponent = make([]float64, nn), make([]float64, nn)
				j := r.IntN(nn)
				c.LeakCoeff[j], c.LeakExponent[j] = 0.3, 0.5+r.Float64()
			}
			if step%4 == 2 {
				c.Status = make([]network.Status, nl)
				c.Status[r.IntN(nl)] = network.Closed
			}
			want, werr := s.SolveInto(c, warm, nil)
			got, gerr := s.SolveNear(c, warm, nil, n)
			agreeNear(t, fmt.Sprintf("trial %d step %d", trial, step), s, got, want, gerr, werr)
			if werr == nil {
				solved++
				warm = want
			}
		}
	}
	t.Logf("%d solves converged; where a status oscillated, SolveNear settled %d that SolveInto gave up on and gave up on %d that it settled", solved, nearSettled, nearGaveUp)
	if solved < 200 {
		t.Errorf("only %d of 900 solves converged", solved)
	}
	if 50*nearGaveUp > solved {
		t.Errorf("SolveNear gave up on %d of %d solves SolveInto settled", nearGaveUp, solved)
	}
}

// TestSolveNearNotShared: a Near works only with the Solver that made it,
// and SolveNear leaves the Solver as it found it: a plain solve after it
// is bit for bit a fresh Solver's.
func TestSolveNearNotShared(t *testing.T) {
	net := grid(8, 8, true, network.HazenWilliams)
	a, err := NewSolver(net, Options{})
	if err != nil {
		t.Fatal(err)
	}
	b, err := NewSolver(net, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := a.SolveNear(nil, nil, nil, b.NewNear()); err == nil {
		t.Error("SolveNear with another Solver's Near: no error")
	}
	if _, err := a.SolveNear(nil, nil, nil, nil); err == nil {
		t.Error("SolveNear without a Near: no error")
	}
	n := a.NewNear()
	c := &Conditions{ResistanceFactor: make([]float64, len(net.Links))}
	for k := range c.ResistanceFactor {
		c.ResistanceFactor[k] = 1 + float64(k%3)
	}
	if _, err := a.SolveNear(c, nil, nil, n); err != nil {
		t.Fatal(err)
	}
	got, err := a.Solve(c, nil)
	if err != nil {
		t.Fatal(err)
	}
	want, err := b.Solve(c, nil)
	if err != nil {
		t.Fatal(err)
	}
	if d := sameSolution(got, want); d != "" {
		t.Errorf("Solve after SolveNear differs from a fresh Solver's: %s", d)
	}
}
