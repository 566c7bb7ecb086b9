package calib

import (
	"context"
	"math"
	"testing"

	"gonum.org/v1/gonum/mat"

	"plumbline/model/netgen"
	"plumbline/model/network"
)

// TestJacobianFiniteDifferences checks the adjoint Jacobian (roughness
// group log-multipliers and zone-hour demand multipliers) against
// central finite differences of full solves, the check of
// gonum/optimize/functions (derivatives against finite differences), on
// the demo town with its pump, tank and pressure-reducing valve, for
// both friction laws.
func TestJacobianFiniteDifferences(t *testing.T) {
	for _, law := range []network.HeadlossFormula{network.HazenWilliams, network.DarcyWeisbach} {
		t.Run(law.String(), func(t *testing.T) {
			var net *network.Network
			if law == network.HazenWilliams {
				net = demoTown(t)
			} else {
				var err error
				net, err = netgen.Town(netgen.Options{Junctions: 150, Zones: 2, Seed: 3, Headloss: network.DarcyWeisbach})
				if err != nil {
					t.Fatal(err)
				}
			}
			sensors := netgen.DemoSensors(net)
			snaps := simulate(t, net, sensors, monday, 1, 7, nil)
			// Quarter past the hour, so that two knots share each snapshot.
			for i := range snaps {
				snaps[i].Step = snaps[i].Step.Add(15 * 60e9)
			}
			var warns []string
			m, fit, _, _, _, _, err := setup(Problem{Network: net, Sensors: sensors, Snapshots: snaps},
				Settings{MaxSnapshots: 5, HoldOut: -1}.withDefaults(), func(s string) { warns = append(warns, s) })
			if err != nil {
				t.Fatal(err)
			}
			b := newBatch(fit, m.sens)
			theta := make([]float64, len(m.params))
			for i, p := range m.params {
				theta[i] = p.prior
				if p.kind == Roughness {
					theta[i] = 0.1 * float64(i%3-1)
				} else {
					theta[i] = 1 + 0.05*float64(i%5-2)
				}
			}
			ctx := context.Background()
			st, err := m.evaluate(ctx, b, theta, nil, noTrial)
			if err != nil {
				t.Fatal(err)
			}
			J := mat.NewDense(b.rows, len(m.params), nil)
			if err := m.jacobian(ctx, b, st, J, nil, nil); err != nil {
				t.Fatal(err)
			}
			checked := 0
			for p := range m.params {
				col := mat.Col(nil, p, J)
				big := 0.0
				for _, v := range col {
					big = math.Max(big, math.Abs(v))
				}
				if big == 0 {
					continue
				}
				h := 1e-3
				up := append([]float64(nil), theta...)
				dn := append([]float64(nil), theta...)
				up[p] += h
				dn[p] -= h
				su, err := m.evaluate(ctx, b, up, st, noTrial)
				if err != nil {
					t.Fatal(err)
				}
				sd, err := m.evaluate(ctx, b, dn, st, noTrial)
				if err != nil {
					t.Fatal(err)
				}
				for i := range col {
					// r = y − f, so ∂f/∂θ = −∂r/∂θ.
					fd := -(su.r[i] - sd.r[i]) / (2 * h)
					tol := 2e-3*big + 1e-5
					if !near(col[i], fd, tol) {
						t.Errorf("%s, row %d (sensor %s): adjoint %.6g, finite difference %.6g, difference %.3g > tolerance %.3g",
							m.params[p].name, i, m.sens[b.sen[i]].s.ID, col[i], fd, col[i]-fd, tol)
					}
				}
				checked++
			}
			t.Logf("%d parameters checked, %d rows", checked, b.rows)
			if checked < 5 {
				t.Fatalf("only %d parameters had a sensitivity; want at least 5", checked)
			}
		})
	}
}
