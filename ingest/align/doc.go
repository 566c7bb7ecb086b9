// Package align turns a stream of readings into one telemetry.Snapshot per
// model step: per sensor the mean, count, min and max of the readings in
// the step and a quality flag. The Aligner is pure and deterministic: it
// does no I/O, reads no clock, and for the same set of readings it emits
// bit-identical snapshots whether they arrive live (out of order, late,
// repeated) or sorted from the store — as long as no reading is later than
// the allowed lateness.
//
// # Steps and the watermark
//
// Steps are the half-open intervals [k·Step, (k+1)·Step) counted from the
// Unix epoch (so 5-minute steps start on the UTC clock's 5-minute marks).
// The watermark is the latest reading time seen (or a time given to
// Advance). A step is closed and emitted once the watermark reaches its
// end plus Lateness. A reading for a step already closed is late: it is
// counted (Stats.Late) and left out of the snapshots; the caller still
// stores it, so a replay from the store sees it. Snapshots come out in step
// order with no gaps, starting at Config.Start or, without one, at the step
// of the earliest reading received before the first close.
//
// A reading arriving when the watermark is W is on time if its time is at
// least W − Lateness; then it cannot be late, which is why any arrival order
// within the lateness gives the same snapshots.
//
// The watermark follows the readings' own times, so one sensor whose clock
// runs ahead moves it for all: keep Lateness at least the ingest's
// allowance for clocks running fast (decode.Options.MaxFuture, 5 minutes
// by default) plus the usual transport delay.
//
// # Aggregates
//
// Within a step a sensor's readings are sorted by (time, value), repeats
// of a time are dropped (at-least-once delivery repeats readings), and
// mean, min and max are computed in that order (so floating-point sums do
// not depend on arrival order). Values are canonical (model/units).
//
// # Quality
//
// For each sensor and step, the first that applies:
//
//   - missing: no reading in the step, and none within StaleAfter before
//     the step's end. Value, Min and Max are 0.
//   - stale: no reading in the step, but one within StaleAfter before its
//     end; Value, Min and Max carry that reading's value, Count is 0.
//   - out-of-range: a reading outside the sensor's Min..Max (canonical
//     units; Min == Max means no bound).
//   - spike: the step's mean lies more than SpikeK robust standard
//     deviations from the median of the last SpikeWindow usable steps, and
//     the next step's mean is back within that band (Hampel identifier:
//     Hampel 1974, as used for outliers in process data by Pearson 2002;
//     robust σ = 1.4826·MAD, consistent with σ for normal data, Rousseeuw
//     and Croux 1993). The band is never narrower than the sensor's
//     accuracy. Checking "and back" needs the next step, so with spike
//     detection on (the default) a snapshot is emitted one step later.
//   - stuck: the value (exactly, or within StuckTolerance) has not changed
//     for longer than StuckAfter (off by default), measured from the first
//     reading of the unchanged run to the step's last reading.
//   - ok.
//
// # Memory
//
// Only open steps are kept: those between the first unemitted step and
// the watermark, at most about Lateness/Step + 2 of them, each holding
// its readings (at most MaxPerStep per sensor; more are counted as
// Stats.Overflow and dropped). Per sensor the aligner keeps the last
// reading, the unchanged run and SpikeWindow past means.
//
// An Aligner is not safe for concurrent use; one goroutine owns it. The
// emit function is called synchronously from Add, Advance and Flush and
// owns the Snapshot it receives (its Values slice is not reused).
package align
