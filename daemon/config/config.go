package config

import (
	"fmt"
	"math"
	"strings"
	"time"

	"go.yaml.in/yaml/v3"

	"plumbline/model/network"
	"plumbline/model/telemetry"
)

// Defaults, applied where the file leaves a key out.
const (
	// DefaultStep is the model time step.
	DefaultStep = 5 * time.Minute
	// DefaultClientID is the MQTT client id; give each running service
	// its own (a broker drops the older of two sessions with one id).
	DefaultClientID = "plumbline"
	// DefaultKeepAlive is the MQTT keep-alive interval (never 0: see
	// shared/LIBRARIES.md).
	DefaultKeepAlive = 30 * time.Second
	// DefaultQoS is the MQTT subscription quality of service: at least
	// once.
	DefaultQoS = 1
	// DefaultOrg is the store organisation; "-" is what InfluxDB 1.8
	// expects (shared/LIBRARIES.md).
	DefaultOrg = "-"
	// DefaultDataDir holds the spool and the embedded store, relative to
	// the configuration file.
	DefaultDataDir = "plumbline-data"
	// DefaultListen is the service HTTP address: loopback only.
	DefaultListen = "127.0.0.1:8470"
	// DefaultLogLevel is the zerolog level.
	DefaultLogLevel = "info"
	// DefaultLogFormat writes JSON log lines.
	DefaultLogFormat = "json"
	// DefaultNight is a zone's night window, local time.
	DefaultNight = "02:00-04:00"
	// DefaultTimeZone is a zone's time zone.
	DefaultTimeZone = "UTC"
)

// Config is a loaded and checked service configuration
// (shared/CONTRACT.md "Service configuration"). Paths are resolved
// against the folder of the configuration file. Load, LoadFile and Parse
// fill every field, defaults included; the Network is loaded and checked
// too.
type Config struct {
	// File is the configuration's path as given.
	File string
	// NetworkPath is the network file, resolved; Network is that file
	// read and validated.
	NetworkPath string
	Network     *network.Network
	// Step is the model time step.
	Step time.Duration
	MQTT MQTT
	// Sensors are in file order. Zone is filled from the sensor's node
	// (or link) unless the sensor names one. Min and Max are in
	// canonical units; ±Inf where the file gives none, both 0 when it
	// gives neither.
	Sensors []telemetry.Sensor
	// Decode holds the decode block of each sensor that has one, by
	// sensor id.
	Decode map[string]Decode
	// SensorsFile is the file the sensors came from when `sensors:` is a
	// path ("" when the list is inline).
	SensorsFile string
	Zones       []Zone
	Store       Store
	// DataDir holds the spool and, without a store URL, the embedded
	// store.
	DataDir string
	// Alerts is the `alerts` block as written, for the alerts package to
	// decode (Kind 0 when absent).
	Alerts yaml.Node
	HTTP   HTTP
	Log    Log
	// Calibration is the `calibration` block (calibration.go).
	Calibration Calibration
}

// Sensor returns the sensor with the given id.
func (c *Config) Sensor(id string) (telemetry.Sensor, bool) {
	for _, s := range c.Sensors {
		if s.ID == id {
			return s, true
		}
	}
	return telemetry.Sensor{}, false
}

// Zone returns the zone with the given id.
func (c *Config) Zone(id string) (Zone, bool) {
	for _, z := range c.Zones {
		if z.ID == id {
			return z, true
		}
	}
	return Zone{}, false
}

// MQTT is the broker connection. An empty URL means the embedded broker
// on loopback.
type MQTT struct {
	// URL is scheme://host[:port] with scheme tcp, ssl, tls, ws or wss.
	URL      string
	ClientID string
	Username string
	// PasswordFile holds the password (read at each connect, so it may
	// be rotated); CAFile, CertFile and KeyFile configure TLS.
	PasswordFile string
	CAFile       string
	CertFile     string
	KeyFile      string
	KeepAlive    time.Duration
	// QoS is the subscription quality of service, 0 or 1.
	QoS int
}

// Embedded reports whether the service runs its own broker.
func (m MQTT) Embedded() bool { return m.URL == "" }

// Decode is a sensor's payload decoding (shared/CONTRACT.md "MQTT
// payloads"): field paths of the value, time and unit in a JSON payload.
type Decode struct {
	// Format is "auto" (bare number or the plain object, the default),
	// "number" or "json" (the paths below).
	Format string
	// Value, Time and Unit are dotted field paths with optional array
	// indexes ("data.p1", "readings[0].v").
	Value, Time, Unit string
	// TimeFormat is "auto", "rfc3339", "unix" or "unix_ms".
	TimeFormat string
}

// Zone is a district metered area or pressure zone.
type Zone struct {
	ID string
	// Inlets and Outlets are flow sensor ids; an inlet's positive flow
	// enters the zone, an outlet's leaves it.
	Inlets, Outlets []string
	// Night is the local-time window of the night-flow analysis.
	Night NightWindow
	// TimeZone is the zone's IANA time zone (TimeZoneName as written).
	TimeZone     *time.Location
	TimeZoneName string
	// NightUseLPS is the legitimate night consumption allowance, L/s.
	NightUseLPS float64
	// MainsLengthKm, ServiceConnections, ServiceLengthKm (private
	// service pipe from property line to meter, km) and AveragePressureM
	// feed the unavoidable annual real losses of Lambert et al. (1999);
	// 0 when not given.
	MainsLengthKm      float64
	ServiceConnections int
	ServiceLengthKm    float64
	AveragePressureM   float64
}

// NightWindow is a daily window of local time, [Start, End) as offsets
// from midnight. End before Start wraps past midnight.
type NightWindow struct {
	Start, End time.Duration
}

// ParseNightWindow reads "HH:MM-HH:MM" (24-hour clock; 24:00 allowed as
// an end).
func ParseNightWindow(s string) (NightWindow, error) {
	a, b, ok := strings.Cut(strings.TrimSpace(s), "-")
	if !ok {
		return NightWindow{}, fmt.Errorf("want \"HH:MM-HH:MM\", got %q", s)
	}
	start, err := clock(strings.TrimSpace(a), false)
	if err != nil {
		return NightWindow{}, fmt.Errorf("start of %q: %w", s, err)
	}
	end, err := clock(strings.TrimSpace(b), true)
	if err != nil {
		return NightWindow{}, fmt.Errorf("end of %q: %w", s, err)
	}
	if start == end || (start == 0 && end == 24*time.Hour) {
		return NightWindow{}, fmt.Errorf("%q is empty or the whole day", s)
	}
	return NightWindow{Start: start, End: end}, nil
}

func clock(s string, end bool) (time.Duration, error) {
	var h, m int
	if len(s) != 5 || s[2] != ':' {
		return 0, fmt.Errorf("want HH:MM, got %q", s)
	}
	if _, err := fmt.Sscanf(s, "%2d:%2d", &h, &m); err != nil {
		return 0, fmt.Errorf("want HH:MM, got %q", s)
	}
	if m < 0 || m > 59 || h < 0 || h > 24 || (h == 24 && (m != 0 || !end)) {
		return 0, fmt.Errorf("%q is not a time of day", s)
	}
	return time.Duration(h)*time.Hour + time.Duration(m)*time.Minute, nil
}

// Contains reports whether the wall-clock time of t, in loc, falls in
// the window.
func (w NightWindow) Contains(t time.Time, loc *time.Location) bool {
	if loc != nil {
		t = t.In(loc)
	}
	h, m, s := t.Clock()
	d := time.Duration(h)*time.Hour + time.Duration(m)*time.Minute + time.Duration(s)*time.Second + time.Duration(t.Nanosecond())
	if w.Start < w.End {
		return d >= w.Start && d < w.End
	}
	return d >= w.Start || d < w.End
}

// Length returns the window's length.
func (w NightWindow) Length() time.Duration {
	if w.Start < w.End {
		return w.End - w.Start
	}
	return 24*time.Hour - w.Start + w.End
}

// String returns "HH:MM-HH:MM".
func (w NightWindow) String() string {
	f := func(d time.Duration) string {
		return fmt.Sprintf("%02d:%02d", int(d/time.Hour), int(d%time.Hour/time.Minute))
	}
	return f(w.Start) + "-" + f(w.End)
}

// Store is the time-series store. An empty URL means the embedded file
// store under DataDir.
type Store struct {
	URL       string
	Org       string
	Bucket    string
	TokenFile string
}

// Embedded reports whether the service uses its own file store.
func (s Store) Embedded() bool { return s.URL == "" }

// HTTP is the service's HTTP listener.
type HTTP struct {
	// Listen is host:port.
	Listen string
}

// Log configures the service log.
type Log struct {
	// Level is trace, debug, info, warn or error.
	Level string
	// Format is json (default) or console.
	Format string
}

// Severity says whether a problem rejects the configuration.
type Severity = network.Severity

// Error and Warning are the severities.
const (
	Error   = network.Error
	Warning = network.Warning
)

// Problem is one thing wrong with a configuration (or its network or
// sensors file), with its place.
type Problem struct {
	// File and Line place the problem (Line 0: the file as a whole).
	File string
	Line int
	// Subject names what the problem is about: "sensor P-104",
	// "sensors[3]", "zone north", "mqtt", "feature J-7" ...; "" for the
	// file as a whole. ID is the sensor, zone or feature id in it.
	Subject string
	ID      string
	// Key is the key or property at fault, "" if none.
	Key      string
	Message  string
	Severity Severity
}

// Place returns "file:line" or "file".
func (p Problem) Place() string {
	if p.Line > 0 {
		return fmt.Sprintf("%s:%d", p.File, p.Line)
	}
	return p.File
}

// String formats the problem on one line: "file:line: subject: key:
// message", parts not known left out, "warning: " before a warning's
// message.
func (p Problem) String() string {
	var b strings.Builder
	for _, s := range []string{p.Place(), p.Subject, p.Key} {
		if s != "" {
			b.WriteString(s)
			b.WriteString(": ")
		}
	}
	if p.Severity == Warning {
		b.WriteString("warning: ")
	}
	b.WriteString(p.Message)
	return b.String()
}

// ValidationError rejects a configuration and lists every error found.
type ValidationError struct {
	File     string
	Problems []Problem
}

// Error lists the problems one per line after a heading.
func (e *ValidationError) Error() string {
	var b strings.Builder
	if len(e.Problems) == 1 {
		fmt.Fprintf(&b, "configuration %s: 1 problem:", e.File)
	} else {
		fmt.Fprintf(&b, "configuration %s: %d problems:", e.File, len(e.Problems))
	}
	for _, p := range e.Problems {
		b.WriteString("\n  ")
		b.WriteString(p.String())
	}
	return b.String()
}

// HasErrors reports whether any problem is an Error.
func HasErrors(ps []Problem) bool {
	for _, p := range ps {
		if p.Severity == Error {
			return true
		}
	}
	return false
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }
