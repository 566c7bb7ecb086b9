// Package broker runs an MQTT broker inside the plumbline process
// (mochi-mqtt/server v2) for the demo and for sites without one of their
// own. It listens on loopback only and admits loopback clients only.
//
// The embedded broker keeps sessions and queued messages in memory: it
// does not persist them and does not survive a crash or a restart of the
// service. A site that must not lose readings while the service is down
// should run its own broker (Mosquitto with persistence) and point
// mqtt.url at it.
//
// Ingest goes through the same paho client (ingest/mqtt) over loopback for
// the embedded and an external broker, so there is one code path; the
// broker's inline client (QoS 0 only) is not used.
//
// Per-client limits of the broker (about 8192 pending writes per client)
// drop messages to a slow subscriber; Stats exports the broker's drop
// counters for /metrics.
package broker
