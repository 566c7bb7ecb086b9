// Package filestore is the embedded time-series store, used when the
// configuration names no store url: plain line protocol files under the
// data folder, one file per measurement per UTC hour,
//
//	<dir>/<measurement>/2026-03-02T01.lp
//
// holding every point whose timestamp falls in that hour, in the order it
// was added. The file name is the time index: a read over [from, to) opens
// only the hours it touches. The files are InfluxDB line protocol with
// nanosecond timestamps, so they can be bulk-loaded into InfluxDB as they
// are (POST /write?db=DB&precision=ns with the file as body, or
// `influx -import`); Files lists them for a range.
//
// # Durability
//
// Add appends each point to its hour's file and fsyncs every file it
// touched before returning (one fsync per file per Add, so callers batch).
// A crash can leave a partial last line; the next append to that file
// cuts it off first, and readers ignore a last line without newline.
//
// # Reading
//
// Read (readings, source.Source) and ReadPoints (any measurement) go hour
// by hour: one hour's points are parsed, sorted by time (then sensor or
// series) and delivered. Memory is bounded by one hour of points. Points
// repeated with the same series and timestamp (a redelivered MQTT
// message) are delivered once, the last one added winning, as InfluxDB
// would keep them. A line that does not parse is skipped; the read goes
// on and returns an error naming every such file:line at the end.
//
// # Disk
//
// The store keeps everything it is given; disk use grows with the data
// (about 90 bytes per reading). Prune removes hours older than a cut-off.
//
// # Concurrency
//
// Add, Read and Prune are safe to call from several goroutines. Read sees
// every point whose Add returned before Read opened the hour's file. Each
// Add writes each file's lines with one append-mode write, so separate
// Store values on one folder (the service and a replay) do not interleave
// lines; still, keep one writer per folder where you can, since the
// torn-line repair of one opener cannot tell another's write in flight
// from a crash.
package filestore
