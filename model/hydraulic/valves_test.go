package hydraulic

import (
	"math"
	"testing"

	"plumbline/model/network"
)

// bisect finds the root of the increasing function f on [lo, hi].
func bisect(f func(float64) float64, lo, hi float64) float64 {
	for i := 0; i < 200; i++ {
		mid := 0.5 * (lo + hi)
		if f(mid) > 0 {
			hi = mid
		} else {
			lo = mid
		}
	}
	return 0.5 * (lo + hi)
}

// hwFlow inverts the Hazen-Williams law: flow (L/s) for head loss h (m).
func hwFlow(h, length, diamMM, c float64) float64 {
	r := hazenWilliamsResistance(length, diamMM/1000, c)
	return 1000 * math.Copysign(math.Pow(math.Abs(h)/r, 1/1.852), h)
}

func hw(q, length, diamMM, c float64) float64 {
	return HazenWilliamsLoss(q/1000, length, diamMM/1000, c)
}

func valve(id string, vt network.ValveType, setting float64) network.Link {
	return network.Link{ID: id, Kind: network.Valve, Valve: vt, Diameter: 150, Setting: setting, HasSetting: true}
}

func stateOf(t *testing.T, sol *Solution, k int, want LinkState) {
	t.Helper()
	if sol.State[k] != want {
		t.Errorf("link %d state %v, want %v", k, sol.State[k], want)
	}
}

func TestPressureReducingValve(t *testing.T) {
	mk := func(setting float64, r2 float64) *network.Network {
		b := newBuilder().reservoir("R", 100).junction("A", 0, 0).junction("B", 0, 10).junction("C", 2, 5).
			pipe("P1", "R", "A", 1000, 200, 110).
			link(valve("V", network.PressureReducing, setting), "A", "B").
			pipe("P2", "B", "C", 300, 100, 110)
		if r2 > 0 {
			b.reservoir("R2", r2).pipe("P3", "R2", "C", 200, 150, 110)
		}
		return b.net()
	}
	// Active: outlet head = outlet elevation + setting exactly; the valve
	// passes everything downstream (continuity), C loses P2's head loss.
	_, sol := mustSolve(t, mk(40, 0), nil)
	stateOf(t, sol, 1, Active)
	near(t, "PRV outlet pressure", sol.Pressure[2], 40, 1e-6)
	near(t, "PRV flow", sol.Flow[1], 15, 1e-6)
	near(t, "inlet head", sol.Head[1], 100-hw(15, 1000, 200, 110)-gMin*15, 1e-5)
	near(t, "C head", sol.Head[3], 40-hw(5, 300, 100, 110)-gMin*5, 1e-5)
	// Open: setting above what the inlet can give: the valve is a plain
	// open valve (no minor loss given: only the low-flow resistance).
	_, sol = mustSolve(t, mk(99.9, 0), nil)
	stateOf(t, sol, 1, Open)
	near(t, "open PRV head drop", sol.Headloss[1], gMin*15, 1e-6)
	// Shut: a higher source downstream would push water back through it.
	_, sol = mustSolve(t, mk(40, 120), nil)
	stateOf(t, sol, 1, CheckShut)
	near(t, "shut PRV flow", sol.Flow[1], 0, 1e-6)
	near(t, "inlet head (no flow)", sol.Head[1], 100, 1e-6)
	// Closed by its status (operator): no flow even though the
	// downstream needs it, downstream fed from R2 alone.
	net := mk(40, 120)
	s, err := NewSolver(net, Options{})
	if err != nil {
		t.Fatal(err)
	}
	st := make([]network.Status, len(net.Links))
	st[1] = network.Closed
	sol, err = s.Solve(&Conditions{Status: st, Demand: []float64{0, 0, 10, 5, 0}}, nil)
	if err != nil {
		t.Fatal(err)
	}
	stateOf(t, sol, 1, Closed)
	near(t, "closed PRV flow", sol.Flow[1], 0, 1e-6)
	near(t, "R2 feeds B and C", sol.Flow[3], 15, 1e-6)
}

func TestPressureSustainingValve(t *testing.T) {
	// R(100) –P1→ A(2 L/s) –PSV→ B(20 L/s) ←P3– R2(30).
	mk := func(setting, r2 float64) *network.Network {
		return newBuilder().reservoir("R", 100).junction("A", 0, 2).junction("B", 0, 20).reservoir("R2", r2).
			pipe("P1", "R", "A", 2000, 100, 100).
			link(valve("V", network.PressureSustaining, setting), "A", "B").
			pipe("P3", "R2", "B", 500, 150, 100).net()
	}
	// Active: inlet held at 60 m, so P1 carries hwFlow(40) and the valve
	// that less A's demand; B takes the rest from R2 along P3.
	_, sol := mustSolve(t, mk(60, 30), nil)
	stateOf(t, sol, 1, Active)
	near(t, "PSV inlet pressure", sol.Pressure[1], 60, 1e-6)
	q1 := bisect(func(q float64) float64 { return hw(q, 2000, 100, 100) + gMin*q - 40 }, 0, 200)
	near(t, "P1 flow", sol.Flow[0], q1, 1e-5)
	near(t, "PSV flow", sol.Flow[1], q1-2, 1e-5)
	q3 := 20 - (q1 - 2)
	near(t, "B head", sol.Head[2], 30-hw(q3, 500, 150, 100)-gMin*q3, 1e-5)
	// Open: a low setting is always met.
	_, sol = mustSolve(t, mk(5, 30), nil)
	stateOf(t, sol, 1, Open)
	if sol.Pressure[1] < 5 {
		t.Errorf("open PSV inlet pressure %g below setting 5", sol.Pressure[1])
	}
	near(t, "open PSV head drop", sol.Headloss[1], gMin*sol.Flow[1], 1e-6)
	// Shut: downstream source higher than the upstream one.
	_, sol = mustSolve(t, mk(60, 150), nil)
	stateOf(t, sol, 1, CheckShut)
	near(t, "shut PSV flow", sol.Flow[1], 0, 1e-6)
}

func TestFlowControlValve(t *testing.T) {
	mk := func(setting float64) *network.Network {
		return newBuilder().reservoir("R", 100).junction("A", 0, 1).junction("B", 0, 3).reservoir("R2", 50).
			pipe("P1", "R", "A", 1000, 200, 110).
			link(valve("V", network.FlowControl, setting), "A", "B").
			pipe("P2", "B", "R2", 500, 200, 110).net()
	}
	_, sol := mustSolve(t, mk(8), nil)
	stateOf(t, sol, 1, Active)
	near(t, "flow-control valve flow", sol.Flow[1], 8, 1e-6)
	near(t, "A head", sol.Head[1], 100-hw(9, 1000, 200, 110)-gMin*9, 1e-5)
	near(t, "B head", sol.Head[2], 50+hw(5, 500, 200, 110)+gMin*5, 1e-5)
	// Open: the setting cannot be reached, the valve is fully open and
	// the flow follows the pipes (equal to the series solution).
	_, sol = mustSolve(t, mk(1000), nil)
	stateOf(t, sol, 1, Open)
	q := bisect(func(q float64) float64 {
		return hw(q+1, 1000, 200, 110) + gMin*(q+1) + gMin*q + hw(q-3, 500, 200, 110) + gMin*(q-3) - 50
	}, 3, 2000)
	near(t, "open flow-control valve flow", sol.Flow[1], q, 1e-4)
}

func TestThrottleAndIsolatingValves(t *testing.T) {
	// Throttle valve: minor loss with K = setting: h = K v²/2g.
	net := newBuilder().reservoir("R", 30).junction("J", 0, 12).
		link(valve("V", network.Throttle, 8), "R", "J").net()
	_, sol := mustSolve(t, net, nil)
	v := 0.012 / (math.Pi * 0.075 * 0.075)
	near(t, "throttle valve head", sol.Head[1], 30-8*v*v/(2*Gravity)-gMin*12, 1e-6)
	// A new setting through the conditions.
	s, _ := NewSolver(net, Options{})
	sol, err := s.Solve(&Conditions{ValveSetting: []float64{20}}, nil)
	if err != nil {
		t.Fatal(err)
	}
	near(t, "throttle valve head at K=20", sol.Head[1], 30-20*v*v/(2*Gravity)-gMin*12, 1e-6)
	// Isolating valve closed: all flow takes the other path.
	net = newBuilder().reservoir("R", 50).junction("A", 0, 0).junction("J", 0, 10).
		pipe("P1", "R", "A", 100, 150, 100).
		link(network.Link{ID: "V", Kind: network.Valve, Valve: network.Isolating, Diameter: 150, Status: network.Closed}, "A", "J").
		pipe("P2", "R", "J", 700, 150, 100).net()
	_, sol = mustSolve(t, net, nil)
	stateOf(t, sol, 1, Closed)
	near(t, "closed valve flow", sol.Flow[1], 0, 1e-7)
	near(t, "other path flow", sol.Flow[2], 10, 1e-6)
	near(t, "J head", sol.Head[2], 50-hw(10, 700, 150, 100)-gMin*10, 1e-5)
	// ... and open through the conditions: flows split.
	s, _ = NewSolver(net, Options{})
	sol, err = s.Solve(&Conditions{Status: []network.Status{network.Open, network.Open, network.Open}}, nil)
	if err != nil {
		t.Fatal(err)
	}
	stateOf(t, sol, 1, Open)
	if sol.Flow[1] < 5 {
		t.Errorf("open isolating valve flow %g, want the larger share", sol.Flow[1])
	}
}

func TestCheckValve(t *testing.T) {
	mk := func(from, to string) *network.Network {
		b := newBuilder().reservoir("R1", 50).junction("J", 0, 5).reservoir("R2", 60).
			pipe("P1", "R1", "J", 400, 150, 100)
		b.link(network.Link{ID: "P2", Kind: network.Pipe, Length: 400, Diameter: 150, Roughness: 100, CheckValve: true}, from, to)
		return b.net()
	}
	// CV pointing J→R2 but R2 is higher: reverse flow, shut; J fed by R1.
	_, sol := mustSolve(t, mk("J", "R2"), nil)
	stateOf(t, sol, 1, CheckShut)
	near(t, "shut CV flow", sol.Flow[1], 0, 1e-7)
	near(t, "J head", sol.Head[1], 50-hw(5, 400, 150, 100)-gMin*5, 1e-5)
	// CV pointing R2→J: open, R2 feeds J and R1 both.
	_, sol = mustSolve(t, mk("R2", "J"), nil)
	stateOf(t, sol, 1, Open)
	if sol.Flow[1] <= 5 {
		t.Errorf("open CV flow %g, want more than J's demand", sol.Flow[1])
	}
}

func TestPumpToTank(t *testing.T) {
	// Reservoir at 10 m, pump (3-point curve), junction, pipe, tank at
	// 30 + 5 m. The operating point solves H_pump(Q) = 25 + h_pipe(Q).
	curve := [][2]float64{{0, 60}, {30, 50}, {50, 30}}
	net := newBuilder().reservoir("R", 10).junction("J", 0, 0).tank("T", 30, 5).
		link(network.Link{ID: "PU", Kind: network.Pump, Curve: curve, Speed: 1}, "R", "J").
		pipe("P", "J", "T", 1000, 250, 120).net()
	s, err := NewSolver(net, Options{})
	if err != nil {
		t.Fatal(err)
	}
	pc, _ := FitPumpCurve(curve)
	for _, speed := range []float64{1, 0.8} {
		sol, err := s.Solve(&Conditions{PumpSpeed: []float64{speed, math.NaN()}}, nil)
		if err != nil {
			t.Fatal(err)
		}
		q := bisect(func(q float64) float64 {
			return 25 + hw(q, 1000, 250, 120) + 2*gMin*q - pc.Head(q, speed)
		}, 0, pc.MaxFlow(speed))
		stateOf(t, sol, 0, Open)
		near(t, "pump flow", sol.Flow[0], q, 1e-4)
		near(t, "pump head gain", -sol.Headloss[0], pc.Head(sol.Flow[0], speed)-gMin*sol.Flow[0], 1e-6)
		near(t, "tank inflow", sol.Demand[2], q, 1e-4)
	}
	// Affinity: at speed 0.8 the shutoff is 0.64·60 = 38.4 m; a tank
	// head of 10 + 40 m is above it: the pump cannot deliver and shuts.
	sol, err := s.Solve(&Conditions{PumpSpeed: []float64{0.8, math.NaN()}, FixedHead: []float64{math.NaN(), math.NaN(), 50}}, nil)
	if err != nil {
		t.Fatal(err)
	}
	stateOf(t, sol, 0, CheckShut)
	near(t, "shut pump flow", sol.Flow[0], 0, 1e-6)
	// Speed 0: the pump is stopped (Closed) and J is cut off from R but
	// still reached from the tank.
	sol, err = s.Solve(&Conditions{PumpSpeed: []float64{0, math.NaN()}}, nil)
	if err != nil {
		t.Fatal(err)
	}
	stateOf(t, sol, 0, Closed)
	near(t, "J head with pump stopped", sol.Head[1], 35, 1e-6)
}

func TestLeakAtKnownPressure(t *testing.T) {
	// FAVAD, May (1994): q = C p^N. With the pipe law, the junction head
	// solves H = 50 − h(q(H)), q = C (H − 10)^N; found by bisection.
	for _, n := range []float64{0.5, 1.18} {
		net := newBuilder().reservoir("R", 50).junction("J", 10, 0).pipe("P", "R", "J", 500, 100, 100).net()
		net.Nodes[1].LeakCoeff, net.Nodes[1].LeakExponent = 0.8, n
		s, sol := mustSolve(t, net, nil)
		h := bisect(func(h float64) float64 {
			q := 0.8 * math.Pow(h-10, n)
			return h - (50 - hw(q, 500, 100, 100) - gMin*q)
		}, 10, 50)
		near(t, "leak head", sol.Head[1], h, 1e-6)
		near(t, "leak flow", sol.Leak[1], 0.8*math.Pow(sol.Pressure[1], n), 1e-9)
		checkBalance(t, s, sol, 1e-6)
		// A leak given by the conditions adds to the network's.
		c := &Conditions{LeakCoeff: []float64{0, 0.4}, LeakExponent: []float64{0, 0.5}}
		sol, err := s.Solve(c, sol)
		if err != nil {
			t.Fatal(err)
		}
		near(t, "two leaks", sol.Leak[1], 0.8*math.Pow(sol.Pressure[1], n)+0.4*math.Sqrt(sol.Pressure[1]), 1e-9)
		near(t, "pipe flow = leaks", sol.Flow[0], sol.Leak[1], 1e-6)
	}
}
