package netgen

import (
	"math"
	"testing"

	"plumbline/model/network"
)

// TestGeneratedFiles reads the committed network files back with
// model/network's reader (warnings too) and checks they are what the
// generator makes now. When the generator changes, regenerate them:
//
//	go run ./daemon gen --junctions 1000 --seed 1 --out testdata/network/town-1k.geojson
//	go run ./daemon gen --junctions 5000 --seed 1 --zones 3 --out testdata/network/town-5k.geojson
//	go run ./daemon gen --demo --out configs/demo-town.geojson
func TestGeneratedFiles(t *testing.T) {
	demo := mustDemo(t)
	for _, c := range []struct {
		file string
		want *network.Network
	}{
		{"../../testdata/network/town-1k.geojson", mustTown(t, Options{Junctions: 1000, Seed: 1, Zones: 1})},
		{"../../testdata/network/town-5k.geojson", mustTown(t, Options{Junctions: 5000, Seed: 1, Zones: 3})},
		{"../../configs/demo-town.geojson", demo},
	} {
		got, err := network.ReadFile(c.file)
		if err != nil {
			t.Errorf("%v", err)
			continue
		}
		sameNetwork(t, c.file, got, c.want)
	}
}

// sameNetwork compares the fields the generator sets; lengths and
// positions to 1e-9 relative (the writer prints shortest round-trip
// decimals, so they should be exact).
func sameNetwork(t *testing.T, file string, got, want *network.Network) {
	t.Helper()
	if len(got.Nodes) != len(want.Nodes) || len(got.Links) != len(want.Links) {
		t.Errorf("%s: %d nodes %d links, generator gives %d and %d: regenerate the file", file,
			len(got.Nodes), len(got.Links), len(want.Nodes), len(want.Links))
		return
	}
	close := func(a, b float64) bool { return a == b || math.Abs(a-b) <= 1e-9*math.Max(math.Abs(a), math.Abs(b)) }
	bad := 0
	for i := range want.Nodes {
		g, w := &got.Nodes[i], &want.Nodes[i]
		if g.ID != w.ID || g.Kind != w.Kind || g.Zone != w.Zone || g.Pattern != w.Pattern ||
			!close(g.Elevation, w.Elevation) || !close(g.Demand, w.Demand) || !close(g.FixedHead(), w.FixedHead()) ||
			!close(g.Coord.Lon, w.Coord.Lon) || !close(g.Coord.Lat, w.Coord.Lat) {
			if bad < 3 {
				t.Errorf("%s: node %d is %+v, generator gives %+v: regenerate the file", file, i, *g, *w)
			}
			bad++
		}
	}
	for k := range want.Links {
		g, w := &got.Links[k], &want.Links[k]
		if g.ID != w.ID || g.Kind != w.Kind || g.From != w.From || g.To != w.To || g.Status != w.Status ||
			!close(g.Diameter, w.Diameter) || !close(g.Roughness, w.Roughness) || !close(g.Length, w.Length) ||
			g.Material != w.Material || g.Installed != w.Installed || !close(g.Setting, w.Setting) || len(g.Curve) != len(w.Curve) {
			if bad < 3 {
				t.Errorf("%s: link %d is %+v, generator gives %+v: regenerate the file", file, k, *g, *w)
			}
			bad++
		}
	}
	if bad > 0 {
		t.Errorf("%s: %d features differ from the generator", file, bad)
	}
}
