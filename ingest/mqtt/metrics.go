package mqtt

import (
	"bufio"
	"fmt"
	"io"
	"strings"

	"plumbline/ingest/decode"
)

// WriteMetrics writes the client's and its pipeline's counters in the
// Prometheus text exposition format (version 0.0.4), for the service's
// /metrics page:
//
//	plumbline_readings_accepted_total                       counter
//	plumbline_readings_rejected_total{reason}               counter, every reason
//	plumbline_readings_rejected_sensor_total{sensor,reason} counter, non-zero only
//	plumbline_ingest_lag_seconds                            gauge
//	plumbline_mqtt_received_total, _dropped_total, _sink_errors_total,
//	_connects_total, _connections_lost_total                counters
//	plumbline_mqtt_queue_length, plumbline_mqtt_connected   gauges
//
// Messages without a sensor (unknown topic) have sensor="".
func (c *Client) WriteMetrics(w io.Writer) error {
	s := c.Stats()
	st := c.Status()
	bw := bufio.NewWriter(w)
	metric := func(name, typ, help string) {
		fmt.Fprintf(bw, "# HELP %s %s\n# TYPE %s %s\n", name, help, name, typ)
	}
	metric("plumbline_readings_accepted_total", "counter", "Readings from MQTT made durable (repeats included).")
	fmt.Fprintf(bw, "plumbline_readings_accepted_total %d\n", s.Accepted)
	metric("plumbline_readings_rejected_total", "counter", "MQTT messages rejected, by reason.")
	for _, r := range decode.Reasons {
		fmt.Fprintf(bw, "plumbline_readings_rejected_total{reason=%q} %d\n", r.String(), c.pipe.RejectedBy(r))
	}
	metric("plumbline_readings_rejected_sensor_total", "counter", "MQTT messages rejected, by sensor and reason.")
	for _, r := range c.pipe.Rejections() {
		fmt.Fprintf(bw, "plumbline_readings_rejected_sensor_total{sensor=\"%s\",reason=%q} %d\n", escapeLabel(r.Sensor), r.Reason.String(), r.N)
	}
	metric("plumbline_ingest_lag_seconds", "gauge", "Age of the newest reading when it was made durable.")
	fmt.Fprintf(bw, "plumbline_ingest_lag_seconds %g\n", s.Lag.Seconds())
	counters := []struct {
		name, help string
		v          uint64
	}{
		{"plumbline_mqtt_received_total", "MQTT messages received.", s.Received},
		{"plumbline_mqtt_dropped_total", "MQTT messages dropped unacknowledged because the ingest queue was full.", s.Dropped},
		{"plumbline_mqtt_sink_errors_total", "Failed attempts to make readings durable (each retried).", s.SinkErrors},
		{"plumbline_mqtt_connects_total", "Successful MQTT connections.", st.Connects},
		{"plumbline_mqtt_connections_lost_total", "MQTT connections lost.", st.Lost},
	}
	for _, k := range counters {
		metric(k.name, "counter", k.help)
		fmt.Fprintf(bw, "%s %d\n", k.name, k.v)
	}
	metric("plumbline_mqtt_queue_length", "gauge", "MQTT messages waiting for the ingest consumer.")
	fmt.Fprintf(bw, "plumbline_mqtt_queue_length %d\n", s.Queued)
	metric("plumbline_mqtt_connected", "gauge", "1 when connected to the broker and subscribed.")
	up := 0
	if st.Subscribed {
		up = 1
	}
	fmt.Fprintf(bw, "plumbline_mqtt_connected %d\n", up)
	return bw.Flush()
}

// escapeLabel escapes a label value as the text format requires.
func escapeLabel(s string) string {
	return strings.NewReplacer(`\`, `\\`, `"`, `\"`, "\n", `\n`).Replace(s)
}
