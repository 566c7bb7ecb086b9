package lineproto

import (
	"bytes"
	"errors"
	"fmt"
	"strconv"
	"time"
)

// ErrSyntax is wrapped by every parse error.
var ErrSyntax = errors.New("line protocol")

// SyntaxError is a parse error at a byte column (1-based) of the line.
type SyntaxError struct {
	Column int
	Msg    string
}

// Error names the column of the problem.
func (e *SyntaxError) Error() string { return fmt.Sprintf("column %d: %s", e.Column, e.Msg) }

// Unwrap makes errors.Is(err, ErrSyntax) hold.
func (e *SyntaxError) Unwrap() error { return ErrSyntax }

// IsBlankOrComment reports whether a line carries no point: empty, only
// white space, or a comment starting with #.
func IsBlankOrComment(line []byte) bool {
	t := bytes.TrimLeft(line, " \t")
	return len(bytes.TrimRight(t, " \t\r\n")) == 0 || t[0] == '#'
}

// Parse reads one line of line protocol (a trailing newline or carriage
// return is allowed). Tags keep the order of the line.
func Parse(line []byte) (Point, error) {
	line = bytes.TrimRight(line, "\r\n")
	ps := parser{b: line}
	return ps.point()
}

type parser struct {
	b []byte
	i int
}

func (ps *parser) errf(format string, a ...any) error {
	return &SyntaxError{Column: ps.i + 1, Msg: fmt.Sprintf(format, a...)}
}

// token reads an escaped name up to (not including) one of the stop bytes
// or the end of the line. Escapes: a backslash before an escapable byte
// stands for that byte; before anything else it is a literal backslash.
func (ps *parser) token(stop, escapable string) string {
	var out []byte
	start := ps.i
	plain := true
	for ps.i < len(ps.b) {
		c := ps.b[ps.i]
		if c == '\\' && ps.i+1 < len(ps.b) && indexByte(escapable, ps.b[ps.i+1]) {
			if plain {
				out = append(out, ps.b[start:ps.i]...)
				plain = false
			}
			out = append(out, ps.b[ps.i+1])
			ps.i += 2
			continue
		}
		if indexByte(stop, c) {
			break
		}
		if !plain {
			out = append(out, c)
		}
		ps.i++
	}
	if plain {
		return string(ps.b[start:ps.i])
	}
	return string(out)
}

func indexByte(s string, c byte) bool {
	for i := 0; i < len(s); i++ {
		if s[i] == c {
			return true
		}
	}
	return false
}

func (ps *parser) point() (Point, error) {
	var p Point
	if len(ps.b) == 0 {
		return p, ps.errf("empty line")
	}
	if ps.b[0] == '#' {
		return p, ps.errf("comment line, not a point")
	}
	p.Measurement = ps.token(", ", ", ")
	if p.Measurement == "" {
		return p, ps.errf("missing measurement")
	}
	for ps.i < len(ps.b) && ps.b[ps.i] == ',' {
		ps.i++
		col := ps.i
		k := ps.token(",= ", ",= ")
		if k == "" {
			return p, ps.errf("empty tag key")
		}
		if ps.i >= len(ps.b) || ps.b[ps.i] != '=' {
			return p, ps.errf("tag %q has no value", k)
		}
		ps.i++
		v := ps.token(",= ", ",= ")
		if v == "" {
			return p, ps.errf("tag %q has an empty value", k)
		}
		if ps.i < len(ps.b) && ps.b[ps.i] == '=' {
			return p, ps.errf("tag %q: unescaped = in value", k)
		}
		for _, t := range p.Tags {
			if t.Key == k {
				ps.i = col
				return p, ps.errf("tag %q given twice", k)
			}
		}
		p.Tags = append(p.Tags, Tag{Key: k, Value: v})
	}
	if ps.i >= len(ps.b) || ps.b[ps.i] != ' ' {
		return p, ps.errf("missing fields")
	}
	ps.i++
	for {
		col := ps.i
		k := ps.token(",= ", ",= ")
		if k == "" {
			return p, ps.errf("empty field key")
		}
		if ps.i >= len(ps.b) || ps.b[ps.i] != '=' {
			return p, ps.errf("field %q has no value", k)
		}
		ps.i++
		v, err := ps.fieldValue(k)
		if err != nil {
			return p, err
		}
		for _, f := range p.Fields {
			if f.Key == k {
				ps.i = col
				return p, ps.errf("field %q given twice", k)
			}
		}
		p.Fields = append(p.Fields, Field{Key: k, Value: v})
		if ps.i < len(ps.b) && ps.b[ps.i] == ',' {
			ps.i++
			continue
		}
		break
	}
	if ps.i == len(ps.b) {
		return p, nil
	}
	if ps.b[ps.i] != ' ' {
		return p, ps.errf("unexpected %q after fields", ps.b[ps.i])
	}
	ps.i++
	rest := bytes.TrimRight(ps.b[ps.i:], " \t")
	if len(rest) == 0 {
		return p, nil
	}
	ns, err := strconv.ParseInt(string(rest), 10, 64)
	if err != nil {
		return p, ps.errf("timestamp %q is not an integer of nanoseconds", rest)
	}
	p.Time = time.Unix(0, ns).UTC()
	return p, nil
}

func (ps *parser) fieldValue(key string) (any, error) {
	if ps.i >= len(ps.b) {
		return nil, ps.errf("field %q has no value", key)
	}
	if ps.b[ps.i] == '"' {
		ps.i++
		var out []byte
		for ps.i < len(ps.b) {
			c := ps.b[ps.i]
			if c == '\\' && ps.i+1 < len(ps.b) && (ps.b[ps.i+1] == '"' || ps.b[ps.i+1] == '\\') {
				out = append(out, ps.b[ps.i+1])
				ps.i += 2
				continue
			}
			if c == '"' {
				ps.i++
				return string(out), nil
			}
			out = append(out, c)
			ps.i++
		}
		return nil, ps.errf("field %q: string has no closing quote", key)
	}
	start := ps.i
	for ps.i < len(ps.b) && ps.b[ps.i] != ',' && ps.b[ps.i] != ' ' {
		ps.i++
	}
	raw := string(ps.b[start:ps.i])
	col := start + 1
	bad := func(what string) error {
		return &SyntaxError{Column: col, Msg: fmt.Sprintf("field %q: %q is not %s", key, raw, what)}
	}
	switch raw {
	case "t", "T", "true", "True", "TRUE":
		return true, nil
	case "f", "F", "false", "False", "FALSE":
		return false, nil
	}
	if n := len(raw); n > 1 && raw[n-1] == 'i' {
		v, err := strconv.ParseInt(raw[:n-1], 10, 64)
		if err != nil {
			return nil, bad("an integer")
		}
		return v, nil
	}
	if !floatSyntax(raw) {
		return nil, bad("a number, string or boolean")
	}
	v, err := strconv.ParseFloat(raw, 64)
	if err != nil {
		return nil, bad("a finite number")
	}
	return v, nil
}

// floatSyntax accepts the float forms of line protocol: optional sign,
// digits with an optional point, optional exponent. It refuses Go's extra
// forms (inf, nan, hex, underscores).
func floatSyntax(s string) bool {
	i := 0
	if i < len(s) && (s[i] == '-' || s[i] == '+') {
		i++
	}
	digits := 0
	for i < len(s) && s[i] >= '0' && s[i] <= '9' {
		i++
		digits++
	}
	if i < len(s) && s[i] == '.' {
		i++
		for i < len(s) && s[i] >= '0' && s[i] <= '9' {
			i++
			digits++
		}
	}
	if digits == 0 {
		return false
	}
	if i < len(s) && (s[i] == 'e' || s[i] == 'E') {
		i++
		if i < len(s) && (s[i] == '-' || s[i] == '+') {
			i++
		}
		ed := 0
		for i < len(s) && s[i] >= '0' && s[i] <= '9' {
			i++
			ed++
		}
		if ed == 0 {
			return false
		}
	}
	return i == len(s)
}
