// Package decode turns MQTT messages into readings: it routes a topic to
// its sensor, decodes the payload, converts the value to canonical units
// (model/units) and validates it, counting every rejection by sensor and
// reason. It does no I/O; ingest/mqtt feeds it.
//
// # Payloads
//
// Without a decode setting a payload is either a bare number ("3.41";
// time = arrival, unit = the sensor's) or the plain JSON object
// {"value": 3.41, "time": "2026-03-02T01:10:00Z", "unit": "bar"} with time
// and unit optional (shared/CONTRACT.md "MQTT payloads"); that is Auto. A
// Spec (the configuration's `decode` block) selects Number, or a Fields
// decoder with dotted field paths ("data.p1", "readings[0].v") for the
// value, time and unit. A value may be a JSON number or a numeric string;
// a time is an RFC 3339 string or a Unix epoch number in seconds or
// milliseconds (TimeFormat).
//
// # Adding a decoder
//
// Write a type with one method, Decode(payload []byte, s *Sample) error,
// that fills s.Value and, if the payload has them, s.Time (UTC or any zone)
// and s.Unit, and returns an error describing a bad payload. Give it to
// NewPipeline in Options.SensorDecoders (per sensor) or in a Route (per
// topic filter); to make it selectable from configuration, add its format
// word to New. Add a fuzz test with seeds in testdata/fuzz/FuzzXxx/.
//
// # Topics
//
// A sensor's topic is an exact topic or an MQTT 3.1.1 topic filter (§4.7:
// '+' one level, '#' the rest, '$' topics not matched by leading
// wildcards); one level may be "{sensor}", which matches like '+' and
// whose text is the sensor id. Exact topics win; filters are tried in
// order. See topic.go for the clauses.
//
// # Validation
//
// Every message ends in one Reason: Accepted, or the first problem found,
// in this order: unknown-topic / unknown-sensor, too-large, undecodable,
// not-finite, unknown-unit, too-far-future / too-far-past, out-of-range
// (the sensor's Min..Max in canonical units). Rejections are counted per
// (sensor, reason) with atomic counters readable from any goroutine, and
// logged as warnings at a bounded rate (zerolog BurstSampler).
//
// # Memory and speed
//
// JSON payloads are read by a small validating scanner (json.go) that
// allocates nothing unless a string it needs has escapes; Process
// allocates nothing for a good reading in a known unit. A Sample's Unit
// may alias the payload. The decoders here are immutable and safe for
// concurrent use; a Pipeline's Process must be called from one goroutine
// at a time (it caches the last unit per sensor).
package decode
