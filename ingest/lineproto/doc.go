// Package lineproto is the point type that every store in ingest/ speaks,
// and its text form, the InfluxDB line protocol:
//
//	measurement,tag1=v1,tag2=v2 field1=1.5,field2="text",field3=7i,field4=true 1700000000000000000
//
// The same text is what the spool keeps on disk, what the embedded file
// store writes into its files and what InfluxDB receives, so a point
// crosses every boundary unchanged and the file store's files can be
// bulk-loaded into InfluxDB as they are.
//
// # Conventions
//
//   - Time is UTC with nanosecond precision; a zero Time means "no
//     timestamp" (the server would assign one), which our writers never use.
//   - Field values are float64, int64, string or bool. Floats must be
//     finite (the protocol has no NaN or infinity). Integers carry the
//     suffix i.
//   - Tags are written sorted by key (InfluxDB's canonical order); a tag
//     with an empty value is left out, as InfluxDB would drop it.
//   - Names and tag values may not contain a newline, a carriage return or
//     a backslash: line protocol cannot escape the first two and treats the
//     third ambiguously. Encode reports them as errors; string field values
//     may contain backslashes and quotes (escaped) but no newline either,
//     so every point is exactly one line.
//   - Parse accepts the escapes InfluxDB 1.8 writes (\, \= and \space in
//     names and tags; \" and \\ in strings), skips nothing and reports the
//     byte column of the first problem. Comments and blank lines are the
//     caller's business (see IsBlankOrComment).
//
// # Memory
//
// Append writes into the caller's buffer; Parse copies what it keeps, so
// the input line may be reused at once.
package lineproto
