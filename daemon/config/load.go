package config

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"plumbline/internal/spell"
	"reflect"
	"regexp"
	"sort"
	"strconv"
	"strings"
	"time"
	_ "time/tzdata" // zones load on hosts without a zoneinfo database

	"go.yaml.in/yaml/v3"

	"plumbline/model/network"
	"plumbline/model/telemetry"
	"plumbline/model/units"
)

// Load decodes and checks a configuration held in data. name is its
// file name: used in messages, and its folder is the base of relative
// paths. On any error it returns a *ValidationError listing all of them.
func Load(data []byte, name string) (*Config, error) {
	c, probs := Parse(data, name)
	if HasErrors(probs) {
		return nil, &ValidationError{File: name, Problems: errorsOnly(probs)}
	}
	return c, nil
}

// LoadFile reads and checks the configuration file at path; see Load.
func LoadFile(path string) (*Config, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("configuration: %w", err)
	}
	return Load(data, path)
}

// Parse decodes and checks a configuration and returns it with every
// problem found (errors and warnings, by file and line), the network's
// and the sensors file's included. The Config is nil if any problem is
// an Error.
func Parse(data []byte, name string) (*Config, []Problem) {
	return parse(data, name, os.ReadFile)
}

// Inspect is Parse for tools such as `plumbline check`: it returns the
// configuration as far as it could be decoded even when there are
// errors (nil only when the file is not YAML at all), so that sections
// decoded elsewhere (alerts) can be checked too. Fields with errors
// hold their defaults or zero values; Network is nil if the network
// file has errors. Do not run a service on it.
func Inspect(data []byte, name string) (*Config, []Problem) {
	return parseKeep(data, name, os.ReadFile)
}

// parse is Parse with the function that reads the network and sensors
// files (the fuzz test confines it to testdata).
func parse(data []byte, name string, readFile func(string) ([]byte, error)) (*Config, []Problem) {
	c, probs := parseKeep(data, name, readFile)
	if HasErrors(probs) {
		return nil, probs
	}
	return c, probs
}

func parseKeep(data []byte, name string, readFile func(string) ([]byte, error)) (*Config, []Problem) {
	l := &loader{file: name, dir: filepath.Dir(name), readFile: readFile}
	c := l.load(data)
	sort.SliceStable(l.probs, func(i, j int) bool {
		a, b := l.probs[i], l.probs[j]
		if a.File != b.File {
			return a.File == name // the configuration first
		}
		return a.Line < b.Line
	})
	return c, l.probs
}

func errorsOnly(ps []Problem) []Problem {
	var out []Problem
	for _, p := range ps {
		if p.Severity == Error {
			out = append(out, p)
		}
	}
	return out
}

// The file as written. Durations and times are strings so that the
// messages about them are ours; optional numbers are pointers.
type rawConfig struct {
	Network string    `yaml:"network"`
	Step    string    `yaml:"step"`
	MQTT    rawMQTT   `yaml:"mqtt"`
	Sensors yaml.Node `yaml:"sensors"`
	Zones   []rawZone `yaml:"zones"`
	Store   rawStore  `yaml:"store"`
	DataDir string    `yaml:"data_dir"`
	Alerts  yaml.Node `yaml:"alerts"`
	HTTP    rawHTTP   `yaml:"http"`
	Log     rawLog    `yaml:"log"`
	// Calibration: see calibration.go.
	Calibration rawCalibration `yaml:"calibration"`
}

type rawMQTT struct {
	URL          string `yaml:"url"`
	ClientID     string `yaml:"client_id"`
	Username     string `yaml:"username"`
	PasswordFile string `yaml:"password_file"`
	CAFile       string `yaml:"ca_file"`
	CertFile     string `yaml:"cert_file"`
	KeyFile      string `yaml:"key_file"`
	KeepAlive    string `yaml:"keepalive"`
	QoS          *int   `yaml:"qos"`
}

type rawZone struct {
	ID                 string   `yaml:"id"`
	Inlets             []string `yaml:"inlets"`
	Outlets            []string `yaml:"outlets"`
	Night              string   `yaml:"night"`
	TimeZone           string   `yaml:"timezone"`
	NightUseLPS        *float64 `yaml:"night_use_lps"`
	MainsLengthKm      *float64 `yaml:"mains_length_km"`
	ServiceConnections *int     `yaml:"service_connections"`
	ServiceLengthKm    *float64 `yaml:"service_length_km"`
	AveragePressureM   *float64 `yaml:"average_pressure_m"`
}

type rawStore struct {
	URL       string `yaml:"url"`
	Org       string `yaml:"org"`
	Bucket    string `yaml:"bucket"`
	TokenFile string `yaml:"token_file"`
}

type rawHTTP struct {
	Listen string `yaml:"listen"`
}

type rawLog struct {
	Level  string `yaml:"level"`
	Format string `yaml:"format"`
}

type rawSensor struct {
	ID       string     `yaml:"id"`
	Quantity string     `yaml:"quantity"`
	At       string     `yaml:"at"`
	Topic    string     `yaml:"topic"`
	Unit     string     `yaml:"unit"`
	Accuracy *float64   `yaml:"accuracy"`
	Min      *float64   `yaml:"min"`
	Max      *float64   `yaml:"max"`
	Zone     string     `yaml:"zone"`
	Decode   *rawDecode `yaml:"decode"`
}

type rawDecode struct {
	Format     string `yaml:"format"`
	Value      string `yaml:"value"`
	Time       string `yaml:"time"`
	Unit       string `yaml:"unit"`
	TimeFormat string `yaml:"time_format"`
}

// sections names each raw type for messages about its keys.
var sections = map[string]struct {
	what string
	t    reflect.Type
}{
	"rawConfig":      {"the configuration", reflect.TypeFor[rawConfig]()},
	"rawMQTT":        {"mqtt", reflect.TypeFor[rawMQTT]()},
	"rawZone":        {"a zone", reflect.TypeFor[rawZone]()},
	"rawStore":       {"store", reflect.TypeFor[rawStore]()},
	"rawHTTP":        {"http", reflect.TypeFor[rawHTTP]()},
	"rawLog":         {"log", reflect.TypeFor[rawLog]()},
	"rawSensor":      {"a sensor", reflect.TypeFor[rawSensor]()},
	"rawDecode":      {"a decode block", reflect.TypeFor[rawDecode]()},
	"rawCalibration": {"calibration", reflect.TypeFor[rawCalibration]()},
}

// keysOf lists the yaml keys of a raw struct type.
func keysOf(t reflect.Type) []string {
	var ks []string
	for i := 0; i < t.NumField(); i++ {
		tag, _, _ := strings.Cut(t.Field(i).Tag.Get("yaml"), ",")
		if tag != "" && tag != "-" {
			ks = append(ks, tag)
		}
	}
	return ks
}

// loader holds the state of one Parse.
type loader struct {
	file     string
	dir      string
	readFile func(string) ([]byte, error)
	probs    []Problem
}

func (l *loader) add(p Problem) {
	if p.File == "" {
		p.File = l.file
	}
	l.probs = append(l.probs, p)
}

// errf adds an error at line of file (l.file when file is "").
func (l *loader) errf(file string, line int, subject, key, format string, args ...any) {
	l.add(Problem{File: file, Line: line, Subject: subject, Key: key, Message: fmt.Sprintf(format, args...)})
}

func (l *loader) warnf(file string, line int, subject, key, format string, args ...any) {
	l.add(Problem{File: file, Line: line, Subject: subject, Key: key, Message: fmt.Sprintf(format, args...), Severity: Warning})
}

// path resolves a path of the file against its folder.
func (l *loader) path(p string) string {
	if p == "" || filepath.IsAbs(p) {
		return p
	}
	return filepath.Join(l.dir, p)
}

var (
	reUnknownField = regexp.MustCompile(`^line (\d+): field (.+) not found in type [\w.]*\.(\w+)$`)
	reCannot       = regexp.MustCompile(`^line (\d+): cannot unmarshal !!(\w+) (.*?) ?into (.+)$`)
	reLine         = regexp.MustCompile(`^(?:yaml: )?line (\d+): (.*)$`)
)

// yamlProblems turns a yaml decoding error into problems of file, with
// line numbers and our words. doc (may be nil) finds the key at a line.
func (l *loader) yamlProblems(file string, err error, doc *yaml.Node, subject string) {
	var te *yaml.TypeError
	if errors.As(err, &te) {
		for _, e := range te.Errors {
			l.yamlMessage(file, e, doc, subject)
		}
		return
	}
	l.yamlMessage(file, err.Error(), doc, subject)
}

func (l *loader) yamlMessage(file, msg string, doc *yaml.Node, subject string) {
	if m := reUnknownField.FindStringSubmatch(msg); m != nil {
		line, _ := strconv.Atoi(m[1])
		sec := sections[m[3]]
		known := keysOf(sec.t)
		hint := ""
		if s := spell.Nearest(m[2], known); s != "" {
			hint = fmt.Sprintf(" (did you mean %s?)", s)
		} else {
			hint = fmt.Sprintf(" (known: %s)", strings.Join(known, ", "))
		}
		l.errf(file, line, subject, m[2], "unknown key in %s%s", sec.what, hint)
		return
	}
	if m := reCannot.FindStringSubmatch(msg); m != nil {
		line, _ := strconv.Atoi(m[1])
		key := keyAtLine(doc, line)
		l.errf(file, line, subject, key, "want %s, got %s", goTypeWords(m[4]), strings.TrimSpace(yamlKindWords(m[2])+" "+m[3]))
		return
	}
	if m := reLine.FindStringSubmatch(msg); m != nil {
		line, _ := strconv.Atoi(m[1])
		l.errf(file, line, "", "", "not valid YAML: %s", m[2])
		return
	}
	l.errf(file, 0, "", "", "not valid YAML: %s", strings.TrimPrefix(msg, "yaml: "))
}

func goTypeWords(t string) string {
	switch {
	case t == "string":
		return "a string"
	case strings.HasPrefix(t, "float"):
		return "a number"
	case strings.HasPrefix(t, "int") || strings.HasPrefix(t, "uint"):
		return "a whole number"
	case t == "bool":
		return "true or false"
	case strings.HasPrefix(t, "[]"):
		return "a list"
	case strings.HasPrefix(t, "config.raw"), strings.HasPrefix(t, "map"):
		return "a mapping"
	}
	return t
}

func yamlKindWords(tag string) string {
	switch tag {
	case "seq":
		return "a list"
	case "map":
		return "a mapping"
	case "str":
		return "the string"
	case "int", "float":
		return "the number"
	case "bool":
		return "the boolean"
	}
	return tag
}

// keyAtLine returns the dotted path of the mapping key whose value
// starts at line, or "".
func keyAtLine(doc *yaml.Node, line int) string {
	var found string
	var walk func(n *yaml.Node, path string)
	walk = func(n *yaml.Node, path string) {
		if n == nil || found != "" {
			return
		}
		switch n.Kind {
		case yaml.DocumentNode:
			for _, c := range n.Content {
				walk(c, path)
			}
		case yaml.MappingNode:
			for i := 0; i+1 < len(n.Content); i += 2 {
				k, v := n.Content[i], n.Content[i+1]
				p := k.Value
				if path != "" {
					p = path + "." + k.Value
				}
				if v.Line == line && (v.Kind == yaml.ScalarNode || k.Line == line) {
					found = p
					return
				}
				walk(v, p)
			}
		case yaml.SequenceNode:
			for i, c := range n.Content {
				walk(c, fmt.Sprintf("%s[%d]", path, i))
			}
		}
	}
	walk(doc, "")
	return found
}

// child returns the value node of key in mapping n, or nil.
func child(n *yaml.Node, key string) *yaml.Node {
	if n == nil {
		return nil
	}
	if n.Kind == yaml.DocumentNode && len(n.Content) > 0 {
		n = n.Content[0]
	}
	if n.Kind != yaml.MappingNode {
		return nil
	}
	for i := 0; i+1 < len(n.Content); i += 2 {
		if n.Content[i].Value == key {
			return n.Content[i+1]
		}
	}
	return nil
}

// at returns the node at a path of keys (string) and indexes (int).
func at(n *yaml.Node, path ...any) *yaml.Node {
	for _, p := range path {
		switch p := p.(type) {
		case string:
			n = child(n, p)
		case int:
			if n == nil || n.Kind != yaml.SequenceNode || p >= len(n.Content) {
				return nil
			}
			n = n.Content[p]
		}
		if n == nil {
			return nil
		}
	}
	return n
}

// lineOf returns the line of the node at path, or of the nearest
// ancestor that exists.
func lineOf(root *yaml.Node, path ...any) int {
	for k := len(path); k >= 0; k-- {
		if n := at(root, path[:k]...); n != nil {
			return n.Line
		}
	}
	return 0
}

func (l *loader) load(data []byte) *Config {
	var doc yaml.Node
	if err := yaml.Unmarshal(data, &doc); err != nil {
		l.yamlProblems(l.file, err, nil, "")
		return nil
	}
	if doc.Kind == 0 || len(doc.Content) == 0 {
		l.errf(l.file, 0, "", "", "empty configuration: want at least network and sensors")
		return nil
	}
	if doc.Content[0].Kind != yaml.MappingNode {
		l.errf(l.file, doc.Content[0].Line, "", "", "a configuration is a mapping of keys (network, step, mqtt, sensors, zones ...)")
		return nil
	}
	var raw rawConfig
	dec := yaml.NewDecoder(bytes.NewReader(data))
	dec.KnownFields(true)
	if err := dec.Decode(&raw); err != nil && !errors.Is(err, io.EOF) {
		l.yamlProblems(l.file, err, &doc, "")
		// keep going: the TypeError leaves the rest decoded
		var te *yaml.TypeError
		if !errors.As(err, &te) {
			return nil
		}
	}
	c := &Config{File: l.file, Decode: map[string]Decode{}}
	l.network(c, &raw, &doc)
	c.Step = l.duration(raw.Step, DefaultStep, &doc, "", "step", "step")
	if c.Network != nil && c.Step > c.Network.PatternStep {
		l.warnf(l.file, lineOf(&doc, "step"), "", "step", "%v is longer than the network's pattern step %v: demand patterns are skipped over", c.Step, c.Network.PatternStep)
	}
	l.mqtt(c, &raw, &doc)
	l.sensors(c, &raw, &doc)
	l.zones(c, &raw, &doc)
	l.store(c, &raw, &doc)
	c.DataDir = raw.DataDir
	if c.DataDir == "" {
		c.DataDir = DefaultDataDir
	}
	c.DataDir = l.path(c.DataDir)
	c.Alerts = raw.Alerts
	l.http(c, &raw, &doc)
	l.log(c, &raw, &doc)
	l.calibration(c, &raw, &doc)
	return c
}

// duration parses a duration key that must be positive.
func (l *loader) duration(s string, def time.Duration, doc *yaml.Node, subject, key string, path ...any) time.Duration {
	if s == "" {
		return def
	}
	d, err := time.ParseDuration(s)
	if err != nil {
		l.errf(l.file, lineOf(doc, path...), subject, key, "want a duration such as \"5m\" or \"1h\", got %q", s)
		return def
	}
	if d <= 0 {
		l.errf(l.file, lineOf(doc, path...), subject, key, "must be positive, got %s", s)
		return def
	}
	return d
}

func (l *loader) network(c *Config, raw *rawConfig, doc *yaml.Node) {
	if raw.Network == "" {
		l.errf(l.file, lineOf(doc, "network"), "", "network", "missing: the network file (GeoJSON) to model")
		return
	}
	c.NetworkPath = l.path(raw.Network)
	data, err := l.readFile(c.NetworkPath)
	if err != nil {
		l.errf(l.file, lineOf(doc, "network"), "", "network", "cannot read the network file: %v", err)
		return
	}
	n, probs := network.Parse(data, c.NetworkPath)
	for _, p := range probs {
		subject := ""
		if s := p.Subject(); s != "" {
			subject = "feature " + s
		}
		l.add(Problem{File: p.File, Line: p.Line, Subject: subject, ID: p.Feature, Key: p.Property,
			Message: p.Message, Severity: p.Severity})
	}
	c.Network = n
	if n == nil {
		l.errf(l.file, lineOf(doc, "network"), "", "network", "the network file %s has errors (listed with their places)", raw.Network)
	}
}

var mqttSchemes = []string{"tcp", "ssl", "tls", "ws", "wss"}

func (l *loader) mqtt(c *Config, raw *rawConfig, doc *yaml.Node) {
	r := raw.MQTT
	m := MQTT{URL: r.URL, ClientID: r.ClientID, Username: r.Username,
		PasswordFile: l.path(r.PasswordFile), CAFile: l.path(r.CAFile),
		CertFile: l.path(r.CertFile), KeyFile: l.path(r.KeyFile), QoS: DefaultQoS}
	if m.ClientID == "" {
		m.ClientID = DefaultClientID
	}
	m.KeepAlive = l.duration(r.KeepAlive, DefaultKeepAlive, doc, "mqtt", "keepalive", "mqtt", "keepalive")
	if r.QoS != nil {
		m.QoS = *r.QoS
		if m.QoS != 0 && m.QoS != 1 {
			l.errf(l.file, lineOf(doc, "mqtt", "qos"), "mqtt", "qos", "want 0 or 1, got %d", m.QoS)
		}
	}
	line := func(key string) int { return lineOf(doc, "mqtt", key) }
	if m.URL != "" {
		if err := checkURL(m.URL, mqttSchemes, true); err != nil {
			l.errf(l.file, line("url"), "mqtt", "url", "%v", err)
		}
	} else {
		for key, v := range map[string]string{"username": r.Username, "password_file": r.PasswordFile,
			"ca_file": r.CAFile, "cert_file": r.CertFile, "key_file": r.KeyFile} {
			if v != "" {
				l.warnf(l.file, line(key), "mqtt", key, "not used: without url the service runs its own broker on loopback")
			}
		}
	}
	// MQTT 3.1.1 §3.1.3.1: a server must accept client ids of 1 to 23
	// bytes of [0-9a-zA-Z]; it may refuse anything else.
	if len(m.ClientID) > 23 || strings.IndexFunc(m.ClientID, func(r rune) bool {
		return !(r >= '0' && r <= '9' || r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r == '-' || r == '_')
	}) >= 0 {
		l.warnf(l.file, line("client_id"), "mqtt", "client_id", "%q: a broker need only accept 1-23 letters and digits (MQTT 3.1.1 §3.1.3.1)", m.ClientID)
	}
	if r.PasswordFile != "" && r.Username == "" {
		l.warnf(l.file, line("password_file"), "mqtt", "password_file", "given without a username")
	}
	if (r.CertFile == "") != (r.KeyFile == "") {
		key := "cert_file"
		if r.CertFile != "" {
			key = "key_file"
		}
		l.errf(l.file, line(key), "mqtt", key, "missing: cert_file and key_file go together")
	}
	if m.URL != "" && (r.CAFile != "" || r.CertFile != "") {
		if s, _, _ := strings.Cut(m.URL, "://"); s == "tcp" || s == "ws" {
			l.warnf(l.file, line("url"), "mqtt", "url", "TLS files given but the scheme %s is not encrypted (use ssl, tls or wss)", s)
		}
	}
	for key, p := range map[string]string{"password_file": m.PasswordFile, "ca_file": m.CAFile,
		"cert_file": m.CertFile, "key_file": m.KeyFile} {
		l.fileExists(p, "mqtt", key, line(key))
	}
	c.MQTT = m
}

// fileExists warns when a secret or certificate file cannot be read now;
// the service reads it when it connects, so it is not an error here.
func (l *loader) fileExists(path, subject, key string, line int) {
	if path == "" {
		return
	}
	if _, err := os.Stat(path); err != nil {
		l.warnf(l.file, line, subject, key, "%s cannot be read now: %v", path, errors.Unwrap(err))
	}
}

func (l *loader) store(c *Config, raw *rawConfig, doc *yaml.Node) {
	r := raw.Store
	s := Store{URL: r.URL, Org: r.Org, Bucket: r.Bucket, TokenFile: l.path(r.TokenFile)}
	line := func(key string) int { return lineOf(doc, "store", key) }
	if s.URL != "" {
		if err := checkURL(s.URL, []string{"http", "https"}, false); err != nil {
			l.errf(l.file, line("url"), "store", "url", "%v", err)
		}
		if s.Org == "" {
			s.Org = DefaultOrg
		}
		if s.Bucket == "" {
			l.errf(l.file, line("bucket"), "store", "bucket", "missing: the bucket (database/retention policy on InfluxDB 1.8) to write to")
		}
		l.fileExists(s.TokenFile, "store", "token_file", line("token_file"))
	} else if r.Org != "" || r.Bucket != "" || r.TokenFile != "" {
		l.warnf(l.file, lineOf(doc, "store"), "store", "", "org, bucket and token_file are not used without url (the embedded store under data_dir is used)")
	}
	c.Store = s
}

// checkURL checks scheme://host[:port] with one of the schemes.
func checkURL(u string, schemes []string, noPath bool) error {
	scheme, rest, ok := strings.Cut(u, "://")
	if !ok {
		return fmt.Errorf("%q: want scheme://host:port with scheme %s", u, strings.Join(schemes, ", "))
	}
	known := false
	for _, s := range schemes {
		known = known || s == scheme
	}
	if !known {
		return fmt.Errorf("%q: unknown scheme %q (want %s)", u, scheme, strings.Join(schemes, ", "))
	}
	host, path, _ := strings.Cut(rest, "/")
	if host == "" {
		return fmt.Errorf("%q: no host", u)
	}
	if strings.Contains(host, "@") {
		return fmt.Errorf("%q: credentials do not go in the url (use username and password_file)", u)
	}
	h, port, err := splitHostPort(host)
	switch {
	case err == nil && h == "":
		return fmt.Errorf("%q: no host", u)
	case err == nil:
		if p, err := strconv.Atoi(port); err != nil || p < 1 || p > 65535 {
			return fmt.Errorf("%q: port %q is not a number from 1 to 65535", u, port)
		}
	case noPath && scheme != "ws" && scheme != "wss":
		// The MQTT client dials host:port as written: no default port.
		return fmt.Errorf("%q: no port (MQTT is usually 1883, 8883 with TLS)", u)
	}
	if noPath && path != "" && scheme != "ws" && scheme != "wss" {
		return fmt.Errorf("%q: a %s url has no path", u, scheme)
	}
	return nil
}

// splitHostPort splits host:port (with [v6]:port); err when no port.
func splitHostPort(s string) (string, string, error) {
	if strings.HasPrefix(s, "[") {
		end := strings.Index(s, "]")
		if end < 0 {
			return "", "", fmt.Errorf("bad IPv6 literal")
		}
		if len(s) == end+1 {
			return s[1:end], "", fmt.Errorf("no port")
		}
		if s[end+1] != ':' {
			return "", "", fmt.Errorf("bad IPv6 literal")
		}
		return s[1:end], s[end+2:], nil
	}
	i := strings.LastIndex(s, ":")
	if i < 0 {
		return s, "", fmt.Errorf("no port")
	}
	return s[:i], s[i+1:], nil
}

func (l *loader) http(c *Config, raw *rawConfig, doc *yaml.Node) {
	c.HTTP.Listen = raw.HTTP.Listen
	if c.HTTP.Listen == "" {
		c.HTTP.Listen = DefaultListen
		return
	}
	_, port, err := splitHostPort(c.HTTP.Listen)
	p, perr := strconv.Atoi(port)
	if err != nil || perr != nil || p < 0 || p > 65535 {
		l.errf(l.file, lineOf(doc, "http", "listen"), "http", "listen", "want host:port such as 127.0.0.1:8470, got %q", c.HTTP.Listen)
	}
}

func (l *loader) log(c *Config, raw *rawConfig, doc *yaml.Node) {
	c.Log = Log{Level: raw.Log.Level, Format: raw.Log.Format}
	if c.Log.Level == "" {
		c.Log.Level = DefaultLogLevel
	}
	if c.Log.Format == "" {
		c.Log.Format = DefaultLogFormat
	}
	switch c.Log.Level {
	case "trace", "debug", "info", "warn", "error":
	default:
		l.errf(l.file, lineOf(doc, "log", "level"), "log", "level", "unknown level %q (want trace, debug, info, warn or error)", c.Log.Level)
	}
	switch c.Log.Format {
	case "json", "console":
	default:
		l.errf(l.file, lineOf(doc, "log", "format"), "log", "format", "unknown format %q (want json or console)", c.Log.Format)
	}
}

// sensors reads the sensors list: inline, or from the file it names.
func (l *loader) sensors(c *Config, raw *rawConfig, doc *yaml.Node) {
	n := &raw.Sensors
	file := l.file
	switch {
	case n.Kind == 0 || (n.Kind == yaml.ScalarNode && n.Tag == "!!null"):
		l.errf(l.file, 0, "", "sensors", "missing: a list of sensors, or the path of a file holding one")
		return
	case n.Kind == yaml.ScalarNode:
		path := l.path(n.Value)
		c.SensorsFile = path
		data, err := l.readFile(path)
		if err != nil {
			l.errf(l.file, n.Line, "", "sensors", "cannot read the sensors file: %v", err)
			return
		}
		var sdoc yaml.Node
		if err := yaml.Unmarshal(data, &sdoc); err != nil {
			l.yamlProblems(path, err, nil, "")
			return
		}
		file = path
		root := &sdoc
		if len(sdoc.Content) > 0 {
			root = sdoc.Content[0]
		}
		if root.Kind == yaml.MappingNode { // a configuration: take its sensors
			root = child(root, "sensors")
		}
		if root == nil || root.Kind != yaml.SequenceNode {
			l.errf(path, 0, "", "", "want a list of sensors (or a mapping with a sensors list)")
			return
		}
		n = root
	case n.Kind != yaml.SequenceNode:
		l.errf(l.file, n.Line, "", "sensors", "want a list of sensors or the path of a file holding one")
		return
	}
	seen := map[string]int{}
	topics := map[string]string{}
	for i, item := range n.Content {
		l.sensor(c, file, i, item, seen, topics)
	}
}

// unitMessage says why unit is not a unit of q: the hint of units'
// error (a prefix letter in the wrong case, the quantity the unit
// belongs to, a near spelling), else the units known for q.
func unitMessage(q telemetry.Quantity, unit string, err error) string {
	var ue *units.UnitError
	if errors.As(err, &ue) {
		return fmt.Sprintf("%q is not a %s unit (%s)", unit, q, ue.Detail())
	}
	return fmt.Sprintf("%q is not a %s unit (known: %s)", unit, q, strings.Join(units.Names(q), ", "))
}

// sensorKeys are the keys of a sensor entry, shared with the scenario file.
var sensorKeys = keysOf(reflect.TypeFor[rawSensor]())

func (l *loader) sensor(c *Config, file string, i int, item *yaml.Node, seen map[string]int, topics map[string]string) {
	subject := fmt.Sprintf("sensors[%d]", i)
	if item.Kind != yaml.MappingNode {
		l.errf(file, item.Line, subject, "", "a sensor is a mapping (id, quantity, at, topic, unit, accuracy)")
		return
	}
	var r rawSensor
	err := item.Decode(&r)
	if r.ID != "" {
		subject = "sensor " + r.ID
	}
	if err != nil {
		l.yamlProblems(file, err, item, subject)
	}
	// KnownFields does not reach a node decoded on its own: check keys here.
	l.checkKeys(file, item, sensorKeys, subject, "a sensor")
	if d := child(item, "decode"); d != nil && d.Kind == yaml.MappingNode {
		l.checkKeys(file, d, keysOf(reflect.TypeFor[rawDecode]()), subject, "a decode block")
	}
	line := func(key string) int { return lineOf(item, key) }
	errf := func(key, format string, args ...any) {
		l.add(Problem{File: file, Line: line(key), Subject: subject, ID: r.ID, Key: key, Message: fmt.Sprintf(format, args...)})
	}
	warnf := func(key, format string, args ...any) {
		l.add(Problem{File: file, Line: line(key), Subject: subject, ID: r.ID, Key: key, Message: fmt.Sprintf(format, args...), Severity: Warning})
	}
	if r.ID == "" {
		errf("id", "missing: every sensor needs a unique id")
	} else {
		if first, dup := seen[r.ID]; dup {
			errf("id", "duplicate sensor id %q (first at line %d)", r.ID, first)
		} else {
			seen[r.ID] = item.Line
		}
	}
	s := telemetry.Sensor{ID: r.ID, At: r.At, Topic: r.Topic, Unit: r.Unit, Zone: r.Zone}
	q, ok := telemetry.ParseQuantity(r.Quantity)
	switch {
	case r.Quantity == "":
		errf("quantity", "missing: pressure, flow, level or head")
	case !ok:
		errf("quantity", "unknown quantity %q (want pressure, flow, level or head)", r.Quantity)
	}
	s.Quantity = q
	// at: a node for pressure, level and head; a link for flow.
	if r.At == "" {
		errf("at", "missing: the node (or, for flow, the link) the sensor measures")
	} else if net := c.Network; net != nil && ok {
		ni, isNode := net.NodeIndex(r.At)
		li, isLink := net.LinkIndex(r.At)
		switch {
		case q == telemetry.Flow && isLink:
			if s.Zone == "" {
				s.Zone = linkZone(net, li)
			}
		case q == telemetry.Flow && isNode:
			errf("at", "%q is a node; a flow sensor measures a link", r.At)
		case q != telemetry.Flow && isLink:
			errf("at", "%q is a link; a %s sensor measures a node", r.At, q)
		case q != telemetry.Flow && isNode:
			nd := &net.Nodes[ni]
			if q == telemetry.Level && nd.Kind == network.Junction {
				errf("at", "%q is a junction; a level sensor measures a tank or reservoir", r.At)
			}
			if s.Zone == "" {
				s.Zone = nd.Zone
			}
		default:
			errf("at", "%q is not a node or link of the network", r.At)
		}
	}
	// unit: known for the quantity; default canonical.
	if ok {
		if r.Unit == "" {
			s.Unit = q.CanonicalUnit()
		} else if sym, err := units.Symbol(q, r.Unit); err != nil {
			errf("unit", "%s", unitMessage(q, r.Unit, err))
		} else {
			s.Unit = sym
		}
	}
	if r.Accuracy != nil {
		s.Accuracy = *r.Accuracy
		if !(s.Accuracy >= 0) || !finite(s.Accuracy) {
			errf("accuracy", "must not be negative, got %g", s.Accuracy)
		}
	}
	switch {
	case r.Min != nil && r.Max != nil:
		s.Min, s.Max = *r.Min, *r.Max
		if !(s.Min < s.Max) {
			errf("max", "min %g must be below max %g", s.Min, s.Max)
		}
	case r.Min != nil:
		s.Min, s.Max = *r.Min, math.Inf(1)
	case r.Max != nil:
		s.Min, s.Max = math.Inf(-1), *r.Max
	}
	// topic: an MQTT topic or filter, optional {sensor} capture.
	if r.Topic == "" {
		errf("topic", "missing: the MQTT topic (or filter) the readings arrive on")
	} else if err := CheckTopicFilter(r.Topic); err != nil {
		errf("topic", "%v", err)
	} else if !strings.ContainsAny(r.Topic, "+#{") {
		if other, dup := topics[r.Topic]; dup {
			errf("topic", "%q is also the topic of sensor %s: a topic names one sensor", r.Topic, other)
		} else {
			topics[r.Topic] = r.ID
		}
	}
	if r.Zone != "" && c.Network != nil && !hasZone(c.Network, r.Zone) {
		warnf("zone", "zone %q has no nodes in the network", r.Zone)
	}
	if r.Decode != nil {
		d := Decode{Format: r.Decode.Format, Value: r.Decode.Value, Time: r.Decode.Time,
			Unit: r.Decode.Unit, TimeFormat: r.Decode.TimeFormat}
		if d.Format == "" {
			d.Format = "auto"
		}
		if d.TimeFormat == "" {
			d.TimeFormat = "auto"
		}
		dl := func() int { return lineOf(item, "decode") }
		switch d.Format {
		case "auto", "number":
		case "json":
			if d.Value == "" {
				l.add(Problem{File: file, Line: dl(), Subject: subject, ID: r.ID, Key: "decode.value", Message: "missing: format json needs the value's field path"})
			}
		default:
			l.add(Problem{File: file, Line: lineOf(item, "decode", "format"), Subject: subject, ID: r.ID, Key: "decode.format",
				Message: fmt.Sprintf("unknown format %q (want auto, number or json)", d.Format)})
		}
		switch d.TimeFormat {
		case "auto", "rfc3339", "unix", "unix_ms":
		default:
			l.add(Problem{File: file, Line: lineOf(item, "decode", "time_format"), Subject: subject, ID: r.ID, Key: "decode.time_format",
				Message: fmt.Sprintf("unknown time format %q (want auto, rfc3339, unix or unix_ms)", d.TimeFormat)})
		}
		for key, p := range map[string]string{"value": d.Value, "time": d.Time, "unit": d.Unit} {
			if err := checkFieldPath(p); err != nil {
				l.add(Problem{File: file, Line: lineOf(item, "decode", key), Subject: subject, ID: r.ID, Key: "decode." + key, Message: err.Error()})
			}
		}
		if r.ID != "" {
			c.Decode[r.ID] = d
		}
	}
	c.Sensors = append(c.Sensors, s)
}

// checkFieldPath checks a dotted JSON field path ("data.p1",
// "readings[0].v"); "" is allowed (not used).
func checkFieldPath(p string) error {
	if p == "" {
		return nil
	}
	for _, seg := range strings.Split(p, ".") {
		name, idx, hasIdx := strings.Cut(seg, "[")
		if name == "" && !hasIdx {
			return fmt.Errorf("field path %q has an empty segment", p)
		}
		for hasIdx {
			var rest string
			var ok bool
			idx, rest, ok = strings.Cut(idx, "]")
			if _, err := strconv.Atoi(idx); !ok || err != nil {
				return fmt.Errorf("field path %q: want [index] with a whole number", p)
			}
			if rest == "" {
				break
			}
			if !strings.HasPrefix(rest, "[") {
				return fmt.Errorf("field path %q: unexpected %q after an index", p, rest)
			}
			idx = rest[1:]
		}
	}
	return nil
}

// linkZone is the zone of a link: its ends' zone when they agree, else
// the zone of the end the flow enters (To), else From's.
func linkZone(n *network.Network, li int) string {
	l := &n.Links[li]
	from, to := n.Nodes[l.From].Zone, n.Nodes[l.To].Zone
	if to != "" {
		return to
	}
	return from
}

func hasZone(n *network.Network, zone string) bool {
	for _, z := range n.Zones() {
		if z == zone {
			return true
		}
	}
	return false
}

// checkKeys reports keys of mapping m not in known.
func (l *loader) checkKeys(file string, m *yaml.Node, known []string, subject, what string) {
	for i := 0; i+1 < len(m.Content); i += 2 {
		k := m.Content[i]
		if slicesContains(known, k.Value) || k.Tag == "!!merge" {
			continue
		}
		hint := fmt.Sprintf(" (known: %s)", strings.Join(known, ", "))
		if s := spell.Nearest(k.Value, known); s != "" {
			hint = fmt.Sprintf(" (did you mean %s?)", s)
		}
		l.errf(file, k.Line, subject, k.Value, "unknown key in %s%s", what, hint)
	}
}

func slicesContains(ss []string, s string) bool {
	for _, x := range ss {
		if x == s {
			return true
		}
	}
	return false
}

func (l *loader) zones(c *Config, raw *rawConfig, doc *yaml.Node) {
	seen := map[string]int{}
	for i, r := range raw.Zones {
		subject := fmt.Sprintf("zones[%d]", i)
		if r.ID != "" {
			subject = "zone " + r.ID
		}
		line := func(key string) int { return lineOf(doc, "zones", i, key) }
		errf := func(key, format string, args ...any) {
			l.add(Problem{File: l.file, Line: line(key), Subject: subject, ID: r.ID, Key: key, Message: fmt.Sprintf(format, args...)})
		}
		warnf := func(key, format string, args ...any) {
			l.add(Problem{File: l.file, Line: line(key), Subject: subject, ID: r.ID, Key: key, Message: fmt.Sprintf(format, args...), Severity: Warning})
		}
		z := Zone{ID: r.ID, Inlets: r.Inlets, Outlets: r.Outlets}
		if r.ID == "" {
			errf("id", "missing: every zone needs an id")
		} else if first, dup := seen[r.ID]; dup {
			errf("id", "duplicate zone id %q (first at line %d)", r.ID, first)
		} else {
			seen[r.ID] = line("id")
		}
		if r.ID != "" && c.Network != nil && !hasZone(c.Network, r.ID) {
			errf("id", "no node of the network is in zone %q (zones there: %s)", r.ID, strings.Join(c.Network.Zones(), ", "))
		}
		used := map[string]string{}
		for _, side := range []struct {
			key string
			ids []string
		}{{"inlets", r.Inlets}, {"outlets", r.Outlets}} {
			for _, id := range side.ids {
				if prev, dup := used[id]; dup {
					errf(side.key, "sensor %s is listed twice (in %s and %s)", id, prev, side.key)
					continue
				}
				used[id] = side.key
				s, ok := c.Sensor(id)
				switch {
				case !ok:
					errf(side.key, "%q is not a sensor of this configuration", id)
				case s.Quantity != telemetry.Flow:
					errf(side.key, "sensor %s measures %s; zone %s need flow sensors", id, s.Quantity, side.key)
				case c.Network != nil && r.ID != "":
					if li, ok := c.Network.LinkIndex(s.At); ok {
						lk := &c.Network.Links[li]
						from, to := &c.Network.Nodes[lk.From], &c.Network.Nodes[lk.To]
						fz, tz := from.Zone, to.Zone
						if from.IsFixedHead() || to.IsFixedHead() {
							break // a source's outlet meter: in or out of the zone alike
						}
						if fz == tz {
							warnf(side.key, "sensor %s is on link %s, which does not cross the zone boundary (both ends in zone %q)", id, s.At, fz)
						} else if side.key == "inlets" && tz != r.ID && fz == r.ID {
							warnf(side.key, "sensor %s on link %s measures flow out of zone %s (positive From→To): an outlet?", id, s.At, r.ID)
						} else if side.key == "outlets" && fz != r.ID && tz == r.ID {
							warnf(side.key, "sensor %s on link %s measures flow into zone %s (positive From→To): an inlet?", id, s.At, r.ID)
						}
					}
				}
			}
		}
		if len(r.Inlets) == 0 {
			warnf("inlets", "no inlet flow sensors: no zone balance or night flow for this zone")
		}
		night := r.Night
		if night == "" {
			night = DefaultNight
		}
		w, err := ParseNightWindow(night)
		if err != nil {
			errf("night", "%v", err)
		}
		z.Night = w
		z.TimeZoneName = r.TimeZone
		if z.TimeZoneName == "" {
			z.TimeZoneName = DefaultTimeZone
		}
		loc, err := time.LoadLocation(z.TimeZoneName)
		if err != nil || z.TimeZoneName == "Local" {
			errf("timezone", "%q is not an IANA time zone name (such as UTC or Europe/Lisbon)", z.TimeZoneName)
			loc = time.UTC
		}
		z.TimeZone = loc
		for _, f := range []struct {
			key string
			p   *float64
			dst *float64
		}{{"night_use_lps", r.NightUseLPS, &z.NightUseLPS}, {"mains_length_km", r.MainsLengthKm, &z.MainsLengthKm},
			{"service_length_km", r.ServiceLengthKm, &z.ServiceLengthKm}, {"average_pressure_m", r.AveragePressureM, &z.AveragePressureM}} {
			if f.p == nil {
				continue
			}
			*f.dst = *f.p
			if !(*f.p >= 0) || !finite(*f.p) {
				errf(f.key, "must not be negative, got %g", *f.p)
			}
		}
		if r.ServiceConnections != nil {
			z.ServiceConnections = *r.ServiceConnections
			if z.ServiceConnections < 0 {
				errf("service_connections", "must not be negative, got %d", z.ServiceConnections)
			}
		}
		c.Zones = append(c.Zones, z)
	}
}
