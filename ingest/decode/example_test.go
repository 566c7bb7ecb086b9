package decode_test

import (
	"fmt"
	"time"

	"plumbline/ingest/decode"
	"plumbline/model/telemetry"
)

func ExamplePipeline() {
	sensors := []telemetry.Sensor{
		{ID: "P-104", Quantity: telemetry.Pressure, Topic: "town/north/P-104", Unit: "bar"},
		{ID: "F-in", Quantity: telemetry.Flow, Topic: "plant/+/{sensor}", Unit: "m3/h"},
	}
	vendor, _ := decode.New(decode.Spec{Format: "json", Value: "data.q", Time: "data.ts", TimeFormat: "unix_ms"})
	p, err := decode.NewPipeline(sensors, decode.Options{SensorDecoders: map[string]decode.Decoder{"F-in": vendor}})
	if err != nil {
		fmt.Println(err)
		return
	}
	arrival := time.Date(2026, 3, 2, 1, 10, 5, 0, time.UTC)
	for _, m := range []struct{ topic, payload string }{
		{"town/north/P-104", "3.5"},
		{"town/north/P-104", `{"value": 350, "unit": "kPa", "time": "2026-03-02T01:10:00Z"}`},
		{"plant/inlet/F-in", `{"data": {"q": 36, "ts": 1772413800000}}`},
		{"plant/inlet/F-out", `{"data": {"q": 1}}`},
		{"town/north/P-104", `{"value": "high"}`},
	} {
		r, reason := p.Process(m.topic, []byte(m.payload), arrival)
		if reason != decode.Accepted {
			fmt.Println(m.topic, reason)
			continue
		}
		fmt.Printf("%s %s %.4f (arrived in %s)\n", r.Sensor, r.Time.Format(time.RFC3339), r.Value, r.Unit)
	}
	fmt.Println(p.Subscriptions())
	// Output:
	// P-104 2026-03-02T01:10:05Z 35.6901 (arrived in bar)
	// P-104 2026-03-02T01:10:00Z 35.6901 (arrived in kPa)
	// F-in 2026-03-02T01:10:00Z 10.0000 (arrived in m3/h)
	// plant/inlet/F-out unknown-sensor
	// town/north/P-104 undecodable
	// [town/north/P-104 plant/+/+]
}
