package hydraulic

import (
	"fmt"
	"math"
	"testing"

	"plumbline/model/network"
)

// builder assembles small test networks by id.
type builder struct {
	nodes []network.Node
	links []network.Link
	idx   map[string]int
}

func newBuilder() *builder { return &builder{idx: map[string]int{}} }

func (b *builder) node(n network.Node) *builder {
	b.idx[n.ID] = len(b.nodes)
	b.nodes = append(b.nodes, n)
	return b
}

func (b *builder) junction(id string, elev, demand float64) *builder {
	return b.node(network.Node{ID: id, Kind: network.Junction, Elevation: elev, Demand: demand})
}

func (b *builder) reservoir(id string, head float64) *builder {
	return b.node(network.Node{ID: id, Kind: network.Reservoir, Elevation: head, Head: head})
}

func (b *builder) tank(id string, bottom, level float64) *builder {
	return b.node(network.Node{ID: id, Kind: network.Tank, Elevation: bottom, Level: level, MaxLevel: level + 5, TankDiameter: 10})
}

func (b *builder) link(l network.Link, from, to string) *builder {
	f, ok1 := b.idx[from]
	t, ok2 := b.idx[to]
	if !ok1 || !ok2 {
		panic("test network: unknown node " + from + " or " + to)
	}
	l.From, l.To = f, t
	b.links = append(b.links, l)
	return b
}

func (b *builder) pipe(id, from, to string, length, diamMM, rough float64) *builder {
	return b.link(network.Link{ID: id, Kind: network.Pipe, Length: length, Diameter: diamMM, Roughness: rough}, from, to)
}

func (b *builder) net() *network.Network { return network.New(b.nodes, b.links) }

func mustSolve(t testing.TB, net *network.Network, c *Conditions) (*Solver, *Solution) {
	t.Helper()
	s, err := NewSolver(net, Options{})
	if err != nil {
		t.Fatal(err)
	}
	sol, err := s.Solve(c, nil)
	if err != nil {
		t.Fatal(err)
	}
	return s, sol
}

func near(t testing.TB, what string, got, want, tol float64) {
	t.Helper()
	if math.IsNaN(got) || math.Abs(got-want) > tol {
		t.Errorf("%s = %.9g, want %.9g ± %g (diff %.3g)", what, got, want, tol, got-want)
	}
}

// grid builds a looped nx×ny grid of junctions fed by one reservoir at a
// corner (and a second at the far corner if two), pipes of mixed
// diameters, deterministic pseudo-random demands and elevations.
func grid(nx, ny int, two bool, formula network.HeadlossFormula) *network.Network {
	var nodes []network.Node
	var links []network.Link
	id := func(i, j int) int { return j*nx + i }
	seed := uint64(12345)
	rnd := func() float64 {
		seed ^= seed << 13
		seed ^= seed >> 7
		seed ^= seed << 17
		return float64(seed%1000000) / 1e6
	}
	// Large grids get smaller demands per junction (a denser street
	// grid), so heads stay in the service range whatever the size.
	scale := math.Min(1, 1000/float64(nx*ny))
	for j := 0; j < ny; j++ {
		for i := 0; i < nx; i++ {
			nodes = append(nodes, network.Node{
				ID: fmt.Sprintf("J%d_%d", i, j), Kind: network.Junction,
				Elevation: 10 + 5*rnd(), Demand: scale * (0.05 + 0.5*rnd()),
			})
		}
	}
	rough := 110.0
	if formula == network.DarcyWeisbach {
		rough = 0.1
	}
	diam := func() float64 { return []float64{100, 150, 200, 250}[int(rnd()*4)] }
	for j := 0; j < ny; j++ {
		for i := 0; i < nx; i++ {
			if i+1 < nx {
				links = append(links, network.Link{ID: fmt.Sprintf("P%d_%d_h", i, j), Kind: network.Pipe,
					From: id(i, j), To: id(i+1, j), Length: 80 + 60*rnd(), Diameter: diam(), Roughness: rough})
			}
			if j+1 < ny {
				links = append(links, network.Link{ID: fmt.Sprintf("P%d_%d_v", i, j), Kind: network.Pipe,
					From: id(i, j), To: id(i, j+1), Length: 80 + 60*rnd(), Diameter: diam(), Roughness: rough})
			}
		}
	}
	nj := len(nodes)
	// Demands scale with the grid so the mains stay hydraulically sane:
	// the feed pipes are large.
	feedD := 300 + 200*math.Sqrt(math.Min(float64(nj), 1000)/100)
	nodes = append(nodes, network.Node{ID: "R1", Kind: network.Reservoir, Head: 80, Elevation: 80})
	links = append(links, network.Link{ID: "F1", Kind: network.Pipe, From: nj, To: id(0, 0), Length: 50, Diameter: feedD, Roughness: rough})
	if two {
		nodes = append(nodes, network.Node{ID: "R2", Kind: network.Reservoir, Head: 78, Elevation: 78})
		links = append(links, network.Link{ID: "F2", Kind: network.Pipe, From: nj + 1, To: id(nx-1, ny-1), Length: 50, Diameter: feedD, Roughness: rough})
	}
	n := network.New(nodes, links)
	n.Headloss = formula
	return n
}

// checkBalance verifies continuity at every junction (Kirchhoff's
// junction rule) and energy along every open link (head difference =
// head loss of the link's own law at its flow).
func checkBalance(t *testing.T, s *Solver, sol *Solution, tol float64) {
	t.Helper()
	net := s.net
	res := make([]float64, len(net.Nodes))
	for i := range net.Nodes {
		res[i] = -sol.Demand[i] - sol.Leak[i]
	}
	for k, l := range net.Links {
		res[l.From] -= sol.Flow[k]
		res[l.To] += sol.Flow[k]
	}
	for i, n := range net.Nodes {
		if n.Kind == network.Junction && math.Abs(res[i]) > tol {
			t.Errorf("junction %s: continuity residual %.3g L/s > %g", n.ID, res[i], tol)
		}
	}
}
