package score

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
	"time"

	"gonum.org/v1/gonum/graph/path"
	"gonum.org/v1/gonum/graph/simple"

	"plumbline/model/finding"
	"plumbline/model/network"
)

// handNetwork is drawn by hand (lengths in m):
//
//	      100        200
//	  A ---------- B -------- C
//	  |            |          |
//	50|         300|       100|
//	  |            |          |
//	  D ---------- E -------- F        G ---- H  (apart, 70)
//	      400          80
//
// A, B, D are in zone north, C, E, F in zone south, G and H in zone east.
func handNetwork() *network.Network {
	ids := []string{"A", "B", "C", "D", "E", "F", "G", "H"}
	zones := []string{"north", "north", "south", "north", "south", "south", "east", "east"}
	nodes := make([]network.Node, len(ids))
	for i, id := range ids {
		nodes[i] = network.Node{ID: id, Zone: zones[i]}
	}
	nodes[0].Kind = network.Reservoir
	idx := func(id string) int {
		for i := range ids {
			if ids[i] == id {
				return i
			}
		}
		panic(id)
	}
	mk := func(id, a, b string, l float64) network.Link {
		return network.Link{ID: id, From: idx(a), To: idx(b), Length: l}
	}
	links := []network.Link{
		mk("AB", "A", "B", 100), mk("BC", "B", "C", 200), mk("AD", "A", "D", 50),
		mk("BE", "B", "E", 300), mk("CF", "C", "F", 100), mk("DE", "D", "E", 400),
		mk("EF", "E", "F", 80), mk("GH", "G", "H", 70),
	}
	return network.New(nodes, links)
}

// TestDistanceByHand checks Paths against distances worked out by hand on
// handNetwork (every route between the two elements listed, the shortest
// taken).
func TestDistanceByHand(t *testing.T) {
	p := NewPaths(handNetwork())
	cases := []struct {
		a, b string
		want float64
		ok   bool
		how  string
	}{
		{"A", "A", 0, true, "same node"},
		{"A", "E", 400, true, "A-B-E 400; A-D-E 450; A-B-C-F-E 480"},
		{"E", "A", 400, true, "undirected: same as A to E"},
		{"A", "F", 400, true, "A-B-C-F 400; A-B-E-F 480; A-D-E-F 530"},
		{"D", "C", 350, true, "D-A-B-C 350; D-E-F-C 580"},
		{"D", "F", 450, true, "D-A-B-C-F 450; D-E-F 480"},
		{"A", "BE", 250, true, "A-B 100, then half of BE 150"},
		{"BE", "A", 250, true, "link to node, same as node to link"},
		{"AB", "A", 50, true, "half of AB"},
		{"AB", "AB", 0, true, "a link from itself"},
		{"BC", "CF", 150, true, "half BC 100 + half CF 50, sharing C"},
		{"DE", "CF", 330, true, "half DE 200 + E-F 80 + half CF 50; via D: 200+450+50"},
		{"A", "G", 0, false, "G is not connected"},
		{"GH", "H", 35, true, "half of GH"},
		{"A", "Z", 0, false, "no such element"},
	}
	for _, c := range cases {
		got, ok := p.Distance(c.a, c.b)
		if ok != c.ok || math.Abs(got-c.want) > 1e-9 {
			t.Errorf("Distance(%s, %s): got %g %v, want %g %v (tolerance 1e-9; by hand: %s)", c.a, c.b, got, ok, c.want, c.ok, c.how)
		}
	}
}

// randomNetwork makes a connected network of n nodes: a random spanning
// tree plus extra links, lengths uniform in [1, 500) m, no parallel links.
func randomNetwork(rng *rand.Rand, n, extra int) *network.Network {
	nodes := make([]network.Node, n)
	for i := range nodes {
		nodes[i] = network.Node{ID: fmt.Sprintf("N%d", i)}
	}
	var links []network.Link
	seen := map[[2]int]bool{}
	add := func(a, b int) {
		if a == b || seen[[2]int{a, b}] || seen[[2]int{b, a}] {
			return
		}
		seen[[2]int{a, b}] = true
		links = append(links, network.Link{ID: fmt.Sprintf("L%d", len(links)), From: a, To: b, Length: 1 + 499*rng.Float64()})
	}
	for i := 1; i < n; i++ {
		add(i, rng.IntN(i))
	}
	for k := 0; k < extra; k++ {
		add(rng.IntN(n), rng.IntN(n))
	}
	return network.New(nodes, links)
}

// TestDistanceAgainstGonum compares Paths with gonum's Dijkstra
// (graph/path.DijkstraFrom over graph/simple.WeightedUndirectedGraph), an
// independent implementation, on the hand-drawn network and on random
// networks, node to node; and the link rule (midpoint through the nearer
// end) against the same gonum distances.
func TestDistanceAgainstGonum(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 11))
	nets := []*network.Network{handNetwork(), randomNetwork(rng, 60, 90), randomNetwork(rng, 150, 40)}
	for ni, net := range nets {
		g := simple.NewWeightedUndirectedGraph(0, math.Inf(1))
		for i := range net.Nodes {
			g.AddNode(simple.Node(i))
		}
		for _, l := range net.Links {
			g.SetWeightedEdge(g.NewWeightedEdge(simple.Node(l.From), simple.Node(l.To), l.Length))
		}
		p := NewPaths(net)
		for src := 0; src < len(net.Nodes); src += 1 + len(net.Nodes)/12 {
			tree := path.DijkstraFrom(simple.Node(src), g)
			for dst := range net.Nodes {
				want := tree.WeightTo(int64(dst))
				got, ok := p.Distance(net.Nodes[src].ID, net.Nodes[dst].ID)
				if math.IsInf(want, 1) {
					if ok {
						t.Errorf("net %d: %s→%s: got %g, gonum says unreachable", ni, net.Nodes[src].ID, net.Nodes[dst].ID, got)
					}
					continue
				}
				if !ok || math.Abs(got-want) > 1e-9*math.Max(1, want) {
					t.Errorf("net %d: %s→%s: got %g %v, gonum %g (relative tolerance 1e-9)", ni, net.Nodes[src].ID, net.Nodes[dst].ID, got, ok, want)
				}
			}
			for li := 0; li < len(net.Links); li += 1 + len(net.Links)/10 {
				l := net.Links[li]
				a, b := tree.WeightTo(int64(l.From)), tree.WeightTo(int64(l.To))
				if math.IsInf(a, 1) {
					continue
				}
				want := math.Min(a, b) + l.Length/2
				got, ok := p.Distance(net.Nodes[src].ID, l.ID)
				if !ok || math.Abs(got-want) > 1e-9*math.Max(1, want) {
					t.Errorf("net %d: %s→link %s: got %g %v, want gonum min(ends)+L/2 = %g", ni, net.Nodes[src].ID, l.ID, got, ok, want)
				}
			}
		}
	}
}

// BenchmarkDistance measures one distance query (one Dijkstra) on a
// 5000-node random network.
func BenchmarkDistance(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 2))
	net := randomNetwork(rng, 5000, 2500)
	p := NewPaths(net)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, ok := p.Distance("N0", fmt.Sprintf("N%d", 4999-i%100)); !ok {
			b.Fatal("unreachable")
		}
	}
}

// BenchmarkScore scores 200 events against 1000 findings on a 5000-node
// random network (one Dijkstra per detected leak or blockage).
func BenchmarkScore(b *testing.B) {
	rng := rand.New(rand.NewPCG(3, 4))
	net := randomNetwork(rng, 5000, 2500)
	var truth []finding.Event
	var findings []finding.Finding
	for i := 0; i < 200; i++ {
		truth = append(truth, finding.Event{Kind: finding.Leak, At: fmt.Sprintf("N%d", rng.IntN(5000)), Start: t0.Add(time.Duration(i) * time.Hour), SizeLPS: 1})
	}
	for j := 0; j < 1000; j++ {
		findings = append(findings, finding.Finding{Kind: finding.Leak, Raised: t0.Add(time.Duration(j) * 12 * time.Minute),
			Candidates: cands(fmt.Sprintf("N%d", rng.IntN(5000)), fmt.Sprintf("N%d", rng.IntN(5000)))})
	}
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		r := Score(truth, findings, net, Options{})
		if r.Overall.Detected == 0 {
			b.Fatal("nothing detected")
		}
	}
}
