package lineproto

import (
	"fmt"
	"time"

	"plumbline/model/telemetry"
)

// Measurement names of the time-series store layout (shared/CONTRACT.md).
const (
	MeasurementReading     = "reading"
	MeasurementExpected    = "expected"
	MeasurementResidual    = "residual"
	MeasurementZoneBalance = "zone_balance"
	MeasurementNightFlow   = "night_flow"
	MeasurementFinding     = "finding"
	MeasurementAlert       = "alert"
)

// Tag and field names of the reading measurement, and the tag every point
// written by a replay carries.
const (
	TagSensor   = "sensor"
	TagQuantity = "quantity"
	TagUnit     = "unit"
	TagZone     = "zone"
	TagRun      = "run"
	FieldValue  = "value"
)

// FromReading returns the reading measurement point of r: tags sensor,
// quantity, unit and zone (empty ones are left out), field value in
// canonical units, timestamp r.Time.
func FromReading(r telemetry.Reading, quantity telemetry.Quantity, zone string) Point {
	q := ""
	if quantity != 0 {
		q = quantity.String()
	}
	return Point{
		Measurement: MeasurementReading,
		Tags: []Tag{
			{TagQuantity, q},
			{TagSensor, r.Sensor},
			{TagUnit, r.Unit},
			{TagZone, zone},
		},
		Fields: []Field{{FieldValue, r.Value}},
		Time:   r.Time,
	}
}

// ToReading returns the reading a reading point holds. It fails when the
// measurement is not reading, the sensor tag is missing, the value field
// is missing or not a number, or there is no timestamp.
func ToReading(p *Point) (telemetry.Reading, error) {
	if p.Measurement != MeasurementReading {
		return telemetry.Reading{}, fmt.Errorf("measurement %q is not %q", p.Measurement, MeasurementReading)
	}
	s := p.Tag(TagSensor)
	if s == "" {
		return telemetry.Reading{}, fmt.Errorf("no %q tag", TagSensor)
	}
	v, ok := p.Float(FieldValue)
	if !ok {
		return telemetry.Reading{}, fmt.Errorf("sensor %s: no numeric %q field", s, FieldValue)
	}
	if p.Time.IsZero() {
		return telemetry.Reading{}, fmt.Errorf("sensor %s: no timestamp", s)
	}
	return telemetry.Reading{Sensor: s, Time: p.Time.UTC(), Value: v, Unit: p.Tag(TagUnit)}, nil
}

// WithRun returns a copy of p with the run tag set to run (a replay's
// id), so that replay results never overwrite live ones.
func WithRun(p Point, run string) Point {
	tags := make([]Tag, 0, len(p.Tags)+1)
	for _, t := range p.Tags {
		if t.Key != TagRun {
			tags = append(tags, t)
		}
	}
	p.Tags = append(tags, Tag{TagRun, run})
	return p
}

// Stamp is a helper for result points: a point of measurement m at time
// t with the given tags (key, value pairs) and fields.
func Stamp(m string, t time.Time, fields []Field, tagKV ...string) Point {
	p := Point{Measurement: m, Fields: fields, Time: t}
	for i := 0; i+1 < len(tagKV); i += 2 {
		p.Tags = append(p.Tags, Tag{tagKV[i], tagKV[i+1]})
	}
	return p
}
