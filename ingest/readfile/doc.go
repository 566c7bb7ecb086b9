// Package readfile reads readings files for retrospective runs
// (`--source FILE`), in the two formats of shared/CONTRACT.md:
//
//   - CSV with a header line naming the columns time, sensor, value, unit
//     and optionally quality, in any order:
//
//     time,sensor,value,unit,quality
//     2026-03-02T01:10:00Z,P-104,3.41,bar,ok
//
//     time is RFC 3339 (a zone is required); lines starting with # are
//     comments.
//
//   - InfluxDB line protocol: measurement reading, tag sensor, field value,
//     tag unit (optional tag quality), nanosecond timestamps. Lines of
//     other measurements are skipped and counted; # starts a comment.
//
// Files are UTF-8; a leading byte order mark (which spreadsheet and
// desktop tools often write) is skipped, and line numbers are those of
// the file.
//
// The format comes from the extension (.csv; .lp, .line, .influx) or,
// failing that, from the first line that is not blank or a comment (a CSV
// header starts with a column name followed by a comma).
//
// # Units
//
// Values are in the unit the file names on each line. With
// Options.Sensors (the configured sensors) each value is converted to the
// canonical unit of the sensor's quantity by model/units; a line without a
// unit takes the sensor's configured unit. Reading.Unit records the unit
// as read. Readings of sensors not in the list are skipped and counted.
// Without Options.Sensors values are delivered as read.
//
// # Quality
//
// An optional quality of ok (or empty) keeps the reading; any other
// quality word of telemetry.Quality (missing, stale, stuck, spike,
// out-of-range) marks it as unusable: it is skipped and counted as
// flagged. Any other word is a bad line.
//
// # Order and memory
//
// Read delivers readings in time order, then sensor order. The file is
// streamed; readings are held back in a reorder buffer spanning
// Options.ReorderWindow (default 1 h) of file time, so files sorted only
// roughly (per sensor, per batch) come out ordered. A reading earlier
// than one already delivered (more than the window out of order) is a bad
// line. Memory is bounded by the window's readings. Two readings of the
// same sensor at the same time within the window count as a duplicate: the
// later line wins, as it would in the store.
//
// # Errors
//
// Every problem names the file and line ("readings.csv:17: ..."). Bad
// lines are skipped and the read goes on; at the end Read returns a
// *FileError listing the first Options.MaxErrors of them and counting all,
// after every good reading was delivered. A file that cannot be opened, a
// CSV header that cannot be understood, an error from the callback or a
// cancelled context stop the read at once.
package readfile
