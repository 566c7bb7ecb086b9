package decode

import (
	"fmt"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"plumbline/model/telemetry"
)

// benchPipeline has 1000 sensors: 500 on exact topics, 500 behind one
// {sensor} filter, in mixed units.
func benchPipeline(b *testing.B) (*Pipeline, []string) {
	b.Helper()
	var sensors []telemetry.Sensor
	var topics []string
	for i := 0; i < 1000; i++ {
		id := fmt.Sprintf("P-%04d", i)
		s := telemetry.Sensor{ID: id, Quantity: telemetry.Pressure, Unit: "bar"}
		if i%2 == 0 {
			s.Topic = "town/exact/" + id
			topics = append(topics, s.Topic)
		} else {
			s.Topic = "town/+/{sensor}"
			topics = append(topics, "town/zone"+fmt.Sprint(i%7)+"/"+id)
		}
		sensors = append(sensors, s)
	}
	p, err := NewPipeline(sensors, Options{Log: zerolog.Nop()})
	if err != nil {
		b.Fatal(err)
	}
	return p, topics
}

func benchProcess(b *testing.B, payload string) {
	p, topics := benchPipeline(b)
	pl := []byte(payload)
	now := time.Date(2026, 3, 2, 1, 10, 30, 0, time.UTC)
	b.ReportAllocs()
	b.SetBytes(int64(len(pl)))
	i := 0
	for b.Loop() {
		if _, r := p.Process(topics[i%len(topics)], pl, now); r != Accepted {
			b.Fatal(r)
		}
		i++
	}
	b.ReportMetric(float64(b.N)/b.Elapsed().Seconds(), "readings/s")
}

// BenchmarkProcessObject: route + decode + convert + validate one plain
// JSON object with time and unit. Target ≥ 1,000,000 readings/s per core.
func BenchmarkProcessObject(b *testing.B) {
	benchProcess(b, `{"value": 3.41, "time": "2026-03-02T01:10:00Z", "unit": "kPa"}`)
}

// BenchmarkProcessBare: a bare number.
func BenchmarkProcessBare(b *testing.B) { benchProcess(b, `3.41`) }

// BenchmarkProcessEpoch: value and epoch-millisecond time.
func BenchmarkProcessEpoch(b *testing.B) {
	benchProcess(b, `{"value":3.41,"time":1772413800123}`)
}

// BenchmarkFieldsNested: a configured decoder on a vendor-style document.
func BenchmarkFieldsNested(b *testing.B) {
	d, err := New(Spec{Format: "json", Value: "data.readings[2].v", Time: "data.ts", Unit: "meta.unit"})
	if err != nil {
		b.Fatal(err)
	}
	pl := []byte(`{"device":"dev-17","meta":{"fw":"1.2.3","unit":"bar"},"data":{"ts":"2026-03-02T01:10:00.123Z","readings":[{"v":1.1},{"v":2.2},{"v":3.3}],"rssi":-71}}`)
	s := new(Sample)
	b.ReportAllocs()
	b.SetBytes(int64(len(pl)))
	for b.Loop() {
		*s = Sample{}
		if err := d.Decode(pl, s); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.N)/b.Elapsed().Seconds(), "readings/s")
}
