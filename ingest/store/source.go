package store

import (
	"context"
	"fmt"
	"strings"
	"time"

	influxdb2 "github.com/influxdata/influxdb-client-go/v2"
	"github.com/influxdata/influxdb-client-go/v2/api"

	"plumbline/ingest/lineproto"
	"plumbline/model/telemetry"
)

// Source reads readings back from InfluxDB with Flux. It implements
// source.Source.
type Source struct {
	cfg    Config
	client influxdb2.Client
	query  api.QueryAPI
}

// NewSource returns a reader of the reading measurement in cfg's bucket.
// Only URL, Token, Org, Bucket, RequestTimeout and ReadWindow are used.
func NewSource(cfg Config) (*Source, error) {
	cfg.defaults()
	if err := cfg.check(); err != nil {
		return nil, err
	}
	opts := influxdb2.DefaultOptions().SetHTTPRequestTimeout(uint(cfg.RequestTimeout / time.Second))
	client := influxdb2.NewClientWithOptions(cfg.URL, cfg.Token, opts)
	return &Source{cfg: cfg, client: client, query: client.QueryAPI(cfg.Org)}, nil
}

// Close releases the client's connections.
func (s *Source) Close() { s.client.Close() }

// Read streams the readings of sensors (all when empty) with time in
// [from, to) in time order, then sensor order, one Flux query per
// ReadWindow. Rows without a numeric value are reported as an error.
func (s *Source) Read(ctx context.Context, from, to time.Time, sensors []string, fn func(telemetry.Reading) error) error {
	if !from.Before(to) {
		return nil
	}
	for start := from; start.Before(to); {
		stop := start.Add(s.cfg.ReadWindow)
		if stop.After(to) || stop.Before(start) {
			stop = to
		}
		if err := s.readWindow(ctx, start, stop, sensors, fn); err != nil {
			return err
		}
		start = stop
	}
	return nil
}

func (s *Source) readWindow(ctx context.Context, from, to time.Time, sensors []string, fn func(telemetry.Reading) error) error {
	q := FluxReadings(s.cfg.Bucket, from, to, sensors)
	res, err := s.query.Query(ctx, q)
	if err != nil {
		return fmt.Errorf("store: query %s..%s: %w", from.Format(time.RFC3339), to.Format(time.RFC3339), err)
	}
	defer res.Close()
	for res.Next() {
		rec := res.Record()
		// InfluxDB 1.8 lets a row at exactly the stop time through; the
		// range is [from, to) here, so that windows never overlap.
		if tm := rec.Time(); tm.Before(from) || !tm.Before(to) {
			continue
		}
		sensor, _ := rec.ValueByKey(lineproto.TagSensor).(string)
		unit, _ := rec.ValueByKey(lineproto.TagUnit).(string)
		var v float64
		switch x := rec.Value().(type) {
		case float64:
			v = x
		case int64:
			v = float64(x)
		case uint64:
			v = float64(x)
		default:
			return fmt.Errorf("store: sensor %s at %s: value %v (%T) is not a number", sensor, rec.Time().Format(time.RFC3339Nano), rec.Value(), rec.Value())
		}
		if err := fn(telemetry.Reading{Sensor: sensor, Time: rec.Time().UTC(), Value: v, Unit: unit}); err != nil {
			return err
		}
	}
	if err := res.Err(); err != nil {
		return fmt.Errorf("store: query %s..%s: %w", from.Format(time.RFC3339), to.Format(time.RFC3339), err)
	}
	return nil
}

// FluxReadings returns the Flux query of the reading measurement in
// bucket over [from, to) for sensors (all when empty), as one table sorted
// by time and sensor.
func FluxReadings(bucket string, from, to time.Time, sensors []string) string {
	var b strings.Builder
	fmt.Fprintf(&b, "from(bucket: %s)\n", fluxString(bucket))
	fmt.Fprintf(&b, "  |> range(start: %s, stop: %s)\n", from.UTC().Format(time.RFC3339Nano), to.UTC().Format(time.RFC3339Nano))
	fmt.Fprintf(&b, "  |> filter(fn: (r) => r._measurement == %s and r._field == %s)\n",
		fluxString(lineproto.MeasurementReading), fluxString(lineproto.FieldValue))
	switch {
	case len(sensors) == 0:
	case len(sensors) <= 32:
		b.WriteString("  |> filter(fn: (r) => ")
		for i, id := range sensors {
			if i > 0 {
				b.WriteString(" or ")
			}
			fmt.Fprintf(&b, "r.sensor == %s", fluxString(id))
		}
		b.WriteString(")\n")
	default:
		b.WriteString("  |> filter(fn: (r) => contains(value: r.sensor, set: [")
		for i, id := range sensors {
			if i > 0 {
				b.WriteString(", ")
			}
			b.WriteString(fluxString(id))
		}
		b.WriteString("]))\n")
	}
	b.WriteString("  |> group()\n")
	b.WriteString("  |> sort(columns: [\"_time\", \"sensor\"])\n")
	return b.String()
}

// fluxString quotes s as a Flux string literal: backslash, double quote
// and the interpolation opener ${ are escaped.
func fluxString(s string) string {
	var b strings.Builder
	b.WriteByte('"')
	for i := 0; i < len(s); i++ {
		switch c := s[i]; c {
		case '\\', '"':
			b.WriteByte('\\')
			b.WriteByte(c)
		case '$':
			if i+1 < len(s) && s[i+1] == '{' {
				b.WriteByte('\\')
			}
			b.WriteByte(c)
		case '\n':
			b.WriteString(`\n`)
		case '\r':
			b.WriteString(`\r`)
		case '\t':
			b.WriteString(`\t`)
		default:
			b.WriteByte(c)
		}
	}
	b.WriteByte('"')
	return b.String()
}
