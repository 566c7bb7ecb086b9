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
	// Shut lists links that are closed in truth but open in the records
	// (a boundary valve left shut).
	Shut []string
	Seed uint64
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
	for _, id := range m.Shut {
		notes = append(notes, fmt.Sprintf("link %s shut in truth, open in the records", id))
	}
	if math.IsNaN(m.Demand + m.Diameter + m.Roughness) {
		return nil, nil, fmt.Errorf("mismatch: fractions must be numbers")
	}
	return out, notes, nil
}
