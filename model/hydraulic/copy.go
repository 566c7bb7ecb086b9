package hydraulic

// CopyInto copies sol into dst's memory (allocating what dst lacks or
// has of another size) and returns dst (a fresh Solution if dst is nil).
// A solution made on one Solver by another goroutine can so be kept,
// used as a warm start or handed to Sensitivities, while that Solver's
// memory goes on to the next solve. The copy is sol bit for bit.
func (sol *Solution) CopyInto(dst *Solution) *Solution {
	if dst == nil {
		dst = &Solution{}
	}
	cp := func(d, s []float64) []float64 { return append(d[:0], s...) }
	dst.Head, dst.Pressure = cp(dst.Head, sol.Head), cp(dst.Pressure, sol.Pressure)
	dst.Demand, dst.Leak = cp(dst.Demand, sol.Demand), cp(dst.Leak, sol.Leak)
	dst.Flow, dst.Velocity, dst.Headloss = cp(dst.Flow, sol.Flow), cp(dst.Velocity, sol.Velocity), cp(dst.Headloss, sol.Headloss)
	dst.State = append(dst.State[:0], sol.State...)
	dst.Iterations, dst.MaxFlowChange, dst.MaxImbalance, dst.Converged = sol.Iterations, sol.MaxFlowChange, sol.MaxImbalance, sol.Converged
	dst.leakC, dst.leakN = cp(dst.leakC, sol.leakC), cp(dst.leakN, sol.leakN)
	dst.speed, dst.setting, dst.factor = cp(dst.speed, sol.speed), cp(dst.setting, sol.setting), cp(dst.factor, sol.factor)
	dst.solver = sol.solver
	return dst
}
