// Package spool is the durable on-disk queue between ingest and the
// time-series store: every accepted point is appended here before it is
// acknowledged, and one writer goroutine drains it into the store,
// committing what the store has taken. A store outage therefore costs disk,
// not memory, and a crash costs nothing that was appended.
//
// # On disk
//
// A spool is a folder holding
//
//   - segment files NNNNNNNNNNNNNNNNNNNN.seg, named by the sequence number of
//     their first record (20 decimal digits, so names sort in order). Each
//     record is
//
//     length  uint32 little-endian, bytes of payload
//     crc     uint32 little-endian, CRC-32C (Castagnoli) of length and payload
//     payload length bytes
//
//   - the file "committed": the sequence number of the first record not yet
//     taken by the store (8 bytes little-endian and their CRC-32C), replaced
//     atomically (write a temporary file, fsync, rename, fsync the folder).
//
// Open scans every segment. A record that is cut short or fails its CRC
// ends the valid part of its segment: in the last segment that is the torn
// tail of a crash and is truncated away; in an older segment the rest of
// that segment is dropped as corrupt and the loss counted in OpenStats.
// Sequence numbers continue across segments from their names, so a dropped
// stretch leaves a gap and never shifts what follows.
//
// # Durability (fsync policy)
//
// Append writes a batch of records with one write and, unless
// Options.NoSync is set, one fsync: a batch is durable when Append returns.
// Callers batch (the MQTT consumer appends what it has received, then
// acknowledges it), so the cost is one fsync per batch, not per point. A
// new segment and the folder are fsync'd when the segment is created.
//
// # Bounded disk use
//
// Options.MaxBytes (default 1 GiB) caps the bytes of all segments. An
// Append that would pass it fails with ErrFull and writes nothing: the
// caller keeps the data upstream (an unacknowledged MQTT message stays at
// the broker) and counts the refusal. Segments roll over at
// Options.SegmentBytes (default 64 MiB) and are deleted as soon as every
// record in them is committed, so disk use follows the backlog.
//
// # Memory
//
// Records live on disk only. Memory is the read buffer (ReadBuffer bytes,
// default 1 MiB) plus the batch the reader asked for; it does not grow with
// the backlog. Next returns payloads in a fresh slice the caller owns.
//
// # Concurrency
//
// Append may be called from any goroutine; Next and Commit belong to one
// reader (the store writer goroutine). All methods are safe to call
// concurrently; Close ends both sides.
package spool
