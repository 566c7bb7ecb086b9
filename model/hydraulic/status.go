package hydraulic

import "plumbline/model/network"

// nextState returns the state link k should take given the current flows
// and heads. Every test has a margin (the flow tolerance or the head
// hysteresis) so that a link at the boundary keeps its state.
func (s *Solver) nextState(k int, sol *Solution) LinkState {
	st := sol.State[k]
	if st == Closed {
		return Closed
	}
	m := &s.lm[k]
	q := sol.Flow[k]
	hf, ht := sol.Head[m.from], sol.Head[m.to]
	qtol, htol := s.opt.FlowTolerance, s.opt.HeadHysteresis
	switch m.kind {
	case lkPump:
		switch st {
		case Open:
			if q < -qtol {
				return CheckShut
			}
		case CheckShut:
			if ht-hf < m.curve.Shutoff(sol.speed[k])-htol {
				return Open
			}
		}
		return st
	case lkPipe:
		if !m.cv {
			return Open
		}
		switch st {
		case Open:
			if q < -qtol {
				return CheckShut
			}
		case CheckShut:
			if hf-ht > htol {
				return Open
			}
		}
		return st
	}
	// valves
	switch m.valve {
	case network.PressureReducing:
		_, hset := s.controlled(k, sol)
		switch st {
		case Active:
			if q < -qtol {
				return CheckShut
			}
			if hf < hset-htol {
				return Open
			}
			if ht > hset+htol {
				// another valve holds the outlet higher: this one closes
				return CheckShut
			}
		case Open:
			if q < -qtol {
				return CheckShut
			}
			if ht > hset+htol {
				return Active
			}
		case CheckShut:
			if hf > ht+htol {
				if hf > hset+htol && ht < hset-htol {
					return Active
				}
				if hf < hset-htol {
					return Open
				}
			}
		}
		return st
	case network.PressureSustaining:
		_, hset := s.controlled(k, sol)
		switch st {
		case Active:
			if q < -qtol {
				return CheckShut
			}
			if ht > hset+htol || hf > hset+htol {
				// downstream above the setting, or another valve holds
				// the inlet higher: fully open
				return Open
			}
			if hf < hset-htol {
				// another valve holds the inlet lower: this one closes
				return CheckShut
			}
		case Open:
			if q < -qtol {
				return CheckShut
			}
			if hf < hset-htol {
				return Active
			}
		case CheckShut:
			if hf > ht+htol {
				if ht > hset+htol {
					return Open
				}
				if hf > hset+htol {
					return Active
				}
			}
		}
		return st
	case network.FlowControl:
		switch st {
		case Active:
			if hf-ht < -htol {
				return Open
			}
		case Open, CheckShut:
			if q > sol.setting[k]+qtol {
				return Active
			}
			if st == CheckShut {
				return Open
			}
		}
		return st
	}
	return Open // throttle and isolating valves have no automatic state
}

// updateStatus moves every link to its next state, counting changes and
// freezing links that change too often. It reports whether any changed.
func (s *Solver) updateStatus(sol *Solution, apply bool) bool {
	changed := false
	for k := range s.hot {
		if s.frozen[k] {
			continue
		}
		var next LinkState
		if st := sol.State[k]; s.hot[k].plain {
			// nextState of a pipe without check valve.
			next = Open
			if st == Closed {
				next = Closed
			}
		} else {
			next = s.nextState(k, sol)
		}
		if next == sol.State[k] {
			continue
		}
		changed = true
		if !apply {
			continue
		}
		s.changes[k]++
		if s.changes[k] > s.opt.MaxStatusChanges {
			s.frozen[k] = true
			continue
		}
		// A link shut by status keeps a tiny flow; a link reopened starts
		// from a small positive flow so the law's slope is not degenerate.
		switch next {
		case Open, Active:
			if sol.State[k] == CheckShut {
				sol.Flow[k] = max(sol.Flow[k], 1e-3)
			}
		}
		sol.State[k] = next
	}
	return changed
}

// wouldChange reports whether link k's status test disagrees with its
// state.
func (s *Solver) wouldChange(k int, sol *Solution) bool {
	return s.nextState(k, sol) != sol.State[k]
}
