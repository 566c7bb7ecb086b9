package hydraulic

import (
	"fmt"
	"syscall"
	"testing"
	"time"

	"plumbline/model/netgen"
	"plumbline/model/network"
)

// cpuTime is the process's user+system CPU time. The machine the
// benchmarks run on is shared, so besides ns/op (wall clock) they report
// cpu-ms/op, which contention inflates much less (the solver is one
// goroutine; garbage collection adds a little).
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// loop runs body b.N times and reports iterations and CPU time per op.
func loop(b *testing.B, body func() int) {
	b.ReportAllocs()
	it := 0
	c0 := cpuTime()
	n := 0
	for b.Loop() {
		it = body()
		n++
	}
	b.ReportMetric(float64(it), "iterations")
	b.ReportMetric(float64(cpuTime()-c0)/1e6/float64(n), "cpu-ms/op")
}

func benchTown(b *testing.B, n int) *network.Network {
	b.Helper()
	net, err := netgen.Town(netgen.Options{Junctions: n, Seed: 1})
	if err != nil {
		b.Fatal(err)
	}
	return net
}

// BenchmarkSolveCold is NewSolver (ordering, symbolic analysis) plus one
// Solve from a cold start, on generated towns (targets on 2 cores:
// 100k junctions ≤ 1.0 s).
func BenchmarkSolveCold(b *testing.B) {
	for _, n := range []int{1000, 10000, 100000} {
		net := benchTown(b, n)
		b.Run(fmt.Sprintf("junctions=%d", n), func(b *testing.B) {
			loop(b, func() int {
				s, err := NewSolver(net, Options{})
				if err != nil {
					b.Fatal(err)
				}
				sol, err := s.Solve(nil, nil)
				if err != nil {
					b.Fatal(err)
				}
				return sol.Iterations
			})
		})
	}
}

// BenchmarkSolveWarm is a Solve with all demands ×1.1, warm-started from
// the solution at base demand, same Solver (targets on 2 cores: 100k
// junctions ≤ 0.3 s, 10k ≤ 25 ms).
func BenchmarkSolveWarm(b *testing.B) {
	for _, n := range []int{1000, 10000, 100000} {
		net := benchTown(b, n)
		b.Run(fmt.Sprintf("junctions=%d", n), func(b *testing.B) {
			s, err := NewSolver(net, Options{})
			if err != nil {
				b.Fatal(err)
			}
			base, err := s.Solve(nil, nil)
			if err != nil {
				b.Fatal(err)
			}
			c := &Conditions{Demand: make([]float64, len(net.Nodes))}
			for i := range net.Nodes {
				c.Demand[i] = 1.1 * net.Nodes[i].Demand
			}
			loop(b, func() int {
				sol, err := s.Solve(c, base)
				if err != nil {
					b.Fatal(err)
				}
				return sol.Iterations
			})
		})
	}
}

// BenchmarkSolveGrid is the same on square looped grids (every junction
// on four pipes: the hardest pattern for the Cholesky fill), cold and
// warm.
func BenchmarkSolveGrid(b *testing.B) {
	for _, side := range []int{32, 100, 317} {
		net := grid(side, side, true, network.HazenWilliams)
		n := side * side
		b.Run(fmt.Sprintf("cold/junctions=%d", n), func(b *testing.B) {
			loop(b, func() int {
				s, err := NewSolver(net, Options{})
				if err != nil {
					b.Fatal(err)
				}
				sol, err := s.Solve(nil, nil)
				if err != nil {
					b.Fatal(err)
				}
				return sol.Iterations
			})
		})
		b.Run(fmt.Sprintf("warm/junctions=%d", n), func(b *testing.B) {
			s, err := NewSolver(net, Options{})
			if err != nil {
				b.Fatal(err)
			}
			base, err := s.Solve(nil, nil)
			if err != nil {
				b.Fatal(err)
			}
			c := &Conditions{Demand: make([]float64, len(net.Nodes))}
			for i := range net.Nodes {
				c.Demand[i] = 1.1 * net.Nodes[i].Demand
			}
			loop(b, func() int {
				sol, err := s.Solve(c, base)
				if err != nil {
					b.Fatal(err)
				}
				return sol.Iterations
			})
		})
	}
}
