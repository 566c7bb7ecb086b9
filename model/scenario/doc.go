// Package scenario reads and checks the scenario file that drives
// `plumbline simulate`: the time span and step of a synthetic run, the
// sensors to sample, the instrument and demand imperfections to add, and
// the events to inject (leaks, blockages, sensor faults), which become the
// ground truth (truth.json) that `plumbline score` judges findings against.
//
// # File format (YAML)
//
// The keys of shared/CONTRACT.md "Scenario file (simulate)":
//
//	start: 2026-03-01T00:00:00Z   # RFC 3339, required
//	duration: 336h                # Go duration (14 days), required, > 0
//	step: 5m                      # model step, Go duration; default 5m
//	seed: 7                       # random seed; default 0
//	sensors: sensors.yaml         # a list of sensors, or a path to one
//	noise: {pressure: 0.05}       # per quantity, std deviation, canonical units
//	events:
//	  - {kind: leak, at: J-12, start: 2026-03-03T02:00:00Z, size_lps: 1.5, ramp: 6h}
//	  - {kind: blockage, at: P-40, start: 2026-03-05T00:00:00Z, open_fraction: 0.3}
//	  - {kind: sensor-fault, at: P-104, start: 2026-03-07T00:00:00Z, mode: drift, amount: 0.5}
//
// (Go durations have no day unit: write 336h for 14 days.)
//
// `sensors` is either the same list as the service configuration's
// `sensors:` (id, quantity, at, topic, unit, accuracy, optional min, max,
// zone, decode) or a path, relative to the scenario file, of a YAML file
// holding that list; the file may also be a service configuration, whose
// `sensors:` key is then used and its other keys ignored. A `decode`
// block is accepted so the service list can be reused unchanged; the
// simulator publishes plain payloads and does not use it. Min and max are
// plausible bounds in canonical units; when only one is given the other is
// unbounded (±Inf). A sensor without a unit reads in its quantity's
// canonical unit; a unit must be one model/units knows for the quantity.
//
// Event times are RFC 3339, or a Go duration meaning an offset from the
// scenario start (`start: 36h`). Every event must start inside
// [start, start+duration).
//
// # Keys of our own (beyond the contract)
//
// Per event:
//
//   - end: when the event stops (leak repaired, blockage cleared, sensor
//     mended); absent means it lasts to the end of the run. Must lie after
//     start and not after the end of the run.
//   - ramp (leak, blockage): the event grows linearly from nothing to full
//     size over this duration (a leak's outflow from 0 to size_lps, a
//     blockage's open fraction from 1 to open_fraction). Default 0: a step.
//   - exponent (leak): the FAVAD leakage exponent N1 (May 1994) of the
//     leak's outflow q = C·p^N1. Default 1.0 for a leak, 0.5 for a burst.
//     Why: a burst is a fixed-area opening, for which the orifice law gives
//     0.5; background leaks and cracks in mixed-material networks open with
//     pressure and behave close to 1.0 on average, the value Lambert (2001,
//     "What do we know about pressure-leakage relationships", IWA Leakage
//     Management conference) recommends when nothing is known (from
//     memory). Must be in (0, 3].
//   - burst (leak): true for a burst: a sudden full-size opening; a burst
//     has no ramp and its exponent defaults to 0.5.
//   - every (sensor fault, mode spike): the time between spikes; default 1h.
//
// size_lps is the leak's outflow at full size at the pressure the node has
// in the leak-free run at the moment the leak reaches full size; the
// simulator derives C from it (LeakCoeff) and keeps C fixed, so the outflow
// then follows the pressure (larger at night).
//
// Sensor-fault modes and the meaning of amount (canonical units of the
// sensor's quantity, m or L/s):
//
//   - stuck: the reading freezes at the last true value before start;
//     amount is not used and must be absent or 0.
//   - drift: the reading gains amount per day (24h) since start.
//   - spike: one reading every `every` is off by ±amount (sign drawn from
//     the seed); amount must be non-zero.
//   - offset: every reading is off by amount; amount must be non-zero.
//
// Scenario-wide instrument settings:
//
//   - logging_interval: time between readings of every sensor; default the
//     step.
//   - resolution: per quantity, the quantisation step of readings, canonical
//     units; default 0 (none).
//   - missing_fraction: fraction of readings never delivered, in [0, 1).
//   - late_fraction: fraction delivered late, in [0, 1).
//   - max_delay: the largest delay of a late reading (uniform in (0,
//     max_delay]); default the step when late_fraction is set.
//
// Demand variability and model mismatch:
//
//   - demand_noise: relative standard deviation of each junction's demand
//     per step (0.05 = 5 %), independent draws; default 0, in [0, 1).
//   - daily_variation: relative standard deviation of one multiplier per
//     zone and day (day-to-day consumption change); default 0, in [0, 1).
//   - weekend_pattern: name of a pattern of the network file used on
//     Saturdays and Sundays (UTC) in place of each junction's own pattern;
//     empty means every day alike.
//   - true_network: path (relative to the scenario file) of a second
//     network file from which the readings are generated while the
//     detector keeps the main one: deliberate model mismatch.
//
// # Noise units
//
// `noise` and `resolution` are keyed by quantity word (pressure, flow,
// level, head) and given in canonical units (m, L/s), unlike a sensor's
// accuracy, which is in the sensor's unit. A noise entry replaces the
// accuracy of every sensor of its quantity.
//
// # Errors
//
// Load and LoadFile return the scenario with everything that parsed, and
// an error joining every problem found (errors.Join of *Error values),
// each naming the file and YAML line: `scenario.yaml:14: events[2] (leak
// at J-7): size_lps must be positive`. Indexes in brackets are 0-based.
// Unknown keys are errors (the YAML decoder's KnownFields). Validate adds
// the checks that need the network (node, link, tank and pattern names).
//
// # Memory
//
// A Scenario owns its slices and maps; nothing aliases the input bytes.
package scenario
