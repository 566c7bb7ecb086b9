// Package hydraulic computes the steady state of a water network: the
// head at every junction and the flow in every link, for given demands,
// source heads, leaks, link statuses, pump speeds and valve settings.
//
// # Method
//
// The unknowns are the junction heads H and the link flows Q. Continuity
// holds at every junction (inflow = outflow + demand + leak) and energy
// along every link (head difference = head loss of the link's law). The
// Solver applies Newton's method to the joint system in the form of the
// global gradient method of Todini & Pilati (1988): with
// p_k = 1/(dh_k/dQ_k) each step solves the Schur complement
//
//	(A P Aᵀ + diag(dleak/dH)) ΔH = continuity residual − A·y
//
// a sparse symmetric positive definite system in the junction heads alone,
// then updates each flow by ΔQ_k = p_k (ΔH_from − ΔH_to) − y_k. The matrix
// pattern (junction-junction adjacency through links) is fixed by the
// topology, so NewSolver orders it and factors it symbolically once; each
// iteration only refactors numerically. Closed and shut links stay in the
// pattern with a conductance of 1e-9 L/s per m of head, so the pattern
// never changes with status.
//
// # Laws
//
//   - Hazen-Williams, SI form h = 10.67 L Q^1.852 / (C^1.852 D^4.8704).
//   - Darcy-Weisbach h = f (L/D) v²/2g, f by Colebrook-White (1939)
//     solved to machine precision for Re ≥ 4000, 64/Re for Re ≤ 2000 and a
//     cubic Hermite blend in Re between (see FrictionFactor).
//   - Minor losses K v²/2g on pipes and valves.
//   - Every open link carries in addition a linear resistance of 1e-6 m
//     per L/s, so that dh/dQ never vanishes at zero flow (the low-flow
//     linearisation); it changes heads by 1e-4 m per 100 L/s.
//   - Pumps: H = A − B Q^C fitted to the curve (see FitPumpCurve), at
//     relative speed s by the affinity laws H = s²A − B s^(2−C) Q^C; below
//     1% of the zero-head flow the curve is continued by its tangent.
//     A pump whose flow would reverse is shut (CheckShut) and reopens when
//     the head across it falls below its shutoff head. A network Speed of
//     0 (the zero value) means nominal speed; Conditions.PumpSpeed 0 stops
//     the pump (Closed).
//   - Leaks: FAVAD (May 1994) q = C p^N for p > 0 and q = 0 for p ≤ 0
//     (see LeakFlow); the network's and the Conditions' leaks add.
//   - Valves: isolating (open or closed, minor loss when open), throttle
//     (loss coefficient = setting), flow-control (Active holds the flow at
//     the setting; Open when the head across it reverses),
//     pressure-reducing (Active holds the outlet head at the outlet
//     elevation plus the setting; Open when the inlet head is below that;
//     CheckShut against reverse flow, or when another valve holds the
//     outlet above its setting) and pressure-sustaining (the same for the
//     inlet). An active pressure valve pins the controlled node's head
//     with a penalty of 1e12 on the diagonal; its flow comes from
//     continuity at that node, and a prediction of it enters the other
//     end's equation so the step stays close to Newton's.
//
// # Numerics
//
// A cold start puts 0.03 m/s in every pipe and valve, pumps at half their
// zero-head flow and junction heads at the highest source head; a warm
// start takes heads, flows and states from the given solution. If
// rounding makes a pivot non-positive (conductances span 1e-9 to 1e6),
// the factorisation is retried once with 1e-8 added to the diagonal,
// which alters the Newton step only, never the residuals that decide
// convergence.
//
// SolveNear is for runs of solves near one another (a localisation's trial
// blockages and leaks): a link whose slope dh/dQ moved less than 5% since
// it was factored keeps the factored slope, in the matrix and in its flow
// update alike, so that continuity still holds after each step and the
// factor is brought up to date only in the rows that changed
// (sparse.Factor.Refactorize). The iteration is then Newton's with an
// approximate derivative, converging to the same solution within the same
// tolerances in as many steps on the generated towns (near.go).
//
// # Pressures near and below zero
//
// Demands are taken as given (a demand-driven model): where the supply
// cannot carry them, as behind a choked main, the solution shows the
// negative pressures this implies rather than reducing the demands; read
// them as "this demand cannot be served", not as a physical state.
// A leak lets out nothing at p ≤ 0 (the orifice is not below a head of
// water; the model lets nothing in either), and C p^N exactly above.
//
// For N < 1 the law's slope C N p^(N−1) grows without bound as p falls
// to 0, and its tangent at p crosses zero at p(1 − 1/N) < 0: a Newton
// step in the head overshoots into p < 0, where the leak is off, and the
// next step returns to the pressure without the leak, a cycle that never
// converges. Such leaks are therefore solved in flow form, as links from
// their node to the open air: the outflow q is an unknown beside the
// heads, with the law p = (q/C)^(1/N), convex in q, so that from above
// its Newton steps do not overshoot the solution. Its slope dp/dq is
// kept at least 1e-6 m per L/s (the links' low-flow resistance) as q
// falls to 0; this alters the step, not the law that convergence is
// tested on. A step that would make q negative leaves the leak dry
// (q = 0); a dry leak restarts at C p^N once its node's pressure is
// positive again, one step later, after the heads have settled without
// it, so it approaches the solution from above. Leaks with N ≥ 1 (convex
// in p, and N = 0, a constant outflow whenever p > 0) stay in head form.
// The continuity residual that decides convergence counts every leak at
// its law's outflow at the current head, and Solution.Leak is that
// outflow.
//
// # Status logic
//
// Statuses are re-examined after an iteration whose largest flow change
// is below Options.StatusFlowChange (and every tenth iteration while the
// flows do not settle), each test with a margin (the flow tolerance or
// Options.HeadHysteresis). A link that changes status more than
// Options.MaxStatusChanges times in one Solve is frozen; if its
// test still disagrees with its state at the end, Solve returns a
// *NotConvergedError naming it. A Solve converges when the largest flow
// change of the last iteration is at most Options.FlowTolerance, the
// largest junction continuity residual at most Options.ImbalanceTolerance,
// and no status changed. A junction whose pressure runs beyond ±10 km
// of water (fed only through links that cannot carry its demand) makes
// the solve fail with the junction named in NotConvergedError.Runaway.
//
// # Sensitivities
//
// At a converged solution Sensitivities returns, for each observation (a
// node head or a link flow), its derivative with respect to extra
// outflow at every junction and to the logarithm of every link's
// resistance factor, by the adjoint method: the Jacobian is factored once,
// then one solve per observation. Active pressure valves, whose flow is
// set by continuity at their controlled node, enter as a low-rank
// (Woodbury) correction so that the derivatives are exact for them too.
//
// # Units and ownership
//
// Flows in L/s, heads and pressures in m, lengths in m, diameters in mm in
// the network (m in the exported SI head-loss functions, whose flows are
// m³/s). A Solver owns its workspace and reuses it (no allocation inside
// the iteration loop); it is not safe for concurrent use. Every Solution
// of Solve is freshly allocated and belongs to the caller; SolveInto
// writes into a Solution the caller passes back (it may be the warm
// start itself), so that a solve a model step allocates nothing, with
// the same result bit for bit. The network is read once, by NewSolver
// (node and link data in its own tables): it must not change while the
// Solver is in use; whatever varies goes in Conditions. Bad input (a link
// without diameter, a pump curve that does not fall, a conditions slice of
// the wrong length) is an error naming the link, node or field; a
// junction cut off from every source is a *DisconnectedError naming it;
// the solver never returns NaN heads without an error.
package hydraulic
