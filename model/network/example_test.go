package network_test

import (
	"fmt"
	"os"
	"strings"

	"plumbline/model/network"
)

// A file with two mistakes: both are reported, each with its line,
// feature id and property, and the file is rejected whole.
func ExampleParse() {
	src := `{"type": "FeatureCollection", "features": [
  {"type": "Feature", "geometry": null, "properties": {"id": "R-1", "kind": "reservoir", "head_m": 60}},
  {"type": "Feature", "geometry": null, "properties": {"id": "J-1", "kind": "junction", "elevation_m": 12}},
  {"type": "Feature", "geometry": null, "properties": {"id": "P-1", "kind": "pipe", "from": "R-1", "to": "J-9",
    "diameter_mm": 150, "roughness": 110, "length_m": 240}},
  {"type": "Feature", "geometry": null, "properties": {"id": "P-2", "kind": "pipe", "from": "R-1", "to": "J-1",
    "diameter_mm": -150, "roughness": 110, "length_m": 240}}
]}`
	n, probs := network.Parse([]byte(src), "example.geojson")
	fmt.Println(n == nil)
	for _, p := range probs {
		fmt.Println(p)
	}
	// Output:
	// true
	// example.geojson:4: feature P-1: to: unknown node "J-9"
	// example.geojson:6: feature P-2: diameter_mm: must be positive, got -150
}

// Reading a file, changing it and writing it back.
func ExampleWrite() {
	n, err := network.ReadFile("../../testdata/network/valves.geojson")
	if err != nil {
		fmt.Println(err)
		return
	}
	i, _ := n.LinkIndex("V-1")
	n.Links[i].Setting = 35 // lower the pressure-reducing valve's outlet pressure, m
	var b strings.Builder
	if err := network.Write(&b, n); err != nil {
		fmt.Println(err)
		return
	}
	m, err := network.Read(strings.NewReader(b.String()), "rewritten.geojson")
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		return
	}
	j, _ := m.LinkIndex("V-1")
	fmt.Println(m.Links[j].Valve, m.Links[j].Setting)
	// Output: pressure-reducing 35
}
