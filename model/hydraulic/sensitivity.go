package hydraulic

import (
	"errors"
	"fmt"

	"gonum.org/v1/gonum/mat"
)

// Observation is a modelled quantity whose sensitivities are wanted: the
// head (equivalently the pressure) at node Node when Node ≥ 0, or the
// flow in link Link when Link ≥ 0. Set the other to −1.
type Observation struct {
	Node int
	Link int
}

// NodeObservation returns the observation of the head at node i.
func NodeObservation(i int) Observation { return Observation{Node: i, Link: -1} }

// LinkObservation returns the observation of the flow in link k.
func LinkObservation(k int) Observation { return Observation{Node: -1, Link: k} }

// Sensitivity holds the derivatives of each observation at a solution.
type Sensitivity struct {
	// Obs are the observations, in the order asked.
	Obs []Observation
	// Outflow[k][i] is d obs_k / d q_i, the response to an extra outflow
	// q_i (L/s) at junction i (m per L/s for heads, L/s per L/s for
	// flows); 0 for fixed-head nodes.
	Outflow [][]float64
	// Resistance[k][l] is d obs_k / d ln φ_l, the response to the
	// logarithm of link l's resistance factor φ_l (m or L/s per unit of
	// ln φ; a 1% blockage-driven resistance rise changes obs_k by about
	// 0.01·Resistance[k][l]).
	Resistance [][]float64
}

// Sensitivities returns the derivatives of the observations at the
// solution sol (which must come from Solve of a Solver of the same
// network, not necessarily this one) with respect
// to extra junction outflows and link resistance factors, with all
// link states held as in sol. It factors the Jacobian of sol once and
// then costs one sparse solve per observation (the adjoint method), plus
// one per active pressure valve. It uses the Solver's workspace: do not
// call it concurrently with Solve.
func (s *Solver) Sensitivities(sol *Solution, obs []Observation) (*Sensitivity, error) {
	return s.SensitivitiesInto(sol, obs, nil)
}

// SensitivitiesInto is Sensitivities writing into the memory of dst (nil:
// a fresh Sensitivity, as Sensitivities returns): its rows are reused
// where they have this network's sizes, so that repeated calls (a
// localisation every hour) do not allocate a row of node and link
// derivatives per observation each time (5 MB for 60 observations on
// 5,000 junctions). The numbers are those of Sensitivities bit for bit.
// The returned Sensitivity is dst when dst is not nil.
func (s *Solver) SensitivitiesInto(sol *Solution, obs []Observation, dst *Sensitivity) (*Sensitivity, error) {
	if sol == nil || sol.solver == nil || sol.solver.net != s.net {
		return nil, errors.New("hydraulic: sensitivities: solution is not from a solver of this network")
	}
	nn, nl := len(s.net.Nodes), len(s.net.Links)
	for i, o := range obs {
		switch {
		case o.Node >= 0 && o.Link < 0:
			if o.Node >= nn {
				return nil, fmt.Errorf("hydraulic: sensitivities: observation %d: node %d out of range", i, o.Node)
			}
		case o.Link >= 0 && o.Node < 0:
			if o.Link >= nl {
				return nil, fmt.Errorf("hydraulic: sensitivities: observation %d: link %d out of range", i, o.Link)
			}
		default:
			return nil, fmt.Errorf("hydraulic: sensitivities: observation %d must set exactly one of Node and Link (the other −1)", i)
		}
	}
	// Jacobian at the solution, every leak in head form: there the
	// flow form's elimination gives the same derivative dq/dp.
	s.leaks = s.leaks[:0]
	s.coefficients(sol)
	s.residuals(sol, true)
	s.assemble(sol)
	if err := s.factorize(); err != nil {
		return nil, err
	}
	nj := s.nj
	jx := func(n int) int { return s.jx[n] }

	// Active pressure valves: bordered system, Woodbury correction.
	var valves []int
	for k := range s.lm {
		if s.ctrl[k] >= 0 {
			valves = append(valves, k)
		}
	}
	r := len(valves)
	other := func(k int) int {
		m := &s.lm[k]
		if s.ctrl[k] == m.from {
			return m.to
		}
		return m.from
	}
	Y := make([][]float64, r)
	Dd := make([]float64, r)
	wv := make([]float64, nj)
	for a, k := range valves {
		c := s.ctrl[k]
		for i := range wv {
			wv[i] = 0
		}
		s.rowM0(c, k, wv)
		Y[a] = make([]float64, nj)
		s.fac.Solve(Y[a], wv)
		Dd[a] = -s.incidence(k, c)
	}
	var Tinv *mat.Dense
	if r > 0 {
		T := mat.NewDense(r, r, nil)
		for a, k := range valves {
			T.Set(a, a, Dd[a])
			if jo := jx(other(k)); jo >= 0 {
				aok := s.incidence(k, other(k))
				for b := range valves {
					T.Set(a, b, T.At(a, b)+aok*Y[b][jo])
				}
			}
		}
		Tinv = mat.NewDense(r, r, nil)
		if err := Tinv.Inverse(T); err != nil {
			return nil, fmt.Errorf("hydraulic: sensitivities: active pressure valves give a singular system: %w", err)
		}
	}
	valveIdx := make(map[int]int, r)
	for a, k := range valves {
		valveIdx[k] = a
	}

	out := dst
	if out == nil {
		out = &Sensitivity{}
	}
	out.Obs = append(out.Obs[:0], obs...)
	for len(out.Outflow) < len(obs) {
		out.Outflow = append(out.Outflow, nil)
	}
	for len(out.Resistance) < len(obs) {
		out.Resistance = append(out.Resistance, nil)
	}
	out.Outflow, out.Resistance = out.Outflow[:len(obs)], out.Resistance[:len(obs)]
	cv := make([]float64, nj)
	z := make([]float64, nj)
	d := make([]float64, r)
	u := make([]float64, r)
	w := make([]float64, nn)
	for oi, o := range obs {
		outflow, res := out.Outflow[oi], out.Resistance[oi]
		if len(outflow) == nn {
			clear(outflow)
		} else {
			outflow = make([]float64, nn)
		}
		if len(res) == nl {
			clear(res)
		} else {
			res = make([]float64, nl)
		}
		out.Outflow[oi], out.Resistance[oi] = outflow, res
		for i := range cv {
			cv[i] = 0
		}
		for a := range d {
			d[a] = 0
		}
		directLink, directVal := -1, 0.0
		if o.Node >= 0 {
			j := jx(o.Node)
			if j < 0 {
				continue // fixed head: no sensitivity
			}
			cv[j] = 1
		} else if a, ok := valveIdx[o.Link]; ok {
			d[a] = 1
		} else {
			m := &s.lm[o.Link]
			p := s.p[o.Link]
			if m.jf >= 0 {
				cv[m.jf] += p
			}
			if m.jt >= 0 {
				cv[m.jt] -= p
			}
			directLink, directVal = o.Link, -p*s.s[o.Link]
		}
		// c' = c − W D⁻¹ d
		for a, k := range valves {
			if d[a] != 0 {
				for i := range wv {
					wv[i] = 0
				}
				s.rowM0(s.ctrl[k], k, wv)
				for i := range cv {
					cv[i] -= wv[i] * d[a] / Dd[a]
				}
			}
		}
		s.fac.Solve(z, cv)
		if r > 0 {
			for a, k := range valves {
				u[a] = 0
				if jo := jx(other(k)); jo >= 0 {
					u[a] = -s.incidence(k, other(k)) * z[jo]
				}
			}
			for b := range valves {
				vb := 0.0
				for a := range valves {
					vb += Tinv.At(b, a) * u[a]
				}
				for i := range z {
					z[i] += Y[b][i] * vb
				}
			}
		}
		for i := range w {
			w[i] = 0
			if j := jx(i); j >= 0 {
				w[i] = z[j]
			}
		}
		for a, k := range valves {
			c := s.ctrl[k]
			zeta := d[a]
			if jo := jx(other(k)); jo >= 0 {
				zeta += s.incidence(k, other(k)) * z[jo]
			}
			w[c] = zeta / Dd[a]
		}
		for i := range outflow {
			if jx(i) >= 0 {
				outflow[i] = -w[i]
			}
		}
		for l := range res {
			m := &s.lm[l]
			res[l] = s.p[l] * s.s[l] * (w[m.from] - w[m.to])
		}
		if directLink >= 0 {
			res[directLink] += directVal
		}
	}
	return out, nil
}

// rowM0 adds row c of the Jacobian without the valve penalty (and
// without link skip, whose conductance is zero) into dst.
func (s *Solver) rowM0(c, skip int, dst []float64) {
	jc := s.jx[c]
	dst[jc] += s.leakD[c]
	for _, l := range s.incLink[s.incPtr[c]:s.incPtr[c+1]] {
		if l == skip {
			continue
		}
		m := &s.lm[l]
		p := s.p[l]
		dst[jc] += p
		o := m.to
		if o == c {
			o = m.from
		}
		if jo := s.jx[o]; jo >= 0 {
			dst[jo] -= p
		}
	}
}
