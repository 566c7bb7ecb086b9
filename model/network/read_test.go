package network

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"sort"
	"strings"
	"testing"
)

const testdata = "../../testdata/network"

// badCorpus maps each file of testdata/network/*.bad.geojson to every
// error it must produce, as substrings of Problem.String (file:line,
// feature id, property, message). The file must produce exactly these
// errors, no more; warnings are not counted.
var badCorpus = map[string][]string{
	"duplicate-ids.bad.geojson": {
		`:7: feature J-1: id: duplicate id "J-1" (first used at line 6`,
		`:9: feature J-1: id: duplicate id "J-1" (first used at line 6`,
	},
	"envelope.bad.geojson": {
		`:7: feature features[2]: properties: missing`,
		`:8: feature features[3]: type: want "Feature", got string "Point"`,
		`:9: feature features[4]: want a GeoJSON Feature object, got an array`,
		`:10: feature J-5: id: properties id "J-5" differs from the Feature id "J-4"`,
		`:10: feature J-5: isolated junction`,
		`:12: feature J-6: kind: missing`,
	},
	"geometry.bad.geojson": {
		`:5: feature R-1: geometry: a node (reservoir) needs Point geometry or null, got "LineString"`,
		`:6: feature J-1: geometry: position 0: [45.2, 97] is not a WGS84 longitude, latitude`,
		`:8: feature P-1: geometry: a link (pipe) needs LineString geometry or null, got "Point"`,
		`:9: feature P-2: length_m: required for a pipe with null geometry`,
		`:10: feature P-3: geometry: a LineString needs two or more positions, got 1`,
		`:11: feature P-4: geometry: a link (pipe) needs LineString geometry or null, got "MultiLineString"`,
	},
	"leaks.bad.geojson": {
		`:6: feature J-1: leak_coeff: must not be negative, got -0.1`,
		`:7: feature J-2: leak_exponent: must not be negative, got -1`,
		`:8: feature J-3: leak_exponent: must be positive when leak_coeff is given`,
	},
	"missing-ends.bad.geojson": {
		`:7: feature P-1: from: required for a pipe, missing`,
		`:8: feature P-2: to: required for a pipe, missing`,
	},
	"missing-required.bad.geojson": {
		`:6: feature R-2: head_m: required for a reservoir, missing`,
		`:7: feature J-1: elevation_m: required for a junction, missing`,
		`:8: feature T-1: level_m: required for a tank, missing`,
		`:9: feature P-1: diameter_mm: required for a pipe, missing`,
		`:10: feature P-2: diameter_mm: required for a pipe, missing (found "diamter_mm": misspelt?)`,
		`:11: feature features[6]: id: missing`,
		`:13: feature PU-1: curve: required for a pump, missing`,
		`:14: feature V-1: valve: required for a valve, missing`,
	},
	"no-source.bad.geojson": {
		`:7: feature J-2: no reservoir or tank feeds the part of the network holding this junction (3 junctions)`,
		`:10: feature J-5: isolated junction`,
	},
	"non-positive.bad.geojson": {
		`:8: feature P-1: diameter_mm: must be positive, got -100`,
		`:9: feature P-2: length_m: must be positive, got 0`,
		`:10: feature P-3: roughness: must be positive, got 0`,
		`:11: feature P-4: minor_loss: must not be negative, got -0.5`,
		`:12: feature V-1: diameter_mm: must be positive, got 0`,
	},
	"not-collection.bad.geojson": {
		`:1: type: want "FeatureCollection", got string "Feature"`,
		`:1: features: missing`,
	},
	"patterns.bad.geojson": {
		`:3: network.pattern_step: want a duration such as "1h" or "15m", got "soon"`,
		`:3: network.viscosity_m2s: must be positive, got -1e-06`,
		`:3: network.patterns.flat: pattern "flat" is empty`,
		`:3: network.patterns.night: pattern "night": multiplier 2 is -0.2, must not be negative`,
		`:6: feature J-1: pattern: unknown pattern "weekday"`,
	},
	"pump-curves.bad.geojson": {
		`:8: feature PU-1: curve: point 2: head must fall as flow rises`,
		`:9: feature PU-2: curve: want one point or three or more, got 2`,
		`:10: feature PU-3: curve: a one-point curve is the design point: flow and head must be positive, got [0, 40]`,
		`:11: feature PU-4: curve: point 3: flow must rise from point to point`,
		`:12: feature PU-5: speed: must not be negative, got -1`,
	},
	"self-loop.bad.geojson": {
		`:8: feature P-2: to: link from node "J-1" to itself`,
	},
	"syntax.bad.geojson": {
		`syntax.bad.geojson:4: not valid JSON: invalid character '}'`,
	},
	"tank-levels.bad.geojson": {
		`:6: feature T-1: level_m: 7 is outside min_level_m 0.5 .. max_level_m 6`,
		`:7: feature T-2: max_level_m: 2 is below min_level_m 4`,
		`:7: feature T-2: level_m: 3 is outside min_level_m 4 .. max_level_m 2`,
		`:8: feature T-3: diameter_m: must be positive, got 0`,
		`:8: feature T-3: min_level_m: must not be negative, got -1`,
	},
	"truncated.bad.geojson": {
		`truncated.bad.geojson:5: not valid JSON: unexpected end of input`,
	},
	"unknown-ends.bad.geojson": {
		`:8: feature P-2: to: unknown node "J-9"`,
		`:9: feature P-3: from: "P-1" is a link, not a node`,
	},
	"unknown-words.bad.geojson": {
		`:3: network.headloss: unknown head-loss formula "manning"`,
		`:7: feature H-1: kind: unknown kind "hydrant"`,
		`:8: feature P-1: status: unknown status "half" (want open or closed)`,
		`:9: feature V-1: valve: unknown valve type "butterfly"`,
	},
	"valve-settings.bad.geojson": {
		`:10: feature V-1: setting: a pressure-reducing valve needs a setting (outlet pressure, m)`,
		`:11: feature V-2: setting: must not be negative, got -3 (flow, L/s)`,
		`:12: feature V-3: setting: a pressure-sustaining valve needs a setting (inlet pressure, m)`,
		`:13: feature V-4: valve: required for a valve, missing`,
	},
	"wrong-types.bad.geojson": {
		`:6: feature J-1: elevation_m: want a number, got boolean true`,
		`:7: feature J-2: demand_lps: want a number, got string "1.5"`,
		`:8: feature P-1: diameter_mm: want a number, got string "300"`,
		`:9: feature P-2: check_valve: want true or false, got string "yes"`,
		`:10: feature features[5]: id: want a string, got number 7`,
		`:11: feature P-3: installed: want a whole year such as 1978, got 1987.5`,
		`:12: feature PU-1: curve: want a list of [flow_lps, head_m] points, got string "steep"`,
	},
}

func TestBadCorpus(t *testing.T) {
	files, err := filepath.Glob(filepath.Join(testdata, "*.bad.geojson"))
	if err != nil {
		t.Fatal(err)
	}
	seen := map[string]bool{}
	for _, path := range files {
		name := filepath.Base(path)
		seen[name] = true
		want, ok := badCorpus[name]
		if !ok {
			t.Errorf("%s: not in the badCorpus table", name)
			continue
		}
		t.Run(name, func(t *testing.T) {
			data, err := os.ReadFile(path)
			if err != nil {
				t.Fatal(err)
			}
			n, probs := Parse(data, name)
			if n != nil {
				t.Errorf("Parse returned a network for a bad file")
			}
			var got []string
			for _, p := range probs {
				if p.Severity == Error {
					got = append(got, p.String())
				}
			}
			for _, w := range want {
				found := false
				for _, g := range got {
					if strings.Contains(g, w) {
						found = true
						break
					}
				}
				if !found {
					t.Errorf("missing problem %q\ngot:\n  %s", w, strings.Join(got, "\n  "))
				}
			}
			if len(got) != len(want) {
				t.Errorf("got %d errors, want %d:\n  %s", len(got), len(want), strings.Join(got, "\n  "))
			}
			// Read must reject the file with a ValidationError listing the same.
			_, err = Read(bytes.NewReader(data), name)
			var ve *ValidationError
			if !errors.As(err, &ve) {
				t.Fatalf("Read: got error %v, want a *ValidationError", err)
			}
			if len(ve.Problems) != len(got) {
				t.Errorf("ValidationError lists %d problems, want %d", len(ve.Problems), len(got))
			}
			for _, g := range got {
				if !strings.Contains(ve.Error(), g) {
					t.Errorf("ValidationError text lacks %q", g)
				}
			}
		})
	}
	for name := range badCorpus {
		if !seen[name] {
			t.Errorf("table names %s but there is no such file", name)
		}
	}
}

func readTestFile(t *testing.T, name string) *Network {
	t.Helper()
	n, err := ReadFile(filepath.Join(testdata, name))
	if err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	return n
}

func TestReadTwoLoop(t *testing.T) {
	data, err := os.ReadFile(filepath.Join(testdata, "two-loop.geojson"))
	if err != nil {
		t.Fatal(err)
	}
	n, probs := Parse(data, "two-loop.geojson")
	if n == nil || len(probs) != 0 {
		t.Fatalf("two-loop.geojson: want no problems, got %v", probs)
	}
	var junctions, sources int
	for i := range n.Nodes {
		if n.Nodes[i].Kind == Junction {
			junctions++
		} else {
			sources++
		}
	}
	if junctions != 8 || sources != 1 || len(n.Links) != 10 {
		t.Errorf("got %d junctions, %d sources, %d links; want 8, 1, 10", junctions, sources, len(n.Links))
	}
	r, _ := n.NodeIndex("R-1")
	if got := n.Nodes[r]; got.Kind != Reservoir || got.Head != 92 || got.Elevation != 92 {
		t.Errorf("R-1: got kind %v head %g elevation %g, want reservoir 92 92", got.Kind, got.Head, got.Elevation)
	}
	if got := string(n.Nodes[r].Extra["name"]); got != `"Quennick Hill service reservoir"` {
		t.Errorf("R-1 extra name: got %s", got)
	}
	// P-1 gives length_m; P-2 takes its length from geometry: two points
	// on the parallel 45.2°S, 0.005105° apart. On a sphere the great
	// circle between two points of one parallel is a little shorter
	// than the parallel's arc R·cos φ·Δλ; for 400 m the difference is
	// below 1 mm (geometry of the sphere), so compare with the arc.
	p1, _ := n.LinkIndex("P-1")
	if got := n.Links[p1].Length; got != 1250 {
		t.Errorf("P-1 length: got %g, want 1250 (given)", got)
	}
	p2, _ := n.LinkIndex("P-2")
	arc := EarthRadius * math.Cos(45.2*math.Pi/180) * (9.105105 - 9.1) * math.Pi / 180
	if got := n.Links[p2].Length; math.Abs(got-arc) > 1e-3 {
		t.Errorf("P-2 length: got %.6f m, want the parallel arc %.6f m ±1 mm", got, arc)
	}
	if l := n.Links[p2]; l.Diameter != 250 || l.Roughness != 120 || l.Material != "ductile iron" || l.Installed != 1978 || l.Group != "di-1970s" {
		t.Errorf("P-2: got %+v", l)
	}
	if f, t2 := n.Links[p2].From, n.Links[p2].To; n.Nodes[f].ID != "J-1" || n.Nodes[t2].ID != "J-2" {
		t.Errorf("P-2 ends: got %s -> %s, want J-1 -> J-2", n.Nodes[f].ID, n.Nodes[t2].ID)
	}
	if got := len(n.Patterns["residential"]); got != 24 {
		t.Errorf("residential pattern: got %d values, want 24", got)
	}
	if got := n.Zones(); !reflect.DeepEqual(got, []string{"west", "east"}) {
		t.Errorf("zones: got %v, want [west east]", got)
	}
}

func TestReadValves(t *testing.T) {
	n := readTestFile(t, "valves.geojson")
	kinds := map[ValveType]string{}
	for _, l := range n.Links {
		if l.Kind == Valve {
			kinds[l.Valve] = l.ID
		}
	}
	for v := PressureReducing; v <= Isolating; v++ {
		if kinds[v] == "" {
			t.Errorf("no %s valve in valves.geojson", v)
		}
	}
	pu, ok := n.LinkIndex("PU-1")
	if !ok || n.Links[pu].Kind != Pump || len(n.Links[pu].Curve) != 3 || n.Links[pu].Speed != 1 {
		t.Errorf("PU-1: got %+v", n.Links[pu])
	}
	tk, _ := n.NodeIndex("T-1")
	if got := n.Nodes[tk]; got.Kind != Tank || got.FixedHead() != 43 || got.MinLevel != 0.5 || got.MaxLevel != 6 || got.TankDiameter != 15 {
		t.Errorf("T-1: got %+v", got)
	}
	j6, _ := n.NodeIndex("J-6")
	if n.Nodes[j6].HasCoord {
		t.Errorf("J-6 has null geometry, got HasCoord")
	}
	v3, _ := n.LinkIndex("V-3")
	if l := n.Links[v3]; !l.HasSetting || l.Setting != 8 {
		t.Errorf("V-3 setting: got %v %g, want 8", l.HasSetting, l.Setting)
	}
}

// diffNetworks describes the first difference between two networks, or
// returns "".
func diffNetworks(a, b *Network) string {
	if len(a.Nodes) != len(b.Nodes) || len(a.Links) != len(b.Links) {
		return fmt.Sprintf("sizes: %d nodes %d links vs %d nodes %d links", len(a.Nodes), len(a.Links), len(b.Nodes), len(b.Links))
	}
	for i := range a.Nodes {
		if !reflect.DeepEqual(a.Nodes[i], b.Nodes[i]) {
			return fmt.Sprintf("node %d:\n  %+v\n  %+v", i, a.Nodes[i], b.Nodes[i])
		}
	}
	for i := range a.Links {
		if !reflect.DeepEqual(a.Links[i], b.Links[i]) {
			return fmt.Sprintf("link %d:\n  %+v\n  %+v", i, a.Links[i], b.Links[i])
		}
	}
	if !reflect.DeepEqual(a, b) {
		return fmt.Sprintf("settings:\n  %v %v %v %v %v\n  %v %v %v %v %v", a.Headloss, a.Viscosity, a.PatternStep, a.Patterns, a.Extra,
			b.Headloss, b.Viscosity, b.PatternStep, b.Patterns, b.Extra)
	}
	return ""
}

func roundTrip(t *testing.T, n *Network) *Network {
	t.Helper()
	var buf bytes.Buffer
	if err := Write(&buf, n); err != nil {
		t.Fatalf("Write: %v", err)
	}
	m, err := Read(bytes.NewReader(buf.Bytes()), "rewritten")
	if err != nil {
		t.Fatalf("Read of written file: %v\n%s", err, buf.String())
	}
	return m
}

func TestRoundTripFiles(t *testing.T) {
	files, _ := filepath.Glob(filepath.Join(testdata, "*.geojson"))
	for _, f := range files {
		if strings.HasSuffix(f, ".bad.geojson") {
			continue
		}
		n := readTestFile(t, filepath.Base(f))
		if d := diffNetworks(n, roundTrip(t, n)); d != "" {
			t.Errorf("%s: Read(Write(n)) differs: %s", f, d)
		}
	}
}

func TestRoundTripEveryField(t *testing.T) {
	// A network built in code that sets every field the format holds.
	nodes := []Node{
		{ID: "src", Kind: Reservoir, Coord: Point{-0.5, -51.25}, HasCoord: true, Head: 120.5, Elevation: 120.5, Zone: "a",
			Extra: map[string]json.RawMessage{"label": json.RawMessage(`{"en":"source","n":[1,2]}`)}},
		{ID: "j1", Kind: Junction, Coord: Point{-0.49, -51.251}, HasCoord: true, Elevation: 31.25, Demand: 1.5, Pattern: "day",
			Zone: "a", LeakCoeff: 0.013, LeakExponent: 1.18},
		{ID: "j2", Kind: Junction, Elevation: -2, Demand: -0.25},
		{ID: "t", Kind: Tank, Coord: Point{-0.48, -51.252}, HasCoord: true, Elevation: 60, Level: 2.5, MinLevel: 0.3, MaxLevel: math.Inf(1), TankDiameter: 12.5},
		{ID: "t2", Kind: Tank, Elevation: 61, Level: 0, MaxLevel: 4},
	}
	links := []Link{
		{ID: "p1", Kind: Pipe, From: 0, To: 1, Length: 123.456789, Diameter: 200, Roughness: 0.05, MinorLoss: 0.4,
			Status: Closed, CheckValve: true, Material: "steel", Installed: 1931, Group: "g1",
			Geometry: []Point{{-0.5, -51.25}, {-0.495, -51.2505}, {-0.49, -51.251}},
			Extra:    map[string]json.RawMessage{"asset": json.RawMessage(`"A-77"`), "depth": json.RawMessage(`1.2`)}},
		{ID: "pu", Kind: Pump, From: 1, To: 2, Curve: [][2]float64{{12.5, 30}}, Speed: 0.85},
		{ID: "pu0", Kind: Pump, From: 1, To: 2, Curve: [][2]float64{{0, 40}, {10, 38}, {20, 31}}, Speed: 1, Status: Closed},
		{ID: "v1", Kind: Valve, From: 2, To: 3, Diameter: 100, Valve: PressureReducing, Setting: 0, HasSetting: true},
		{ID: "v2", Kind: Valve, From: 3, To: 4, Diameter: 80, Valve: Isolating, Status: Closed},
	}
	n := New(nodes, links)
	n.Headloss = DarcyWeisbach
	n.Viscosity = 1.31e-6
	n.PatternStep = 90 * 60e9 // 1h30m
	n.Patterns = map[string][]float64{"day": {0.5, 1, 1.5}, "z": {1e-7}}
	n.Extra = map[string]json.RawMessage{"name": json.RawMessage(`"Test estate"`)}
	m := roundTrip(t, n)
	if d := diffNetworks(n, m); d != "" {
		t.Errorf("Read(Write(n)) differs: %s", d)
	}
	// Writing twice gives the same bytes (stable key order).
	var b1, b2 bytes.Buffer
	if err := Write(&b1, n); err != nil {
		t.Fatal(err)
	}
	if err := Write(&b2, m); err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(b1.Bytes(), b2.Bytes()) {
		t.Errorf("Write(n) and Write(Read(Write(n))) differ:\n%s\n%s", b1.String(), b2.String())
	}
}

func TestWriteFileAndClone(t *testing.T) {
	n := readTestFile(t, "two-loop.geojson")
	path := filepath.Join(t.TempDir(), "out.geojson")
	if err := WriteFile(path, n); err != nil {
		t.Fatal(err)
	}
	m, err := ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if d := diffNetworks(n, m); d != "" {
		t.Errorf("WriteFile/ReadFile differs: %s", d)
	}
	c := n.Clone()
	c.Nodes[0].Extra["name"] = json.RawMessage(`"changed"`)
	if string(n.Nodes[0].Extra["name"]) == `"changed"` {
		t.Errorf("Clone shares Extra maps with the original")
	}
}

func TestWriteRejectsUnwritable(t *testing.T) {
	n := New([]Node{{ID: "a", Kind: Junction, Elevation: math.NaN()}}, nil)
	if err := Write(&bytes.Buffer{}, n); err == nil {
		t.Errorf("Write of a NaN elevation: got no error")
	}
	n = New([]Node{{ID: "a", Kind: Reservoir}}, []Link{{ID: "p", Kind: Pipe, From: 0, To: 3}})
	if err := Write(&bytes.Buffer{}, n); err == nil {
		t.Errorf("Write of a link to node 3 of 1: got no error")
	}
}

func TestValidateBuiltNetwork(t *testing.T) {
	nodes := []Node{
		{ID: "r", Kind: Reservoir, Head: 50},
		{ID: "a", Kind: Junction, Elevation: math.Inf(1)},
		{ID: "b", Kind: Junction},
		{ID: "", Kind: Junction},
	}
	links := []Link{
		{ID: "p", Kind: Pipe, From: 0, To: 1, Length: 10, Diameter: 100, Roughness: 100},
		{ID: "q", Kind: Pipe, From: 1, To: 7, Length: 10, Diameter: 100, Roughness: 100},
		{ID: "s", Kind: Pipe, From: 1, To: 2, Length: 10, Diameter: 100, Roughness: 100, Status: Closed},
		{ID: "u", Kind: Pipe, From: 2, To: 3, Length: 10, Diameter: 100, Roughness: 100},
	}
	probs := Validate(New(nodes, links))
	var got []string
	for _, p := range probs {
		got = append(got, p.String())
	}
	sort.Strings(got)
	want := []string{
		"feature a: elevation_m: must be a finite number, got +Inf",
		"feature b: warning: closed links cut off the part of the network holding this junction (2 junctions)",
		"feature q: to: node index 7 out of range (4 nodes)",
		"id: missing: every node and link needs a unique id",
	}
	ok := len(got) == len(want)
	for i := 0; ok && i < len(want); i++ {
		ok = strings.HasPrefix(got[i], want[i])
	}
	if !ok {
		t.Errorf("got:\n  %s\nwant:\n  %s", strings.Join(got, "\n  "), strings.Join(want, "\n  "))
	}
}

func TestWarnings(t *testing.T) {
	src := `{"type": "FeatureCollection", "network": {"headloss": "hazen-williams", "pattern_stepp": "1h"}, "crs": {"type": "name"}, "features": [
{"type": "Feature", "geometry": null, "properties": {"id": "R", "kind": "reservoir", "head_m": 50}},
{"type": "Feature", "geometry": null, "properties": {"id": "J", "kind": "junction", "elevation_m": 10, "head_m": 3, "demnd_lps": 2}},
{"type": "Feature", "geometry": null, "properties": {"id": "P", "kind": "pipe", "from": "R", "to": "J", "diameter_mm": 0.3, "roughness": 200, "length_m": 10}},
{"type": "Feature", "geometry": null, "properties": {"id": "V", "kind": "valve", "from": "R", "to": "J", "valve": "isolating", "diameter_mm": 100, "setting": 3}}
]}`
	n, probs := Parse([]byte(src), "w.geojson")
	if n == nil {
		t.Fatalf("warnings only, want a network; got %v", probs)
	}
	want := []string{
		"w.geojson:1: network.pattern_stepp: warning: unknown setting, ignored (did you mean pattern_step?)",
		"w.geojson:1: crs: warning: RFC 7946 has no crs member",
		"w.geojson:3: feature J: demnd_lps: warning: unknown property, kept as is (did you mean demand_lps?)",
		"w.geojson:3: feature J: head_m: warning: not a property of a junction",
		"w.geojson:4: feature P: diameter_mm: warning: 0.3 mm is very small",
		"w.geojson:4: feature P: roughness: warning: Hazen-Williams C 200 is outside the usual 40-160",
		"w.geojson:5: feature V: setting: warning: an isolating valve is open or closed",
	}
	var got []string
	for _, p := range probs {
		got = append(got, p.String())
	}
	if len(got) != len(want) {
		t.Fatalf("got %d problems, want %d:\n  %s", len(got), len(want), strings.Join(got, "\n  "))
	}
	for i := range want {
		if !strings.HasPrefix(got[i], want[i]) {
			t.Errorf("problem %d:\n got %s\nwant %s...", i, got[i], want[i])
		}
	}
}

func TestAboveSourcesWarning(t *testing.T) {
	// J2 at 60 m is above the only head (50 m); J1 at 40 m is not. With a
	// pump in the part, no warning.
	nodes := []Node{
		{ID: "R", Kind: Reservoir, Head: 50, Elevation: 50},
		{ID: "J1", Kind: Junction, Elevation: 40},
		{ID: "J2", Kind: Junction, Elevation: 60},
	}
	pipe := func(id string, a, b int) Link {
		return Link{ID: id, Kind: Pipe, From: a, To: b, Length: 100, Diameter: 100, Roughness: 100}
	}
	probs := Validate(New(nodes, []Link{pipe("P1", 0, 1), pipe("P2", 1, 2)}))
	if len(probs) != 1 || probs[0].Feature != "J2" || probs[0].Severity != Warning ||
		!strings.Contains(probs[0].Message, "60 m is above every reservoir and tank head") {
		t.Errorf("got %v, want one warning on J2", probs)
	}
	pumpLink := Link{ID: "U", Kind: Pump, From: 0, To: 1, Curve: [][2]float64{{10, 30}}, Speed: 1}
	if probs := Validate(New(nodes, []Link{pumpLink, pipe("P2", 1, 2)})); len(probs) != 0 {
		t.Errorf("with a pump: got %v, want none", probs)
	}
}

func TestPlaceWarnings(t *testing.T) {
	// J1 and J2 are 0.01° of latitude apart: R·π/180·0.01 = 1111.95 m on
	// the IUGG mean sphere (geometry of the sphere).
	src := `{"type": "FeatureCollection", "features": [
{"type": "Feature", "geometry": {"type": "Point", "coordinates": [9, -45]}, "properties": {"id": "R", "kind": "reservoir", "head_m": 50}},
{"type": "Feature", "geometry": {"type": "Point", "coordinates": [9, -44.99]}, "properties": {"id": "J", "kind": "junction", "elevation_m": 10}},
{"type": "Feature", "geometry": null, "properties": {"id": "P1", "kind": "pipe", "from": "R", "to": "J", "diameter_mm": 100, "roughness": 100, "length_m": 500}},
{"type": "Feature", "geometry": null, "properties": {"id": "P2", "kind": "pipe", "from": "R", "to": "J", "diameter_mm": 100, "roughness": 100, "length_m": 1050}},
{"type": "Feature", "geometry": {"type": "LineString", "coordinates": [[9.01, -45], [9, -44.99]]}, "properties": {"id": "P3", "kind": "pipe", "from": "R", "to": "J", "diameter_mm": 100, "roughness": 100, "length_m": 1200}},
{"type": "Feature", "geometry": {"type": "LineString", "coordinates": [[9, -44.99], [9.0001, -45]]}, "properties": {"id": "P4", "kind": "pipe", "from": "R", "to": "J", "diameter_mm": 100, "roughness": 100, "length_m": 1200}}
]}`
	_, probs := Parse([]byte(src), "p.geojson")
	var got []string
	for _, p := range probs {
		got = append(got, p.String())
	}
	want := []string{
		"p.geojson:4: feature P1: length_m: warning: 500 m is shorter than the 1112 m between nodes R and J",
		// 0.01° of longitude at 45°S: 1111.95 m · cos 45° = 786.3 m.
		"p.geojson:6: feature P3: geometry: warning: the line ends 786 m from its nodes R and J: check from and to",
	}
	// P2 (1050 m) is within the 10 % allowance; P4 runs To→From and ends
	// 8 m from R: both legal.
	if strings.Join(got, "\n") != strings.Join(want, "\n") {
		t.Errorf("got:\n  %s\nwant:\n  %s", strings.Join(got, "\n  "), strings.Join(want, "\n  "))
	}
}

// A leading UTF-8 byte order mark (EF BB BF) is skipped, as RFC 8259
// §8.1 allows a JSON parser to do: the file reads as it does without
// one, and every problem of a bad file keeps its line.
func TestByteOrderMark(t *testing.T) {
	const bom = "\xef\xbb\xbf"
	path := filepath.Join(testdata, "two-loop.geojson")
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	plain := readTestFile(t, "two-loop.geojson")
	withBOM := append([]byte(bom), data...)
	n, err := Read(bytes.NewReader(withBOM), "bom.geojson")
	if err != nil {
		t.Fatalf("Read with a byte order mark: %v", err)
	}
	if d := diffNetworks(plain, n); d != "" {
		t.Errorf("with a byte order mark the network differs: %s", d)
	}
	bomPath := filepath.Join(t.TempDir(), "bom.geojson")
	if err := os.WriteFile(bomPath, withBOM, 0o644); err != nil {
		t.Fatal(err)
	}
	if _, err := ReadFile(bomPath); err != nil {
		t.Errorf("ReadFile with a byte order mark: %v", err)
	}

	files, err := filepath.Glob(filepath.Join(testdata, "*.bad.geojson"))
	if err != nil || len(files) == 0 {
		t.Fatalf("no bad corpus: %v", err)
	}
	for _, path := range files {
		data, err := os.ReadFile(path)
		if err != nil {
			t.Fatal(err)
		}
		name := filepath.Base(path)
		_, want := Parse(data, name)
		_, got := Parse(append([]byte(bom), data...), name)
		if fmt.Sprint(got) != fmt.Sprint(want) {
			t.Errorf("%s with a byte order mark:\n got %v\nwant %v", name, got, want)
		}
	}

	// Only a leading mark is skipped: one anywhere else is not JSON.
	_, probs := Parse([]byte("{\"type\": \"FeatureCollection\",\n"+bom+"\"features\": []}"), "mid.geojson")
	if !HasErrors(probs) || !strings.HasPrefix(probs[0].String(), "mid.geojson:2: not valid JSON") {
		t.Errorf("a byte order mark inside the file: got %v, want a JSON error on line 2", probs)
	}
}
