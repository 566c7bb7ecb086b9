package scenario

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"time"

	"go.yaml.in/yaml/v3"

	"plumbline/model/finding"
	"plumbline/model/telemetry"
	"plumbline/model/units"
)

// rawScenario is the file as written, before conversion. Times and
// durations stay strings so that their errors carry a line; numbers that
// may be absent are pointers.
type rawScenario struct {
	Start           string             `yaml:"start"`
	Duration        string             `yaml:"duration"`
	Step            string             `yaml:"step"`
	Seed            int64              `yaml:"seed"`
	Sensors         yaml.Node          `yaml:"sensors"`
	Noise           map[string]float64 `yaml:"noise"`
	Events          []rawEvent         `yaml:"events"`
	LoggingInterval string             `yaml:"logging_interval"`
	Resolution      map[string]float64 `yaml:"resolution"`
	MissingFraction float64            `yaml:"missing_fraction"`
	LateFraction    float64            `yaml:"late_fraction"`
	MaxDelay        string             `yaml:"max_delay"`
	DemandNoise     float64            `yaml:"demand_noise"`
	DailyVariation  float64            `yaml:"daily_variation"`
	WeekendPattern  string             `yaml:"weekend_pattern"`
	TrueNetwork     string             `yaml:"true_network"`
}

// rawEvent is one event as written.
type rawEvent struct {
	Kind         string   `yaml:"kind"`
	At           string   `yaml:"at"`
	Start        string   `yaml:"start"`
	End          string   `yaml:"end"`
	SizeLPS      *float64 `yaml:"size_lps"`
	Ramp         string   `yaml:"ramp"`
	Exponent     *float64 `yaml:"exponent"`
	Burst        bool     `yaml:"burst"`
	OpenFraction *float64 `yaml:"open_fraction"`
	Mode         string   `yaml:"mode"`
	Amount       *float64 `yaml:"amount"`
	Every        string   `yaml:"every"`
}

// rawSensor is one sensor as written (the service configuration's form).
type rawSensor struct {
	ID       string    `yaml:"id"`
	Quantity string    `yaml:"quantity"`
	At       string    `yaml:"at"`
	Topic    string    `yaml:"topic"`
	Unit     string    `yaml:"unit"`
	Accuracy float64   `yaml:"accuracy"`
	Min      *float64  `yaml:"min"`
	Max      *float64  `yaml:"max"`
	Zone     string    `yaml:"zone"`
	Decode   yaml.Node `yaml:"decode"`
}

// sensorKeys are the keys a sensor entry may have.
var sensorKeys = []string{"id", "quantity", "at", "topic", "unit", "accuracy", "min", "max", "zone", "decode"}

// LoadFile reads and checks the scenario file at path. See Load.
func LoadFile(path string) (*Scenario, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("scenario: %w", err)
	}
	return Load(data, path)
}

// Load parses a scenario from data; name is the file name used in messages
// and the base for relative paths (sensors file, true_network). It returns
// the scenario with everything that parsed and, if anything is wrong, an
// error joining one *Error per problem. The checks that need the network
// are Validate's.
func Load(data []byte, name string) (*Scenario, error) {
	var errs []error
	add := func(line int, format string, args ...any) {
		errs = append(errs, &Error{File: name, Line: line, Msg: fmt.Sprintf(format, args...)})
	}

	// First pass: the node tree, for the line of every key.
	var doc yaml.Node
	if err := yaml.Unmarshal(data, &doc); err != nil {
		return nil, yamlError(name, err)
	}
	if doc.Kind != yaml.DocumentNode || len(doc.Content) == 0 {
		return nil, &Error{File: name, Msg: "empty scenario"}
	}
	top := doc.Content[0]
	if top.Kind != yaml.MappingNode {
		return nil, &Error{File: name, Line: top.Line, Msg: "a scenario is a mapping of keys (start, duration, step, sensors, events ...)"}
	}

	// Second pass: the typed decode, unknown keys rejected.
	var raw rawScenario
	dec := yaml.NewDecoder(bytes.NewReader(data))
	dec.KnownFields(true)
	if err := dec.Decode(&raw); err != nil && !errors.Is(err, io.EOF) {
		errs = append(errs, yamlErrors(name, err)...)
	}

	s := &Scenario{File: name, Seed: raw.Seed, lines: keyLines(top)}
	dir := filepath.Dir(name)

	// bad marks the keys that did not parse, so that Validate does not
	// report them a second time as missing.
	bad := func(key string, ok bool) {
		if !ok {
			if s.bad == nil {
				s.bad = map[string]bool{}
			}
			s.bad[key] = true
		}
	}
	n := len(errs)
	s.Start = parseTime(raw.Start, time.Time{}, "start", s.lines["start"], add)
	bad("start", len(errs) == n)
	n = len(errs)
	s.Duration = parseDuration(raw.Duration, "duration", s.lines["duration"], add)
	bad("duration", len(errs) == n)
	n = len(errs)
	s.Step = parseDuration(raw.Step, "step", s.lines["step"], add)
	bad("step", len(errs) == n)
	if raw.Step == "" {
		s.Step = DefaultStep
	}
	s.LoggingInterval = parseDuration(raw.LoggingInterval, "logging_interval", s.lines["logging_interval"], add)
	if raw.LoggingInterval == "" {
		s.LoggingInterval = s.Step
		bad("logging_interval", s.Step > 0) // a bad step is reported once
	}
	s.MaxDelay = parseDuration(raw.MaxDelay, "max_delay", s.lines["max_delay"], add)
	if raw.MaxDelay == "" && raw.LateFraction > 0 {
		s.MaxDelay = s.Step
	}
	s.MissingFraction = raw.MissingFraction
	s.LateFraction = raw.LateFraction
	s.DemandNoise = raw.DemandNoise
	s.DailyVariation = raw.DailyVariation
	s.WeekendPattern = raw.WeekendPattern
	if raw.TrueNetwork != "" {
		s.TrueNetwork = relative(dir, raw.TrueNetwork)
	}
	s.Noise = quantityMap(raw.Noise, "noise", mapNode(top, "noise"), add)
	s.Resolution = quantityMap(raw.Resolution, "resolution", mapNode(top, "resolution"), add)

	// Sensors: inline list, or a path to a file holding one.
	sn := mapNode(top, "sensors")
	switch {
	case sn == nil:
		add(0, "sensors is missing (a list of sensors or the path of a file holding one)")
	case sn.Kind == yaml.ScalarNode && sn.Tag != "!!null":
		s.SensorsFile = relative(dir, sn.Value)
		sensors, lines, err := loadSensorsFile(s.SensorsFile)
		if err != nil {
			errs = append(errs, fmt.Errorf("%s:%d: sensors: %w", name, sn.Line, err))
		}
		s.Sensors, s.SensorLines = sensors, lines
	case sn.Kind == yaml.SequenceNode:
		var serrs []error
		s.Sensors, s.SensorLines, serrs = decodeSensors(sn, name)
		errs = append(errs, serrs...)
	default:
		add(sn.Line, "sensors must be a list of sensors or the path of a file holding one")
	}

	// Events, with the line of each key.
	var evNodes []*yaml.Node
	if en := mapNode(top, "events"); en != nil && en.Kind == yaml.SequenceNode {
		evNodes = en.Content
	}
	for i, re := range raw.Events {
		e := Event{
			Kind:  finding.Kind(re.Kind),
			At:    re.At,
			Burst: re.Burst,
			Mode:  FaultMode(re.Mode),
		}
		if i < len(evNodes) {
			e.Line = evNodes[i].Line
			e.lines = keyLines(evNodes[i])
		}
		where := fmt.Sprintf("events[%d]", i)
		n := len(errs)
		e.Start = parseTime(re.Start, s.Start, where+" start", e.line("start"), add)
		if len(errs) > n {
			e.badStart = true
		}
		if re.End != "" {
			n = len(errs)
			e.End = parseTime(re.End, s.Start, where+" end", e.line("end"), add)
			if len(errs) > n {
				e.badEnd = true
			}
		}
		e.Ramp = parseDuration(re.Ramp, where+" ramp", e.line("ramp"), add)
		e.Every = parseDuration(re.Every, where+" every", e.line("every"), add)
		if re.SizeLPS != nil {
			e.SizeLPS = *re.SizeLPS
		}
		if re.Exponent != nil {
			e.Exponent = *re.Exponent
		}
		if re.OpenFraction != nil {
			e.OpenFraction = *re.OpenFraction
		}
		if re.Amount != nil {
			e.Amount = *re.Amount
		}
		if e.Kind == finding.SensorFault && e.Mode == Spike && e.Every == 0 {
			e.Every = DefaultSpikeEvery
		}
		s.Events = append(s.Events, e)
	}

	errs = append(errs, Validate(s, nil)...)
	return s, errors.Join(errs...)
}

// loadSensorsFile reads a sensors list from a file: a YAML list, or a
// mapping (a service configuration) whose `sensors` key holds the list.
func loadSensorsFile(path string) ([]telemetry.Sensor, []int, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, nil, err
	}
	var doc yaml.Node
	if err := yaml.Unmarshal(data, &doc); err != nil {
		return nil, nil, yamlError(path, err)
	}
	if doc.Kind != yaml.DocumentNode || len(doc.Content) == 0 {
		return nil, nil, &Error{File: path, Msg: "empty sensors file"}
	}
	n := doc.Content[0]
	if n.Kind == yaml.MappingNode {
		n = mapNode(n, "sensors")
		if n == nil {
			return nil, nil, &Error{File: path, Line: doc.Content[0].Line, Msg: "no sensors key and not a list of sensors"}
		}
	}
	if n.Kind != yaml.SequenceNode {
		return nil, nil, &Error{File: path, Line: n.Line, Msg: "sensors must be a list"}
	}
	sensors, lines, errs := decodeSensors(n, path)
	return sensors, lines, errors.Join(errs...)
}

// decodeSensors converts a sequence node of sensor mappings, rejecting
// unknown keys (the node decoder does not honour KnownFields, so the keys
// are checked here).
func decodeSensors(seq *yaml.Node, file string) ([]telemetry.Sensor, []int, []error) {
	var errs []error
	add := func(line int, format string, args ...any) {
		errs = append(errs, &Error{File: file, Line: line, Msg: fmt.Sprintf(format, args...)})
	}
	var out []telemetry.Sensor
	var lines []int
	for i, item := range seq.Content {
		where := fmt.Sprintf("sensors[%d]", i)
		if item.Kind != yaml.MappingNode {
			add(item.Line, "%s: a sensor is a mapping (id, quantity, at, topic, unit, accuracy)", where)
			continue
		}
		for k := 0; k+1 < len(item.Content); k += 2 {
			key := item.Content[k]
			if !contains(sensorKeys, key.Value) {
				add(key.Line, "%s: unknown key %q (known: %s)", where, key.Value, strings.Join(sensorKeys, ", "))
			}
		}
		var rs rawSensor
		if err := item.Decode(&rs); err != nil {
			for _, e := range yamlErrors(file, err) {
				errs = append(errs, fmt.Errorf("%s (%s)", e, where))
			}
		}
		q, _ := telemetry.ParseQuantity(rs.Quantity)
		sn := telemetry.Sensor{
			ID:       rs.ID,
			Quantity: q,
			At:       rs.At,
			Topic:    rs.Topic,
			Unit:     rs.Unit,
			Accuracy: rs.Accuracy,
			Zone:     rs.Zone,
		}
		if rs.ID != "" {
			where = fmt.Sprintf("sensors[%d] %s", i, rs.ID)
		}
		if rs.ID == "" {
			add(item.Line, "%s: id is missing", where)
		}
		if rs.Quantity == "" {
			add(item.Line, "%s: quantity is missing (pressure, flow, level or head)", where)
		} else if q == 0 {
			add(valueLine(item, "quantity"), "%s: unknown quantity %q (pressure, flow, level or head)", where, rs.Quantity)
		}
		if rs.At == "" {
			add(item.Line, "%s: at is missing (a node id, or a link id for flow)", where)
		}
		if rs.Accuracy < 0 || math.IsNaN(rs.Accuracy) {
			add(valueLine(item, "accuracy"), "%s: accuracy must not be negative", where)
		}
		if sn.Unit == "" && q != 0 {
			sn.Unit = q.CanonicalUnit()
		}
		if rs.Unit != "" && q != 0 {
			if _, err := units.Lookup(q, rs.Unit); err != nil {
				detail := "known: " + strings.Join(units.Names(q), ", ")
				var ue *units.UnitError
				if errors.As(err, &ue) {
					detail = ue.Detail()
				}
				add(valueLine(item, "unit"), "%s: unit %q is not a %s unit (%s)", where, rs.Unit, q, detail)
			}
		}
		switch {
		case rs.Min != nil && rs.Max != nil:
			sn.Min, sn.Max = *rs.Min, *rs.Max
			if !(sn.Min < sn.Max) {
				add(valueLine(item, "max"), "%s: min %g must be below max %g", where, sn.Min, sn.Max)
			}
		case rs.Min != nil:
			sn.Min, sn.Max = *rs.Min, math.Inf(1)
		case rs.Max != nil:
			sn.Min, sn.Max = math.Inf(-1), *rs.Max
		}
		out = append(out, sn)
		lines = append(lines, item.Line)
	}
	return out, lines, errs
}

// quantityMap converts a map keyed by quantity word, reporting unknown
// words and negative values.
func quantityMap(m map[string]float64, key string, node *yaml.Node, add func(int, string, ...any)) map[telemetry.Quantity]float64 {
	if len(m) == 0 {
		return nil
	}
	out := make(map[telemetry.Quantity]float64, len(m))
	lines := keyLines(node)
	for word, v := range m {
		q, ok := telemetry.ParseQuantity(word)
		if !ok {
			add(lines[word], "%s: unknown quantity %q (pressure, flow, level or head)", key, word)
			continue
		}
		if v < 0 || math.IsNaN(v) || math.IsInf(v, 0) {
			add(lines[word], "%s: %s must be a finite value ≥ 0, got %g", key, word, v)
			continue
		}
		out[q] = v
	}
	return out
}

// parseTime parses an RFC 3339 time, or a Go duration as an offset from
// base (when base is set). An empty string gives the zero time.
func parseTime(v string, base time.Time, what string, line int, add func(int, string, ...any)) time.Time {
	if v == "" {
		return time.Time{}
	}
	if t, err := time.Parse(time.RFC3339, v); err == nil {
		return t.UTC()
	}
	if !base.IsZero() {
		if d, err := time.ParseDuration(v); err == nil {
			return base.Add(d)
		}
		add(line, "%s: %q is neither an RFC 3339 time nor an offset (Go duration) from the scenario start", what, v)
		return time.Time{}
	}
	add(line, "%s: %q is not an RFC 3339 time (2026-03-01T00:00:00Z)", what, v)
	return time.Time{}
}

// parseDuration parses a Go duration; an empty string gives 0.
func parseDuration(v, what string, line int, add func(int, string, ...any)) time.Duration {
	if v == "" {
		return 0
	}
	d, err := time.ParseDuration(v)
	if err != nil {
		add(line, "%s: %q is not a Go duration (5m, 36h)", what, v)
		return 0
	}
	return d
}

// relative resolves p against dir unless p is absolute.
func relative(dir, p string) string {
	if filepath.IsAbs(p) {
		return p
	}
	return filepath.Join(dir, p)
}

// mapNode returns the value node of key in mapping m, or nil.
func mapNode(m *yaml.Node, key string) *yaml.Node {
	if m == nil || m.Kind != yaml.MappingNode {
		return nil
	}
	for k := 0; k+1 < len(m.Content); k += 2 {
		if m.Content[k].Value == key {
			return m.Content[k+1]
		}
	}
	return nil
}

// valueLine returns the line of key's value in mapping m, else m's line.
func valueLine(m *yaml.Node, key string) int {
	if v := mapNode(m, key); v != nil {
		return v.Line
	}
	return m.Line
}

// keyLines returns the line of each key of mapping m.
func keyLines(m *yaml.Node) map[string]int {
	out := map[string]int{}
	if m == nil || m.Kind != yaml.MappingNode {
		return out
	}
	for k := 0; k+1 < len(m.Content); k += 2 {
		out[m.Content[k].Value] = m.Content[k].Line
	}
	return out
}

// unknownRe matches the decoder's message for a key no field takes.
var unknownRe = regexp.MustCompile(`^field (\S+) not found in type scenario\.raw(\w+)$`)

// lineRe finds the "line N: " the YAML decoder puts in its messages.
var lineRe = regexp.MustCompile(`^(?:yaml: )?line (\d+): (.*)$`)

// yamlError turns a YAML syntax error into an *Error at its line.
func yamlError(file string, err error) error {
	errs := yamlErrors(file, err)
	if len(errs) == 1 {
		return errs[0]
	}
	return errors.Join(errs...)
}

// yamlErrors splits a YAML decode error into one *Error per message.
func yamlErrors(file string, err error) []error {
	var te *yaml.TypeError
	var msgs []string
	if errors.As(err, &te) {
		msgs = te.Errors
	} else {
		msgs = []string{err.Error()}
	}
	out := make([]error, 0, len(msgs))
	for _, m := range msgs {
		if sm := lineRe.FindStringSubmatch(m); sm != nil {
			line, _ := strconv.Atoi(sm[1])
			msg := sm[2]
			if um := unknownRe.FindStringSubmatch(msg); um != nil {
				where := map[string]string{"Scenario": "", "Event": " in an event", "Sensor": " in a sensor"}[um[2]]
				msg = fmt.Sprintf("unknown key %q%s", um[1], where)
			}
			out = append(out, &Error{File: file, Line: line, Msg: msg})
			continue
		}
		out = append(out, &Error{File: file, Msg: strings.TrimPrefix(m, "yaml: ")})
	}
	return out
}

func contains(list []string, s string) bool {
	for _, v := range list {
		if v == s {
			return true
		}
	}
	return false
}
