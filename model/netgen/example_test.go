package netgen_test

import (
	"fmt"

	"plumbline/model/netgen"
	"plumbline/model/network"
)

// A 5,000-junction town in three zones; the same Options always give the
// same network.
func ExampleTown() {
	net, err := netgen.Town(netgen.Options{Junctions: 5000, Seed: 1, Zones: 3})
	if err != nil {
		fmt.Println(err)
		return
	}
	junctions, sources := 0, 0
	for i := range net.Nodes {
		if net.Nodes[i].Kind == network.Junction {
			junctions++
		} else {
			sources++
		}
	}
	fmt.Println(junctions, "junctions,", sources, "reservoirs,", len(net.Zones()), "zones")
	// Output: 5000 junctions, 3 reservoirs, 3 zones
}

// The demo town and where its zones are metered.
func ExampleDemoZones() {
	net, err := netgen.DemoTown()
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, z := range netgen.DemoZones(net, netgen.DemoSensors(net)) {
		fmt.Println(z.Zone, "in:", z.Inlets, "out:", z.Outlets)
	}
	// Output:
	// central in: [F-in-central] out: [F-pump-hill F-in-low]
	// high in: [F-in-high] out: []
	// low in: [F-in-low] out: []
}
