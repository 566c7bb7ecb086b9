// Package mqtt is plumbline's MQTT ingest: a paho.mqtt.golang client that
// subscribes to the sensors' topics, hands every message to the decode
// pipeline (ingest/decode) and passes the accepted readings to a Sink that
// makes them durable (the service's spool or store) before acknowledging
// the messages.
//
// # Delivery
//
// Subscriptions are QoS 1 on a persistent session (clean session false,
// a stable client id), made in the on-connect handler so that every
// reconnect resubscribes; paho reconnects by itself (auto reconnect,
// connect retry, at most 30 s between attempts). Acknowledgements are
// manual and in order (OrderMatters(true), AutoAckDisabled(true)): the
// message handler only puts the message into a bounded queue and returns;
// one consumer goroutine decodes a batch, calls Sink.Accept, and only when
// that returns nil acknowledges the batch's messages in receive order.
// Rejected messages are counted (by sensor and reason) and acknowledged:
// redelivering them cannot help.
//
// This is at-least-once delivery: a message whose acknowledgement is lost
// (the connection dropped after Accept) is delivered again, so the Sink
// and everything after it must treat a repeat of (sensor, time) as the
// same reading (the store overwrites such a point).
//
// # Queue-full policy
//
// The handler never blocks the client. When the queue is full the message
// is dropped without an acknowledgement and counted (Stats.Dropped); the
// broker still holds it as in flight and redelivers it when the session
// reconnects. Size the queue (Config.QueueSize, default 16384) above the
// broker's in-flight window (Mosquitto max_inflight_messages, default 20:
// raise it, e.g. to 1000, or throughput is capped) so that at QoS 1 the
// queue cannot overflow. A message its publisher sent at QoS 0 arrives at
// QoS 0 whatever we subscribe with, is never redelivered, and is lost if
// dropped (still counted). While the Sink fails, Accept is retried with
// backoff and nothing further is acknowledged.
//
// # Stop
//
// Run blocks until its context is done, then: stops taking new messages
// (they stay unacknowledged and are redelivered next session), gives the
// consumer up to Config.DrainTimeout to make the queued messages durable
// and acknowledge them, disconnects, and records why it stopped
// (Status.StopCause).
//
// # Security
//
// URLs tcp://, mqtt://, ssl://, tls://, mqtts://, ws:// and wss://. TLS
// uses the system roots or Config.CAFile, and an optional client
// certificate. The password is read from a file or an environment
// variable at each connect; it is never logged nor shown in Status.
// Credentials in the URL are refused.
//
// The paho memory store is used (durability is the Sink's job); token
// waits use WaitTimeout or Done, never a bare Wait.
//
// # Connection
//
// The client dials the broker itself (paho's CustomOpenConnectionFn, with
// the same proxy, TLS and websocket handling as paho) so that reads are
// buffered and, on TCP and TLS, writes are gathered for at most 200 µs:
// paho otherwise makes one system call per byte of each packet header and
// one per acknowledgement (conn.go).
//
// # Observing
//
// Stats and Status are safe from any goroutine; WriteMetrics writes them
// and the pipeline's rejection counters in the Prometheus text format.
package mqtt
