// Package detect decides, step by step, whether a zone is losing water, a
// pipe has become constricted, or a sensor is lying; how big, since when,
// and where to look.
//
// # What one step does
//
// Step takes one snapshot of aligned readings (model/telemetry, values in
// canonical units: m of water, L/s, m) and:
//
//  1. sets the boundary conditions from telemetry: tank levels, source
//     heads, pumps stopped when their own meter reads nothing;
//  2. computes each zone's expected consumption from the demand patterns
//     (model/demand), with an expected-consumption solve when the model
//     carries leakage of its own (FAVAD leak coefficients), and the zone's
//     measured net inflow from its boundary meters, oriented by topology;
//     the imbalance is inflow minus expected;
//  3. runs the inflow-matched solve: each zone's demand scaled so that the
//     modelled inflow equals the measured one; the residual of each logger
//     (measured minus modelled) then shows where the extra water goes or
//     where resistance grew;
//  4. at each full hour, feeds hourly means to the tests.
//
// # Tests and their thresholds
//
// Three kinds of one-sided CUSUM test (Page 1954) run per zone: the night
// test on each night's mean imbalance against the previous quiet nights
// (a step of 1σ; the main leak evidence, where demand noise is smallest),
// the burst test on hourly jumps of the imbalance above its recent level
// (a step of 5σ), and a two-sided residual test per logger (a step of 2σ).
// Their reference k and threshold h come from the wanted time between
// false alarms (Config.FalseAlarmDays) through Siegmund's approximation of
// the average run length (DesignCUSUM). That design assumes independent
// observations; hourly demand noise is not (a busy morning is busy for
// hours), so the burst and residual tests are fed the innovations of a
// first-order autoregression learnt from quiet hours (Serial; Alwan &
// Roberts 1988) instead of the raw hourly values. Normal levels and scatter are
// learnt per hour of day (Baseline) over the first LearnNights days, then
// followed slowly; nights are judged against the mean and scatter of up to
// 28 past quiet nights, widened for their small number (Student 1908).
//
// # Hypotheses
//
// When a test alarms, the evidence since the change point (the hourly
// residual changes and the zone imbalance change) is explained by the
// best of: a leak at each junction of the zone (its residual signature
// from the adjoint sensitivities of model/hydraulic, corrected for the
// inflow-matched rescaling), a resistance increase on each pipe or valve
// of the zone, a fault of the alarming logger alone, or, for the balance,
// an inflow meter reading high. The linear signatures rank all candidates;
// the best few are re-scored with full non-linear solves (and a blockage's
// open fraction fitted). An explanation must also matter in practice: a
// blockage must move the loggers, taken together, by more than their
// accuracy (the root-sum-square of the changes over it), a leak must
// show in the balance, a sensor fault must exceed the sensor's accuracy.
// A zone flow meter error is weighed in both paths: its residual picture
// is the inflow-matched model spreading water that is not there (or
// missing water that is), the same shift of every logger by the zone's
// mean response, with the balance moved by the same amount. Two leaks at
// once are raised as two findings when two places explain the change
// clearly better than one (by more than 2 + 2·ln N of misfit, N the
// zone's junctions).
//
// Sensor faults are also raised directly from ingest's quality flags
// (stuck, spikes, out of range), and faulty sensors are left out of the
// evidence until they read normally again; zone flow meters blamed by a
// meter-fault finding only once the balance they would give agrees with
// the zone's normal again. When most of a zone's loggers
// read out of range together, that is not a fault of each: the zone lost
// pressure, and one finding says so (a blockage on its supply, or a burst
// when the balance shows the water going).
//
// A raised leak or blockage keeps gathering evidence for a day and its
// candidates are revised (StepResult.Updated), a leak's size with them
// (measured from whole hours of the leak); the change is then taken
// into the baselines so that later tests look for what is new. A leak is
// resolved when the night flow falls back (Active lists the findings whose
// evidence holds).
//
// # State and concurrency
//
// A Detector is a sequential state machine: one goroutine calls Step with
// snapshots in time order. State and Restore save and resume everything
// that Step changes (gob), so a restarted service or replay gives the same
// findings as an uninterrupted one. Findings returns copies.
//
// # Errors
//
// New reports every configuration problem at once (sensors or zones that
// do not fit the network). Step fails only when a solve fails (the error
// names the step and the solve); bad or missing readings are not errors,
// they are left out of the evidence.
package detect
