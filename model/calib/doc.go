// Package calib fits the operator's network model to stored readings:
// the roughness of each pipe group and the demand pattern of each zone,
// by non-linear weighted least squares, and says how good the fit is.
//
// # Use
//
//	res, err := calib.Fit(ctx, calib.Problem{Network: net, Sensors: sensors,
//		Snapshots: snaps, Zones: zoneClocks}, calib.Settings{})
//	res.WriteText(os.Stdout)           // or res.WriteJSON(w)
//	network.WriteFile("town-calibrated.geojson", res.Network)
//
// FitSeq takes the snapshots as an iter.Seq2 stream (a store query, a
// readings file) and keeps one per Settings.Interval as they arrive.
// Snapshots are telemetry.Snapshot values with one aggregate per sensor
// in the order of Problem.Sensors; a snapshot is modelled at its Step
// time, as the detector does.
//
// # Parameters and units
//
// Roughness: one parameter per pipe group (Link.Group, else material and
// installation decade, see GroupOf): the common log-multiplier θ of the
// recorded roughness of its pipes, C = C₀·e^θ (Hazen-Williams) or
// ε = ε₀·e^θ (Darcy-Weisbach, mm). It is reported as the group's
// length-weighted geometric mean C (or ε, mm) and bounded so that this
// mean stays within Settings.CMin..CMax (default 40..160) or
// EpsMin..EpsMax (0.0015..10 mm). Pipes of zero roughness are not
// scaled.
//
// Demand: one multiplier per zone and hour knot, 24 for weekdays and 24
// for weekends (Settings.NoWeekend: 24 for every day), in the zone's
// local time (Problem.Zones; UTC when missing). A junction's demand is
// base × recorded pattern (model/demand) × the zone multiplier,
// interpolated linearly between the hour knots as patterns are. Bounds
// 0.2..3 (Settings.MultMin, MultMax). Junctions without a zone keep
// their recorded demand.
//
// A zone with a water balance (Problem.Balances: the service
// configuration's inlet and outlet meters) is modelled as the detector
// models it: at each snapshot its junctions' demand is scaled so that the
// zone uses what its meters measure (inflow less outflow, 0..5 times the
// patterns' demand; a snapshot with one of its meters unreadable is left
// out), its meters other than pumps' leave the observations (their flow
// is the zone's consumption now), and its hourly multipliers are not
// fitted but measured: each knot is the mean of the matched scale over
// the fit days, with a standard error from the day-to-day spread
// (pooled over the day type's hours, at least Settings.DayVariation)
// over √days; a knot needs two days to count as identified, and a weekend
// knot that is not takes the weekday knot's value (the records draw no
// line between them; a step at midnight would be a step in the expected
// consumption that no water makes). Roughness is then fitted to the pressures the
// inflow-matched model gives, and the zone's multipliers cannot take up
// what the model gets wrong elsewhere (a pump it pumps too much with,
// a valve it does not know is shut).
//
// Boundary conditions come from the readings, as in the detector: a
// tank's level (or head) sensor sets its head, a reservoir's head sensor
// its head, and a pump whose flow meter reads under a tenth of its
// window maximum (or within 3σ of zero) is stopped.
//
// # Method
//
// The objective is Σ wᵢ rᵢ² + Σ ((θⱼ − θ⁰ⱼ)/τ)², r = measured − modelled
// in canonical units (m, L/s), wᵢ = 1/σ² from the sensor's accuracy
// (telemetry.Sensor.Accuracy, one standard deviation in the sensor's
// unit, converted by model/units; defaults when absent: 0.2 m pressure,
// 1 % of the mean reading for flow). The weak prior τ = 1 keeps the
// normal equations regular. It is minimised by Levenberg-Marquardt
// (Levenberg 1944, "A method for the solution of certain non-linear
// problems in least squares", Q. Appl. Math. 2:164-168; Marquardt 1963,
// "An algorithm for least-squares estimation of nonlinear parameters",
// J. SIAM 11:431-441) on gonum/mat, with Marquardt's diagonal scaling
// and steps projected onto the bounds. The Jacobian is assembled from
// hydraulic.Sensitivities, one adjoint call per snapshot with all its
// sensors as observations: for a group, Σ over its pipes of
// ∂obs/∂ln φ · ∂ln h/∂θ (−1.852 × friction share for Hazen-Williams;
// d ln f/d ln ε of the friction factor for Darcy-Weisbach); for a knot,
// Σ over the zone's junctions of ∂obs/∂q · base · pattern × the knot's
// interpolation weight. Snapshots are solved by Settings.Workers
// goroutines (default 2), each with its own solver; all are joined
// before an evaluation returns. Network calibration in this form goes
// back to Walski (1983, "Technique for calibrating network models",
// J. Water Resour. Plann. Manage. 109(4)); see Savic, Kapelan and
// Jonkergouw (2009, "Quo vadis water distribution model calibration?",
// Urban Water J. 6(1)) for a review (both from memory).
//
// Weights: the first fit weighs each reading by its sensor's accuracy.
// Model error is larger than instrument noise for some sensors (a zone's
// inlet meter sees consumption swing from junction to junction and day to
// day, which hourly multipliers cannot follow), so after it converges
// each sensor's weight is divided by its noise factor s² (below) and the
// fit goes on, at most twice: iteratively reweighted, or feasible
// generalised, least squares (e.g. Carroll & Ruppert 1988,
// "Transformation and Weighting in Regression", from memory). The
// misfits reported stay on the accuracy weights. Settings.NoReweight
// keeps the first weights.
//
// Pipes the readings see one by one: a group's roughness is a mean over
// many pipes, but a precise sensor may read the loss of one pipe alone
// (a pump's outlet logger, its rising main), and that pipe's own
// departure from its group (an internal diameter off its record, a
// rougher length) would pull the whole group, and other groups with it
// to compensate. After the groups and patterns are fitted (and the
// closed-valve check has run on that fit), every grouped pipe whose
// information from the readings, Σ w (∂obs/∂ln C)² at the recorded
// state, exceeds 1/Settings.PipeSpread² (default spread 0.15 in ln C)
// gets its own log-multiplier about its group's, with a normal prior of
// that spread and bounds of three spreads (at most 80 pipes, the best
// seen), and everything is fitted again: the hierarchical model of
// pipes within groups, in the random-effects form of Henderson's
// mixed-model equations (Henderson 1950, from memory). The pipes' own
// factors are written into the calibrated network and listed in
// Result.PipeEffects; one on its bound hints at something else, such as
// a valve partly shut.
//
// Snapshots: one per Settings.Interval (default 1 h). The last
// Settings.HoldOut (default 20 %, at least one) of whole days are held
// out for validation. Beyond Settings.MaxSnapshots (168) the fit keeps,
// per hour bin, snapshots spread from the lowest to the highest demand
// level seen in that bin.
//
// # Uncertainty and identifiability
//
// Standard errors come from the sandwich (JᵀWJ+P)⁻¹ (Σ wᵢ sₖ² JᵢᵀJᵢ +
// P_δ) (JᵀWJ+P)⁻¹, where sₖ² ≥ 1 is sensor k's noise factor: its
// weighted residual variance after the fit with the fit's leverage
// removed; P_δ is the prior precision of the pipes' own factors, whose
// spread is a source of variation, not a mere penalty.
// Readings of one day share its weather, so the demand multipliers carry
// the mean day factor of the fit days: the day-to-day spread of each
// zone's consumption is estimated (and at least Settings.DayVariation,
// 3 %, is assumed) and added to their covariance. Roughness values are
// reported with the delta-method error C·se(θ).
//
// A parameter is unidentifiable when the data leave its standard error
// above Settings.MaxRoughnessSE (0.2 in ln C, about ±20 %) or
// MaxMultiplierSE (0.2): no sensor sees it (no water moves through the
// group, no readings on weekends), or it cannot be told apart from
// others (two groups in series on the only path). The check is made
// with the recorded network before the fit and again with the noise
// factors after it; an unidentifiable parameter stays at its recorded
// value, is named in the report, and is not written into the network.
//
// # Closed-valve check
//
// After the fit of groups and patterns, every open pipe and valve is screened by the
// linearised fit of a resistance increase to the remaining residuals
// (at the fitted and at the recorded state); the best candidates are
// solved with resistance factors 10 and 1000 and shut on a spread
// subset of Settings.SuspectSnapshots snapshots, and the best eight
// refitted with the link changed by one damped Gauss-Newton step of all
// free parameters (against a baseline refitted the same way), so that
// roughness bent to mimic the valve can move back. A link whose best factor is at least Settings.SuspectFactor (10)
// and lowers the misfit clearly (by at least 25 and 5 %) is listed as a
// suspected closed or throttled valve, with the sensors whose residuals
// fall and the most that roughness within its bounds could explain.
// Links in series between sensors cannot be told apart; each is listed.
//
// # Output
//
// Result.Network is a copy of the recorded network with fitted
// roughness and, per zone, patterns "<zone>-calibrated" (and
// "-weekend"), or "<zone>-<pattern>-calibrated" when the zone's
// junctions use several patterns, at the network's pattern step over one
// day; the zone's junctions point at them. Reaching MaxIterations is
// Status IterationLimit, not an error. Errors are for input that cannot
// be fitted at all; bad sensors and snapshots are left out and named in
// Result.Warnings.
package calib
