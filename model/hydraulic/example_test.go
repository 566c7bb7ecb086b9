package hydraulic_test

import (
	"fmt"

	"plumbline/model/hydraulic"
	"plumbline/model/network"
)

// A reservoir feeding one junction through one pipe; then the same
// network with 10% more demand, warm-started, and the sensitivity of the
// junction head to an extra outflow there.
func Example() {
	net := network.New([]network.Node{
		{ID: "R", Kind: network.Reservoir, Head: 50, Elevation: 50},
		{ID: "J", Kind: network.Junction, Elevation: 0, Demand: 20},
	}, []network.Link{
		{ID: "P", Kind: network.Pipe, From: 0, To: 1, Length: 1000, Diameter: 200, Roughness: 100},
	})
	s, err := hydraulic.NewSolver(net, hydraulic.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	sol, err := s.Solve(nil, nil)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("pressure at J %.2f m, flow %.1f L/s\n", sol.Pressure[1], sol.Flow[0])
	more, err := s.Solve(&hydraulic.Conditions{Demand: []float64{0, 22}}, sol)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("at 22 L/s: %.2f m\n", more.Pressure[1])
	sens, err := s.Sensitivities(more, []hydraulic.Observation{hydraulic.NodeObservation(1)})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("dH/dq at J %.3f m per L/s\n", sens.Outflow[0][1])
	// By hand (Hazen-Williams SI form): h(20 L/s) = 3.819 m, h(22 L/s) =
	// 3.819·1.1^1.852 = 4.556 m, and dH/dq = −1.852·h/Q = −0.384 m per L/s.

	// Output:
	// pressure at J 46.18 m, flow 20.0 L/s
	// at 22 L/s: 45.44 m
	// dH/dq at J -0.384 m per L/s
}
