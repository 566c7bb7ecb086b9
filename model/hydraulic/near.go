package hydraulic

import (
	"errors"
	"math"

	"plumbline/model/sparse"
)

// Near keeps a factored Newton matrix from one solve to the next, for a
// run of solves of conditions near one another (the localisation's trial
// solves: one link's resistance raised, or a leak added, at a time), so
// that each Newton step refactors only the few rows of the Cholesky factor
// whose matrix entries moved instead of the whole matrix.
//
// In a Newton step of SolveNear an open link whose law's slope dh/dQ lies
// within nearTolerance of the slope already kept for it, and whose flow
// moved little enough in the step before (nearStepError), is linearised
// with the kept slope, in both the matrix and its flow update, so that its
// matrix entries stay as factored; any other link's slope is kept anew.
// The steps are those of Newton's method with an approximate derivative
// (a chord method per link; Kelley 1995, "Iterative methods for linear
// and nonlinear equations", SIAM, §5.4 and ch. 7): continuity still holds
// after every step, as in the global gradient method, and the energy
// equations converge at least linearly, at a rate of about nearTolerance,
// instead of quadratically, to the same solution. The factor is then
// brought up to date by sparse.Factor.Refactorize on the rows whose entries
// differ from the factored ones (bit for bit what a full factorisation of
// that matrix gives).
//
// Leak slopes are not kept (continuity would then not hold after a
// step): a junction whose leak is solved in head form has a new diagonal
// at every step, so on a network with many such leaks the factor is
// refactored nearly everywhere and SolveNear costs about what SolveInto
// does.
//
// A Near belongs to the Solver that made it and holds a factor of its own
// (as much memory as the Solver's); other solves in between do not
// disturb it. It is not safe for concurrent use.
type Near struct {
	s     *Solver
	fac   factorizer
	valid bool      // fac holds the factor of diag, off
	g     []float64 // per link, the slope kept (0: none yet)
	// The matrix the factor holds, and scratch for the rows that differ.
	diag, off []float64
	mark      []bool
	rows      []int
	stats     NearStats
}

// NearStats counts what the solves with a Near did.
type NearStats struct {
	// Steps is the number of Newton steps; Rows the rows of the factor
	// recomputed over all of them, out of Order (the matrix order) each.
	Steps, Rows, Order int
}

// nearTolerance is the relative difference between a link's slope and
// the one kept for it below which SolveNear linearises with the kept one.
// The energy equations then converge at a rate of about this fraction per
// Newton step (the links' slopes are within it of the true ones): as many
// steps as Newton's method takes to the solver's flow tolerance on the
// generated towns, while the matrix changes in a few hundred rows a step
// (TestSolveNearTown). Chosen by measurement, not from a source.
const nearTolerance = 0.05

// nearStepError (L/s) bounds what a kept slope may leave of a link's
// flow change in a step: a slope off by the fraction ε leaves about ε of
// the step in the link's energy equation, so a link whose flow still moves
// by dq is linearised with its own slope once ε·|dq| exceeds this. As the
// iteration converges the flows move less and the kept slopes leave less;
// without this bound the last step would leave up to nearTolerance of
// itself (5e-5 L/s against a step of 1e-3), where Newton's method leaves
// its square. Chosen by measurement, not from a source: with it the
// localisation's misfits agree with those of full Newton solves to about
// 1e-8 of themselves (1e-5 without), at twice to three times the rows
// refactored.
const nearStepError = 1e-7

// NewNear returns an empty Near for s: the first step of the first
// SolveNear factors its matrix in full.
func (s *Solver) NewNear() *Near {
	return &Near{s: s, fac: s.newFactorLike(),
		g: make([]float64, len(s.net.Links)), diag: make([]float64, s.nj), off: make([]float64, len(s.off)),
		mark: make([]bool, s.nj)}
}

// Stats returns the counts of the solves with n so far.
func (n *Near) Stats() NearStats { return n.stats }

// newFactorLike returns a second factorizer of the Solver's pattern.
func (s *Solver) newFactorLike() factorizer {
	switch f := s.fac.(type) {
	case sparseFactor:
		return sparseFactor{f.f.Symbolic().NewFactor()}
	case *denseFactor:
		return newDenseFactor(f.n, f.rows, f.cols)
	}
	panic("hydraulic: unknown factorizer")
}

// SolveNear is SolveInto with the Newton steps of Near: link slopes kept
// from step to step and solve to solve where they moved less than
// nearTolerance, and the kept factor refactored only where its matrix
// moved. The iteration's statuses and convergence test are SolveInto's,
// so the solution meets the same tolerances; it agrees with SolveInto's to
// within them, not bit for bit. n must come from NewNear of this Solver.
func (s *Solver) SolveNear(c *Conditions, warm, dst *Solution, n *Near) (*Solution, error) {
	if n == nil || n.s != s {
		return nil, errors.New("hydraulic: solve near: Near is not from this solver")
	}
	real := s.fac
	s.fac, s.near = nearFactor{n}, n
	defer func() { s.fac, s.near = real, nil }()
	return s.SolveInto(c, warm, dst)
}

// slope returns the slope link k is linearised with, given its law's
// slope g at the present flow and the link's flow change dq in the step
// before.
func (n *Near) slope(k int, g, dq float64) float64 {
	kept := n.g[k]
	d := math.Abs(g - kept)
	if d <= nearTolerance*kept && d*math.Abs(dq) <= nearStepError*kept {
		return kept
	}
	n.g[k] = g
	return g
}

// nearFactor stands in for the Solver's factorizer during SolveNear.
type nearFactor struct{ n *Near }

// Factorize brings the kept factor up to the step's matrix.
func (f nearFactor) Factorize(diag, off []float64) error {
	n := f.n
	nj := len(diag)
	n.stats.Steps++
	n.stats.Order += nj
	if !n.valid {
		copy(n.diag, diag)
		copy(n.off, off)
		n.stats.Rows += nj
		if err := n.fac.Factorize(n.diag, n.off); err != nil {
			return err
		}
		n.valid = true
		return nil
	}
	n.rows = n.rows[:0]
	mark := func(j int) {
		if !n.mark[j] {
			n.mark[j] = true
			n.rows = append(n.rows, j)
		}
	}
	for j, v := range diag {
		if v != n.diag[j] {
			n.diag[j] = v
			mark(j)
		}
	}
	hot := n.s.hot
	for k := range hot {
		m := &hot[k]
		if e := m.entry; e >= 0 && off[e] != n.off[e] {
			n.off[e] = off[e]
			mark(int(m.jf))
		}
	}
	for _, j := range n.rows {
		n.mark[j] = false
	}
	var err error
	if sf, ok := n.fac.(sparseFactor); ok {
		var rows int
		rows, err = sf.f.Refactorize(n.diag, n.off, n.rows)
		n.stats.Rows += rows
		var npd *sparse.NotPositiveDefiniteError
		if errors.As(err, &npd) {
			err = &pivotError{row: npd.Row, pivot: npd.Pivot}
		}
	} else {
		n.stats.Rows += nj
		err = n.fac.Factorize(n.diag, n.off)
	}
	if err != nil {
		n.valid = false // the factor is partly overwritten
	}
	return err
}

func (f nearFactor) Solve(dst, b []float64) { f.n.fac.Solve(dst, b) }
