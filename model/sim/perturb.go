package sim

import (
	"fmt"
	"math"
	"math/rand/v2"

	"plumbline/model/network"
)

// Mismatch describes how a "true" network differs from the operator's
// records, for testing a detector against model error. Fractions are
// maximum relative deviations, drawn uniformly per element.
type Mismatch struct {
	// Demand: base demand of each junction off by up to ±Demand.
	Demand float64
	// Diameter: internal diameter of each pipe off by up to ±Diameter
	// (tuberculation, lining, wrong records).
	Diameter float64
	// Roughness: pipes rougher than recorded by up to Roughness: a
	// Hazen-Williams C lowered by that fraction, a Darcy-Weisbach
	// roughness raised by up to ten times that fraction's effect on C.
	// Older pipes draw from the upper part of the range.
	Roughness float64
	// Aged lists pipe groups far rougher in truth than recorded (old
	// unlined cast iron whose records still carry the roughness of its
	// installation), applied after the random deviations above.
	Aged []Aging
	// Shut lists links that are closed in truth but open in the records
	// (a boundary valve left shut).
	Shut []string
	Seed uint64
}

// Aging is one group of pipes that has aged beyond its records.
type Aging struct {
	// Name names the pipes in the notes and errors (a calibration group,
	// "cast-iron-1930s").
	Name string
	// Match picks the pipes, as the records describe them (e.g. those
	// whose calibration group, calib.GroupOf, is Name: a mismatch the
	// calibration can in principle find).
	Match func(recorded *network.Link) bool
	// Factor multiplies each pipe's Hazen-Williams C (0 < Factor ≤ 1
	// makes it rougher). A Darcy-Weisbach pipe gets the absolute
	// roughness whose fully rough friction factor rises by the same
	// factor as the Hazen-Williams head loss, Factor^-1.852 (agedEps).
	Factor float64
}

// Perturb returns a copy of net changed as m says, and a line per kind of
// change for the scenario's record.
func Perturb(net *network.Network, m Mismatch) (*network.Network, []string, error) {
	out := net.Clone()
	rng := rand.New(rand.NewPCG(m.Seed, m.Seed^0x51ed270b2701c3a5))
	uni := func(a float64) float64 { return a * (2*rng.Float64() - 1) }
	oldest, newest := 0, 0
	for _, l := range out.Links {
		if l.Installed > 0 {
			if oldest == 0 || l.Installed < oldest {
				oldest = l.Installed
			}
			if l.Installed > newest {
				newest = l.Installed
			}
		}
	}
	for i := range out.Nodes {
		if out.Nodes[i].Kind == network.Junction {
			out.Nodes[i].Demand *= 1 + uni(m.Demand)
		}
	}
	for i := range out.Links {
		l := &out.Links[i]
		if l.Kind != network.Pipe {
			continue
		}
		l.Diameter *= 1 + uni(m.Diameter)
		age := 0.5
		if l.Installed > 0 && newest > oldest {
			age = float64(newest-l.Installed) / float64(newest-oldest)
		}
		// Roughening share in [0,1]: older pipes lie higher in the range.
		share := 0.5*age + 0.5*rng.Float64()
		if out.Headloss == network.HazenWilliams {
			l.Roughness *= 1 - m.Roughness*share
		} else {
			// Darcy-Weisbach: a C drop of x% corresponds roughly to a
			// several-fold rise in absolute roughness for mains (from
			// memory: aged cast iron 0.25 mm new to 1-3 mm after decades).
			l.Roughness *= 1 + 10*m.Roughness*share
		}
	}
	for _, a := range m.Aged {
		if !(a.Factor > 0 && a.Factor <= 1) || a.Match == nil {
			return nil, nil, fmt.Errorf("mismatch: aged pipes %q: factor %v and a Match function wanted, 0 < factor ≤ 1", a.Name, a.Factor)
		}
		n := 0
		for i := range out.Links {
			l := &out.Links[i]
			if l.Kind != network.Pipe || !a.Match(&net.Links[i]) || l.Roughness <= 0 {
				continue
			}
			n++
			if out.Headloss == network.HazenWilliams {
				l.Roughness *= a.Factor
			} else {
				l.Roughness = agedEps(l.Roughness, l.Diameter, a.Factor)
			}
		}
		if n == 0 {
			return nil, nil, fmt.Errorf("mismatch: aged pipes %q: no pipe with a roughness among them", a.Name)
		}
	}
	for _, id := range m.Shut {
		li, ok := out.LinkIndex(id)
		if !ok {
			return nil, nil, fmt.Errorf("mismatch: no link %q to shut", id)
		}
		out.Links[li].Status = network.Closed
	}
	notes := []string{
		fmt.Sprintf("junction base demands off by up to ±%.0f%%", 100*m.Demand),
		fmt.Sprintf("pipe diameters off by up to ±%.0f%%", 100*m.Diameter),
		fmt.Sprintf("pipes rougher than recorded by up to %.0f%% of C (older pipes more)", 100*m.Roughness),
	}
	for _, a := range m.Aged {
		notes = append(notes, fmt.Sprintf("pipes %s aged: C × %.2f", a.Name, a.Factor))
	}
	for _, id := range m.Shut {
		notes = append(notes, fmt.Sprintf("link %s shut in truth, open in the records", id))
	}
	if math.IsNaN(m.Demand + m.Diameter + m.Roughness) {
		return nil, nil, fmt.Errorf("mismatch: fractions must be numbers")
	}
	return out, notes, nil
}

// agedEps returns the absolute roughness (mm) of a Darcy-Weisbach pipe of
// diameter d (mm) and roughness eps (mm) aged by a Hazen-Williams factor:
// the one whose friction factor in fully rough flow is factor^-1.852
// times that of eps. Fully rough flow follows the rough-pipe limit of
// Colebrook (1939), 1/√f = −2 log10(ε/(3.7 D)) (von Kármán-Prandtl), so
// ε' = 3.7 D · 10^(−1/(2√f')).
func agedEps(eps, d, factor float64) float64 {
	f := math.Pow(-2*math.Log10(eps/(3.7*d)), -2)
	f2 := f * math.Pow(factor, -1.852)
	return 3.7 * d * math.Pow(10, -1/(2*math.Sqrt(f2)))
}
