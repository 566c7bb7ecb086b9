// Package score measures how well findings detect the events a simulation
// injected: the measuring stick of plumbline. Score matches ground-truth
// events (truth.json, []finding.Event) with findings (findings.json,
// []finding.Finding) and reports, per shared/CONTRACT.md, detected and
// missed counts, false findings per zone per 30 days, time to detect
// (median, max) and localisation (rank of the true element among the
// candidates, distance along pipes from the best candidate to it).
//
// # Rules
//
// The matching rules are stated on Score: same kind, raised at or after
// the event's start, same zone when both are known, one finding per event
// and one event per finding, ties to the event that started nearest before
// the finding and then to the best-ranked true element. Everything else is
// a false finding, with a reason.
//
// # Figures and units
//
//   - Times to detect in seconds (and as Go durations in the JSON).
//   - Distances in metres along pipes (Paths): shortest path over link
//     lengths, network undirected, a link located at its midpoint.
//   - A leak or blockage is localised when its best candidate is within
//     300 m along pipes (Options.LocaliseWithin), the rule of the
//     BattLeDIM 2020 competition (Vrachimis et al. 2020). Sensor faults
//     are judged by rank only: their candidates are sensor ids.
//   - Leaks are banded by true size: below 2 L/s and at or above 2 L/s.
//   - False findings per zone per 30 days = false count / (zones × observed
//     days / 30). Give the scenario span as Options.Start/End; otherwise it
//     runs from the earliest to the latest event start or finding raised
//     time, which understates the period.
//
// JSON field names are snake_case; a figure that cannot be measured (no
// detected event, no network) is null, never a made-up zero.
//
// # Memory and errors
//
// Score does not keep or modify its arguments; the Report owns its slices.
// Score has no error result: inputs are taken as valid (the command checks
// the files and names the bad element); an unknown element id simply has
// no distance.
package score
