package lineproto

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"
	"time"
)

// Tag is one key=value tag of a point.
type Tag struct {
	Key, Value string
}

// Field is one field of a point. Value is a float64, int64, string or bool.
type Field struct {
	Key   string
	Value any
}

// Point is one line of line protocol: a measurement, its tags, at least
// one field and a timestamp.
type Point struct {
	Measurement string
	Tags        []Tag
	Fields      []Field
	Time        time.Time
}

// Tag returns the value of tag key, or "" when the point has none.
func (p *Point) Tag(key string) string {
	for _, t := range p.Tags {
		if t.Key == key {
			return t.Value
		}
	}
	return ""
}

// Field returns the value of field key and whether it exists.
func (p *Point) Field(key string) (any, bool) {
	for _, f := range p.Fields {
		if f.Key == key {
			return f.Value, true
		}
	}
	return nil, false
}

// Float returns field key as a float64; integer fields are converted.
func (p *Point) Float(key string) (float64, bool) {
	v, ok := p.Field(key)
	if !ok {
		return 0, false
	}
	switch x := v.(type) {
	case float64:
		return x, true
	case int64:
		return float64(x), true
	}
	return 0, false
}

// ErrEncode is wrapped by every encoding error.
var ErrEncode = errors.New("line protocol: cannot encode")

// String returns the point's line, or an error text when it cannot be
// encoded (for logs and test messages).
func (p Point) String() string {
	b, err := p.Append(nil)
	if err != nil {
		return "<" + err.Error() + ">"
	}
	return string(b)
}

// Line returns the point as one line of line protocol without newline.
func (p Point) Line() (string, error) {
	b, err := p.Append(nil)
	return string(b), err
}

// Append appends the point's line (without newline) to dst. On error dst
// is returned unchanged with an error wrapping ErrEncode that names the
// offending part.
func (p Point) Append(dst []byte) ([]byte, error) {
	start := len(dst)
	fail := func(format string, a ...any) ([]byte, error) {
		return dst[:start], fmt.Errorf("%w: %s: %s", ErrEncode, p.Measurement, fmt.Sprintf(format, a...))
	}
	if p.Measurement == "" {
		return fail("empty measurement")
	}
	if err := checkName(p.Measurement); err != nil {
		return fail("measurement: %v", err)
	}
	if p.Measurement[0] == '#' {
		return fail("measurement starts with # (a comment)")
	}
	if !p.Time.IsZero() && (p.Time.Before(minTime) || p.Time.After(maxTime)) {
		return fail("time %s outside the nanosecond range 1677-2262", p.Time.Format(time.RFC3339))
	}
	if len(p.Fields) == 0 {
		return fail("no fields")
	}
	dst = appendEscaped(dst, p.Measurement, ", ")
	tags := p.Tags
	if !slices.IsSortedFunc(tags, cmpTag) {
		tags = slices.Clone(tags)
		slices.SortStableFunc(tags, cmpTag)
	}
	for i, t := range tags {
		if t.Key == "" {
			return fail("tag %d: empty key", i)
		}
		if i > 0 && tags[i-1].Key == t.Key {
			return fail("tag %s: given twice", t.Key)
		}
		if err := checkName(t.Key); err != nil {
			return fail("tag key %q: %v", t.Key, err)
		}
		if err := checkName(t.Value); err != nil {
			return fail("tag %s value %q: %v", t.Key, t.Value, err)
		}
		if t.Value == "" {
			continue
		}
		dst = append(dst, ',')
		dst = appendEscaped(dst, t.Key, ", =")
		dst = append(dst, '=')
		dst = appendEscaped(dst, t.Value, ", =")
	}
	dst = append(dst, ' ')
	for i, f := range p.Fields {
		if f.Key == "" {
			return fail("field %d: empty key", i)
		}
		if err := checkName(f.Key); err != nil {
			return fail("field key %q: %v", f.Key, err)
		}
		for _, g := range p.Fields[:i] {
			if g.Key == f.Key {
				return fail("field %s: given twice", f.Key)
			}
		}
		if i > 0 {
			dst = append(dst, ',')
		}
		dst = appendEscaped(dst, f.Key, ", =")
		dst = append(dst, '=')
		switch v := f.Value.(type) {
		case float64:
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return fail("field %s: %v is not a finite number", f.Key, v)
			}
			dst = strconv.AppendFloat(dst, v, 'g', -1, 64)
		case int64:
			dst = strconv.AppendInt(dst, v, 10)
			dst = append(dst, 'i')
		case bool:
			dst = strconv.AppendBool(dst, v)
		case string:
			if strings.ContainsAny(v, "\n\r") {
				return fail("field %s: string contains a line break", f.Key)
			}
			dst = append(dst, '"')
			for j := 0; j < len(v); j++ {
				if v[j] == '"' || v[j] == '\\' {
					dst = append(dst, '\\')
				}
				dst = append(dst, v[j])
			}
			dst = append(dst, '"')
		default:
			return fail("field %s: unsupported value type %T", f.Key, f.Value)
		}
	}
	if !p.Time.IsZero() {
		dst = append(dst, ' ')
		dst = strconv.AppendInt(dst, p.Time.UnixNano(), 10)
	}
	return dst, nil
}

// The range of time that int64 nanoseconds since 1970 can hold.
var (
	minTime = time.Unix(0, math.MinInt64)
	maxTime = time.Unix(0, math.MaxInt64)
)

func cmpTag(a, b Tag) int { return strings.Compare(a.Key, b.Key) }

func checkName(s string) error {
	if i := strings.IndexAny(s, "\n\r\\"); i >= 0 {
		return fmt.Errorf("contains %q (not allowed)", s[i])
	}
	return nil
}

func appendEscaped(dst []byte, s, special string) []byte {
	for i := 0; i < len(s); i++ {
		if strings.IndexByte(special, s[i]) >= 0 {
			dst = append(dst, '\\')
		}
		dst = append(dst, s[i])
	}
	return dst
}
