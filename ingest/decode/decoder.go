package decode

import (
	"bytes"
	"errors"
	"fmt"
	"strconv"
	"strings"
	"time"
)

// Sample is what a decoder extracts from one payload, before unit
// conversion and validation.
type Sample struct {
	// Value as sent, in Unit (or the sensor's unit when Unit is nil).
	Value float64
	// Time of the measurement; the zero Time means the payload carried
	// none and the arrival time is used.
	Time time.Time
	// Unit named in the payload, nil when it named none. It may alias the
	// payload: valid only until the payload buffer is reused.
	Unit []byte
}

// Decoder turns one MQTT payload into a Sample.
//
// Decode must fill s (which the caller has zeroed) or return an error
// saying what is wrong with the payload; it must not panic on any input,
// must not keep payload or s after it returns. The decoders of this
// package are immutable and safe for concurrent use; a decoder with state
// must at least allow calls from one goroutine at a time.
// A decoder needs no registration: give it to the pipeline in
// Options.SensorDecoders or in a Route.
type Decoder interface {
	Decode(payload []byte, s *Sample) error
}

// DecoderFunc adapts a function to the Decoder interface.
type DecoderFunc func(payload []byte, s *Sample) error

// Decode calls f(payload, s).
func (f DecoderFunc) Decode(payload []byte, s *Sample) error { return f(payload, s) }

var (
	errEmpty   = errors.New("empty payload")
	errNoValue = errors.New("no value field")
)

// Number decodes a payload that is a bare number in text ("3.41", with
// optional surrounding white space). It accepts what strconv.ParseFloat
// accepts, including "NaN" and "Inf" (rejected later as not finite).
type Number struct{}

// Decode implements Decoder.
func (Number) Decode(p []byte, s *Sample) error {
	p = bytes.TrimSpace(p)
	if len(p) == 0 {
		return errEmpty
	}
	v, err := strconv.ParseFloat(string(p), 64)
	if err != nil {
		var ne *strconv.NumError
		if !errors.As(err, &ne) || ne.Err != strconv.ErrRange {
			return fmt.Errorf("not a number: %.40q", p)
		}
	}
	s.Value = v
	return nil
}

// Object decodes the plain JSON object of shared/CONTRACT.md:
// {"value": 3.41, "time": "2026-03-02T01:10:00Z", "unit": "bar"} where time
// and unit are optional; other members are ignored. It is Fields with the
// paths "value", "time" and "unit" and automatic time format.
type Object struct{}

var plainPaths = mustFields(Spec{Value: "value", Time: "time", Unit: "unit"})

// Decode implements Decoder.
func (Object) Decode(p []byte, s *Sample) error { return plainPaths.Decode(p, s) }

// Auto is the default decoder: a payload whose first non-space byte is '{'
// is decoded as Object, anything else as Number.
type Auto struct{}

// Decode implements Decoder.
func (Auto) Decode(p []byte, s *Sample) error {
	i := skipWS(p, 0)
	if i < len(p) && p[i] == '{' {
		return plainPaths.Decode(p, s)
	}
	return Number{}.Decode(p, s)
}

// Spec configures a decoder: the `decode` block of a sensor or topic
// filter in the service configuration.
type Spec struct {
	// Format is "auto" (default: bare number or plain object), "number"
	// or "json" (field paths below).
	Format string `yaml:"format"`
	// Value, Time and Unit are field paths into a JSON payload: dotted
	// member names with optional array indexes, e.g. "data.p1",
	// "readings[0].v" or "readings.0.v" (an all-digit segment matches an
	// array index or a member of that name). Value is required for "json";
	// Time and Unit are optional. Member names containing '.' or '[' cannot
	// be addressed.
	Value string `yaml:"value"`
	Time  string `yaml:"time"`
	Unit  string `yaml:"unit"`
	// TimeFormat is "auto" (default), "rfc3339", "unix" or "unix_ms".
	TimeFormat string `yaml:"time_format"`
}

// New builds the decoder a Spec describes; the error names the bad field.
func New(spec Spec) (Decoder, error) {
	switch spec.Format {
	case "", "auto":
		if spec.Value != "" || spec.Time != "" || spec.Unit != "" {
			return NewFields(spec)
		}
		return Auto{}, nil
	case "number":
		return Number{}, nil
	case "json":
		return NewFields(spec)
	}
	return nil, fmt.Errorf("decode: format %q is not one of auto, number, json", spec.Format)
}

// Fields decodes a JSON document, taking the value, time and unit from the
// configured field paths. Build it with NewFields.
type Fields struct {
	w      walker // the paths; copied per call, never written after NewFields
	hasT   bool
	hasU   bool
	format TimeFormat
}

// NewFields builds a Fields decoder; the error names the bad path.
func NewFields(spec Spec) (*Fields, error) {
	f := &Fields{}
	if spec.Value == "" {
		return nil, errors.New("decode: value path is required")
	}
	var err error
	if f.format, err = ParseTimeFormat(spec.TimeFormat); err != nil {
		return nil, fmt.Errorf("decode: %w", err)
	}
	for i, p := range []string{spec.Value, spec.Time, spec.Unit} {
		if p == "" {
			// An empty path never matches: the walker needs depth ≥ 1.
			f.w.paths[i] = nil
			continue
		}
		segs, err := ParsePath(p)
		if err != nil {
			return nil, fmt.Errorf("decode: %s path: %w", [...]string{"value", "time", "unit"}[i], err)
		}
		f.w.paths[i] = segs
	}
	f.w.n = 3
	f.hasT = spec.Time != ""
	f.hasU = spec.Unit != ""
	return f, nil
}

func mustFields(spec Spec) *Fields {
	f, err := NewFields(spec)
	if err != nil {
		panic(err) // static configuration above
	}
	return f
}

// ParsePath splits a field path such as "data.readings[2].value" into
// segments. The error says what is wrong.
func ParsePath(p string) ([]segment, error) {
	var segs []segment
	rest := p
	for len(rest) > 0 {
		dot := strings.IndexByte(rest, '.')
		part := rest
		if dot >= 0 {
			part, rest = rest[:dot], rest[dot+1:]
			if rest == "" {
				return nil, fmt.Errorf("path %q ends with '.'", p)
			}
		} else {
			rest = ""
		}
		name := part
		var idx []int
		if b := strings.IndexByte(part, '['); b >= 0 {
			name = part[:b]
			tail := part[b:]
			for len(tail) > 0 {
				if tail[0] != '[' {
					return nil, fmt.Errorf("path %q: unexpected %q after ']'", p, tail[0])
				}
				e := strings.IndexByte(tail, ']')
				if e < 0 {
					return nil, fmt.Errorf("path %q: '[' without ']'", p)
				}
				n, err := strconv.Atoi(tail[1:e])
				if err != nil || n < 0 {
					return nil, fmt.Errorf("path %q: index %q is not a non-negative integer", p, tail[1:e])
				}
				idx = append(idx, n)
				tail = tail[e+1:]
			}
			if name == "" && len(segs) > 0 {
				return nil, fmt.Errorf("path %q: empty member name before '['", p)
			}
		}
		if name != "" {
			seg := segment{key: name, index: -1, keyOnly: true}
			if n, err := strconv.Atoi(name); err == nil && n >= 0 && isAllDigits(name) {
				seg.index, seg.keyOnly = n, false
			}
			segs = append(segs, seg)
		} else if len(idx) == 0 {
			return nil, fmt.Errorf("path %q has an empty segment", p)
		}
		for _, n := range idx {
			segs = append(segs, segment{index: n, idxOnly: true})
		}
	}
	if len(segs) == 0 {
		return nil, errors.New("empty path")
	}
	return segs, nil
}

func isAllDigits(s string) bool {
	for i := 0; i < len(s); i++ {
		if !isDigit(s[i]) {
			return false
		}
	}
	return s != ""
}

// Decode implements Decoder.
func (f *Fields) Decode(p []byte, s *Sample) error {
	if len(skipWSBytes(p)) == 0 {
		return errEmpty
	}
	w := f.w // a copy on the stack: f stays immutable and safe to share
	w.data = p
	if err := w.walk(); err != nil {
		return err
	}
	v := w.found[0]
	switch v.kind {
	case kindNumber:
		x, err := parseFloat(p[v.start:v.end])
		if err != nil {
			return fmt.Errorf("value: %w", err)
		}
		s.Value = x
	case kindString:
		// Some devices quote their numbers: "3.41".
		body := stringBody(p, v)
		x, err := strconv.ParseFloat(string(bytes.TrimSpace(body)), 64)
		if err != nil {
			return fmt.Errorf("value: string %.40q is not a number", body)
		}
		s.Value = x
	case kindNone:
		return errNoValue
	default:
		return fmt.Errorf("value is a JSON %v, not a number", v.kind)
	}
	if f.hasT {
		t := w.found[1]
		switch t.kind {
		case kindNone, kindNull:
		case kindString:
			if f.format == TimeUnix || f.format == TimeUnixMilli {
				return errors.New("time: a string, but the time format is epoch")
			}
			tm, err := parseRFC3339(stringBody(p, t))
			if err != nil {
				return fmt.Errorf("time: %w", err)
			}
			s.Time = tm
		case kindNumber:
			if f.format == TimeRFC3339 {
				return errors.New("time: a number, but the time format is rfc3339")
			}
			x, err := parseFloat(p[t.start:t.end])
			if err != nil {
				return fmt.Errorf("time: %w", err)
			}
			if s.Time, err = epochTime(x, f.format); err != nil {
				return fmt.Errorf("time: %w", err)
			}
		default:
			return fmt.Errorf("time is a JSON %v, not a string or number", t.kind)
		}
	}
	if f.hasU {
		u := w.found[2]
		switch u.kind {
		case kindNone, kindNull:
		case kindString:
			s.Unit = stringBody(p, u)
			if len(s.Unit) == 0 {
				s.Unit = nil
			}
		default:
			return fmt.Errorf("unit is a JSON %v, not a string", u.kind)
		}
	}
	return nil
}

// stringBody returns the content of a found string, unescaped into a new
// slice when it has escapes, else aliasing p.
func stringBody(p []byte, sp span) []byte {
	body := p[sp.start+1 : sp.end-1]
	if sp.escaped || badUTF8(body) {
		return unescape(nil, body)
	}
	return body
}

func skipWSBytes(p []byte) []byte { return p[skipWS(p, 0):] }

func quote(s string) string { return strconv.Quote(s) }
