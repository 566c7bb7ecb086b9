// Package store is the InfluxDB side of the time-series store: Writer
// drains the durable spool (ingest/spool) into InfluxDB, and Source reads
// readings back with Flux for retrospective runs.
//
// # Layout
//
// Points follow the store layout of shared/CONTRACT.md: measurement
// reading with tags sensor, quantity, unit and zone and field value in
// canonical units; the result measurements (expected, residual,
// zone_balance, night_flow, finding, alert) as generic lineproto.Point
// values; every point a replay writes carries the tag run.
//
// # Writing
//
// Add encodes points to line protocol and appends them to the spool; when
// it returns they are on disk (fsync'd) and the caller may acknowledge
// their source. Run is the one goroutine that owns the path to InfluxDB:
// it takes batches (Config.BatchPoints, default 5,000) from the spool,
// writes each with WriteAPIBlocking and commits it in the spool only when
// InfluxDB has answered 204. The asynchronous WriteAPI is never used (it
// drops batches; see shared/LIBRARIES.md).
//
// Errors are classified with errors.As on *http.Error of the client:
//
//   - no status (network), 429, 5xx, 401, 403: retried with exponential
//     backoff (Config.MinBackoff to MaxBackoff, Retry-After honoured); the
//     batch stays in memory, everything behind it stays on disk;
//   - 404 on InfluxDB 1.8 (database not found): the database is created
//     (POST /query CREATE DATABASE) and the batch retried;
//   - 413 (body too large): the batch is split in halves, recursively;
//   - 400 and 422 (partial write, unparsable line, field type conflict):
//     the batch is split in halves until the offending points stand alone;
//     those are appended to the dead-letter file and counted, the rest is
//     written. Rewriting the good half is harmless, see below.
//
// # Exactly once in effect
//
// Delivery to InfluxDB is at least once: after a crash between a write
// and its commit, or a split, points are written again. Every point has an
// explicit timestamp, and InfluxDB keeps one value per series and
// timestamp (the last write wins), so a repeat changes nothing.
//
// # Memory during an outage
//
// While InfluxDB is unreachable the writer holds one batch in memory and
// retries it; new points go to the spool on disk. Memory stays flat; disk
// grows up to the spool's MaxBytes, after which Add fails with
// spool.ErrFull and the caller leaves data upstream.
//
// # Reading
//
// Source.Read runs one Flux query per time window (Config.ReadWindow,
// default 6 h) on measurement reading, grouped into one table and sorted
// by time and sensor, and streams the rows; memory is bounded by one
// window's rows at the server and one row at a time here.
//
// # Counters
//
// Stats returns the spool depth and the written, retried and dead-lettered
// counts for /metrics; Stats.WritePrometheus prints them in Prometheus
// text format.
package store
