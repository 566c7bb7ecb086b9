package mqtt

import (
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"plumbline/ingest/broker"
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

// TestPasswordNeverLogged connects with a password file and debug logging
// and checks that the secret appears in no log line nor in the status.
func TestPasswordNeverLogged(t *testing.T) {
	b, err := broker.Start(broker.Config{}, zerolog.Nop())
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = b.Close() })
	pw := filepath.Join(t.TempDir(), "pw")
	const secret = "correct-horse-battery-staple"
	if err := os.WriteFile(pw, []byte(secret+"\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	var logs bytes.Buffer
	log := zerolog.New(zerolog.SyncWriter(&logs)).Level(zerolog.DebugLevel) // written from several goroutines
	pipe := newPipe(t, []telemetry.Sensor{{ID: "A", Quantity: telemetry.Flow, Topic: "a", Unit: "L/s"}})
	c, err := New(Config{URL: b.URL(), ClientID: "pw", Username: "ops", PasswordFile: pw}, pipe, newCollector(), log)
	if err != nil {
		t.Fatal(err)
	}
	stop := runClient(t, c)
	waitConnected(t, c)
	stop()
	if logs.Len() == 0 {
		t.Fatal("no log output: the check would prove nothing")
	}
	if strings.Contains(logs.String(), secret) || strings.Contains(fmt.Sprintf("%+v", c.Status()), secret) {
		t.Errorf("the password appears in the logs or status:\n%s", logs.String())
	}
}
