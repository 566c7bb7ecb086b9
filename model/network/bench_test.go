package network

import (
	"bytes"
	"fmt"
	"testing"
)

// gridNetwork builds a k×k grid of junctions fed by one reservoir at a
// corner, with 300 m pipes, as a size benchmark input.
func gridNetwork(k int) *Network {
	var nodes []Node
	var links []Link
	const step = 0.0027 // about 300 m of latitude
	nodes = append(nodes, Node{ID: "R", Kind: Reservoir, Head: 80, Elevation: 80, Coord: Point{9, -45 - step}, HasCoord: true})
	id := func(i, j int) int { return 1 + i*k + j }
	for i := 0; i < k; i++ {
		for j := 0; j < k; j++ {
			nodes = append(nodes, Node{ID: fmt.Sprintf("J-%d-%d", i, j), Kind: Junction, Elevation: 20, Demand: 0.1,
				Coord: Point{9 + float64(j)*step, -45 + float64(i)*step}, HasCoord: true, Zone: "z"})
		}
	}
	add := func(a, b int) {
		links = append(links, Link{ID: fmt.Sprintf("P-%d", len(links)), Kind: Pipe, From: a, To: b, Diameter: 150, Roughness: 110,
			Geometry: []Point{nodes[a].Coord, nodes[b].Coord}})
		links[len(links)-1].Length = PolylineLength(links[len(links)-1].Geometry)
	}
	add(0, id(0, 0))
	for i := 0; i < k; i++ {
		for j := 0; j < k; j++ {
			if j+1 < k {
				add(id(i, j), id(i, j+1))
			}
			if i+1 < k {
				add(id(i, j), id(i+1, j))
			}
		}
	}
	return New(nodes, links)
}

// BenchmarkParse reads a grid network file of about 10k junctions and
// 20k pipes (go test -bench Parse ./model/network/).
func BenchmarkParse(b *testing.B) {
	var buf bytes.Buffer
	if err := Write(&buf, gridNetwork(100)); err != nil {
		b.Fatal(err)
	}
	data := buf.Bytes()
	b.SetBytes(int64(len(data)))
	b.ResetTimer()
	for b.Loop() {
		n, probs := Parse(data, "grid.geojson")
		if n == nil {
			b.Fatal(probs)
		}
	}
}

// BenchmarkWrite writes the same grid.
func BenchmarkWrite(b *testing.B) {
	n := gridNetwork(100)
	var buf bytes.Buffer
	for b.Loop() {
		buf.Reset()
		if err := Write(&buf, n); err != nil {
			b.Fatal(err)
		}
	}
	b.SetBytes(int64(buf.Len()))
}

func TestGridRoundTrip(t *testing.T) {
	n := gridNetwork(12)
	if probs := Validate(n); len(probs) != 0 {
		t.Fatalf("grid: %v", probs)
	}
	if d := diffNetworks(n, roundTrip(t, n)); d != "" {
		t.Errorf("grid round trip: %s", d)
	}
}
