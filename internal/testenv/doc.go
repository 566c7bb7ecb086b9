// Package testenv gives tests the real servers they run against: the
// shared Mosquitto broker and InfluxDB 1.8 server that scripts/testenv.sh
// starts for `make test`, and private instances a test can stop, kill and
// restart on its own.
//
// # Shared servers
//
// MQTT and Influx read the PLUMBLINE_TEST_* environment variables that
// scripts/testenv.sh exports. When a variable is missing they call
// t.Fatal with a message telling how to run the suite; they never skip,
// because a test that silently does not run cannot fail. Tests that share
// a server must keep to their own topics, sensors and run tags, or create
// their own database with CreateDatabase.
//
// # Private servers
//
// StartMosquitto and StartInflux start a process of their own on a free
// loopback port with its data under t.TempDir(). The process belongs to
// the returned value: Stop, Kill, Start and Restart keep the same port
// and data folder, so a test can simulate an outage or a crash and find
// the server again where it was. t.Cleanup stops the process; on Linux the
// process is also killed when the test binary dies (Pdeathsig). The
// binaries come from PLUMBLINE_MOSQUITTO_BIN and PLUMBLINE_INFLUXD_BIN.
//
// # Configuration
//
// Both the script and this package configure Mosquitto with persistence,
// max_queued_messages 0 (no silent queue limit), max_inflight_messages
// 1000 and anonymous access on 127.0.0.1 only, and InfluxDB with
// reporting disabled, Flux enabled, authentication off, the internal
// monitor store off and both the HTTP and the RPC listener on loopback.
//
// Every helper here may only be called from the test goroutine (it calls
// t.Fatal).
package testenv
