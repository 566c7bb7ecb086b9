// Package source defines Source, the one interface retrospective runs
// (replay, calibrate, report) read readings through, whatever holds them:
// InfluxDB (ingest/store), the embedded file store (ingest/filestore) or a
// readings file (ingest/readfile).
//
// # Contract
//
//   - Read calls fn once per reading with Time in [from, to), in ascending
//     time order; readings at the same instant come in ascending sensor id
//     order.
//   - sensors limits the readings to those sensor ids; nil or empty means
//     every sensor.
//   - Values are in canonical units (m, L/s) where the source knows the
//     unit; Reading.Unit records the unit the value arrived in.
//   - Read streams: memory does not grow with the length of the range.
//   - An error from fn stops the read and is returned as it is (compare
//     with errors.Is). Other errors are wrapped with the source's name.
//     A source that skips bad input (a readings file) keeps reading the
//     good part and returns an error describing what it skipped at the end.
//
// ReadAhead runs any Source's Read on a second goroutine, handing the
// readings over in batches, so that parsing a file overlaps the work
// done with each reading; what the callback sees is unchanged.
package source

import (
	"context"
	"time"

	"plumbline/model/telemetry"
)

// Source streams stored readings in time order. See the package doc.
type Source interface {
	Read(ctx context.Context, from, to time.Time, sensors []string, fn func(telemetry.Reading) error) error
}

// SensorSet returns a membership test for a sensor list; an empty list
// admits every sensor.
func SensorSet(sensors []string) func(string) bool {
	if len(sensors) == 0 {
		return func(string) bool { return true }
	}
	set := make(map[string]struct{}, len(sensors))
	for _, s := range sensors {
		set[s] = struct{}{}
	}
	return func(s string) bool { _, ok := set[s]; return ok }
}

// Less orders readings as Read delivers them: by time, then by sensor id.
func Less(a, b telemetry.Reading) bool {
	if !a.Time.Equal(b.Time) {
		return a.Time.Before(b.Time)
	}
	return a.Sensor < b.Sensor
}
