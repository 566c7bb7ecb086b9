package mqtt

import (
	"bytes"
	"strings"
	"testing"
	"time"

	"plumbline/model/telemetry"
)

func TestWriteMetrics(t *testing.T) {
	pipe := newPipe(t, []telemetry.Sensor{{ID: `P"1`, Quantity: telemetry.Pressure, Topic: "a/b", Unit: "m"}})
	c, err := New(Config{URL: "tcp://127.0.0.1:1"}, pipe, newCollector(), testLogger(t))
	if err != nil {
		t.Fatal(err)
	}
	now := time.Now()
	pipe.Process("a/b", []byte("x"), now)
	pipe.Process("a/b", []byte("x"), now)
	pipe.Process("c", []byte("1"), now)
	var buf bytes.Buffer
	if err := c.WriteMetrics(&buf); err != nil {
		t.Fatal(err)
	}
	out := buf.String()
	for _, want := range []string{
		"# TYPE plumbline_readings_accepted_total counter\nplumbline_readings_accepted_total 0\n",
		`plumbline_readings_rejected_total{reason="undecodable"} 2` + "\n",
		`plumbline_readings_rejected_total{reason="unknown-topic"} 1` + "\n",
		`plumbline_readings_rejected_total{reason="not-finite"} 0` + "\n",
		`plumbline_readings_rejected_sensor_total{sensor="P\"1",reason="undecodable"} 2` + "\n",
		`plumbline_readings_rejected_sensor_total{sensor="",reason="unknown-topic"} 1` + "\n",
		"plumbline_ingest_lag_seconds 0\n",
		"plumbline_mqtt_connected 0\n",
	} {
		if !strings.Contains(out, want) {
			t.Errorf("metrics lack %q:\n%s", want, out)
		}
	}
}
