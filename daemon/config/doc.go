// Package config loads the service configuration (shared/CONTRACT.md
// "Service configuration"): a YAML file naming the network, the model
// step, the MQTT broker, the sensors, the zones, the store, the data
// folder, the alerts, the HTTP listener and the log.
//
// # Loading
//
// Load(data, name) is for tests and tools, LoadFile(path) for the
// service; Parse returns every problem (errors and warnings) and the
// Config when there is no error. Files may start with a UTF-8 byte
// order mark: the YAML decoder and the network reader skip it, lines
// unchanged. The steps are: decode with
// go.yaml.in/yaml/v3 and KnownFields(true), so a misspelt key is an
// error naming its line (sensor entries, decoded one by one, have their
// keys checked the same way); apply the defaults (the Default*
// constants); resolve paths (network, sensors file, password, TLS and
// token files, data_dir) against the folder of the configuration file;
// read and validate the network file (its problems are listed with the
// configuration's); then check the cross-field rules:
//
//   - sensor ids unique; quantity pressure, flow, level or head; `at` a
//     node for pressure, level and head (level: a tank or reservoir), a
//     link for flow; unit known for the quantity (model/units, stored as
//     its preferred symbol; default the canonical unit); accuracy >= 0;
//     topic a valid MQTT 3.1.1 topic or filter (§4.7) with at most one
//     "{sensor}" level, and no two sensors on one exact topic; min below
//     max (canonical units); a decode block's format and field paths;
//   - a sensor's Zone comes from its node, or from its link's To node
//     (else From), unless the sensor names one;
//   - zone ids unique and present in the network; inlets and outlets
//     are flow sensors of this file, none listed twice; a meter that does
//     not cross the zone boundary, or points the wrong way, is a
//     warning; night "HH:MM-HH:MM" (may wrap past midnight); timezone an
//     IANA name (the tz database is embedded, so this works on hosts
//     without one); allowances and asset figures not negative;
//   - step and keepalive positive Go durations; MQTT url scheme tcp, ssl,
//     tls, ws or wss with a host, QoS 0 or 1, cert_file with key_file;
//     store url http or https with a bucket; http listen host:port; log
//     level and format known.
//
// Secret and certificate files that cannot be read now are warnings:
// the service reads them when it connects (so they may be rotated).
//
// # Problems
//
// Every problem carries its file and line (the configuration, the
// sensors file or the network file) and, where there is one, the sensor,
// zone or feature it is about: "file:line: sensor P-104: unit: message".
// Load returns a *ValidationError listing all errors; nothing panics on
// bad input.
//
// # Sensors file
//
// `sensors:` is a list, or the path of a YAML file holding the list (or
// holding a mapping with a `sensors` list, such as another
// configuration); the scenario format of `plumbline simulate` reads the
// same entries.
//
// The `alerts` block is kept as a yaml.Node for package alerts to decode.
package config
