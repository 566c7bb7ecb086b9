package source

import (
	"testing"
	"time"

	"plumbline/model/telemetry"
)

func TestSensorSet(t *testing.T) {
	all := SensorSet(nil)
	if !all("anything") {
		t.Fatal("empty set must admit every sensor")
	}
	some := SensorSet([]string{"P-1", "F-2"})
	for s, want := range map[string]bool{"P-1": true, "F-2": true, "P-10": false, "": false} {
		if got := some(s); got != want {
			t.Errorf("SensorSet(P-1,F-2)(%q) = %v, want %v", s, got, want)
		}
	}
}

func TestLess(t *testing.T) {
	t0 := time.Date(2026, 3, 2, 0, 0, 0, 0, time.UTC)
	a := telemetry.Reading{Sensor: "B", Time: t0}
	b := telemetry.Reading{Sensor: "A", Time: t0.Add(time.Nanosecond)}
	c := telemetry.Reading{Sensor: "A", Time: t0}
	if !Less(a, b) || Less(b, a) {
		t.Error("earlier time must come first whatever the sensor")
	}
	if !Less(c, a) || Less(a, c) {
		t.Error("same time: sensor A before B")
	}
}
