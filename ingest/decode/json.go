package decode

import (
	"errors"
	"strconv"
	"unicode/utf16"
	"unicode/utf8"
)

// This file is a small validating JSON scanner (RFC 8259) that finds the
// values at up to three field paths in one pass without building any tree
// and without allocating, unless a key or string it must read carries
// escapes. It is the hot path for JSON payloads; encoding/json is not used.

// maxDepth bounds nesting; deeper documents are rejected (encoding/json
// allows 10000, we need far less and keep the recursion short).
const maxDepth = 256

// kind is the JSON type of a value found at a path.
type kind uint8

const (
	kindNone kind = iota
	kindString
	kindNumber
	kindObject
	kindArray
	kindBool
	kindNull
)

func (k kind) String() string {
	switch k {
	case kindString:
		return "string"
	case kindNumber:
		return "number"
	case kindObject:
		return "object"
	case kindArray:
		return "array"
	case kindBool:
		return "boolean"
	case kindNull:
		return "null"
	}
	return "nothing"
}

// segment is one step of a field path: an object key, an array index, or
// (for an all-digit dotted segment) either.
type segment struct {
	key     string
	index   int  // -1: not an index
	keyOnly bool // from a dotted name that is not all digits
	idxOnly bool // from [n]
}

func (s segment) matchKey(k []byte) bool { return !s.idxOnly && string(k) == s.key }
func (s segment) matchIndex(i int) bool  { return !s.keyOnly && s.index == i }

// span is where a found value lies in the payload.
type span struct {
	start, end int
	kind       kind
	escaped    bool // a string with backslash escapes
}

// syntaxError reports malformed JSON at a byte offset.
type syntaxError struct {
	msg    string
	offset int
}

func (e *syntaxError) Error() string {
	return "invalid JSON at byte " + strconv.Itoa(e.offset) + ": " + e.msg
}

func errAt(msg string, off int) error { return &syntaxError{msg: msg, offset: off} }

// walker scans one document looking for up to three paths.
type walker struct {
	data  []byte
	paths [3][]segment
	n     int // number of paths
	found [3]span
}

// walk validates the whole document and records the spans of the paths.
func (w *walker) walk() error {
	for i := range w.found {
		w.found[i] = span{}
	}
	var mask uint8
	for b := 0; b < w.n; b++ {
		if len(w.paths[b]) > 0 {
			mask |= 1 << b
		}
	}
	i := skipWS(w.data, 0)
	end, err := w.value(i, 0, mask)
	if err != nil {
		return err
	}
	end = skipWS(w.data, end)
	if end != len(w.data) {
		return errAt("data after the top-level value", end)
	}
	return nil
}

func skipWS(d []byte, i int) int {
	for i < len(d) {
		switch d[i] {
		case ' ', '\t', '\n', '\r':
			i++
		default:
			return i
		}
	}
	return i
}

// value scans the value at d[i:]; mask holds the paths still matching
// here, at the given depth. It returns the offset just after the value.
func (w *walker) value(i, depth int, mask uint8) (int, error) {
	d := w.data
	if i >= len(d) {
		return i, errAt("unexpected end of input", i)
	}
	// Paths that end here record this value.
	var here uint8
	if mask != 0 {
		for b := 0; b < w.n; b++ {
			if mask&(1<<b) != 0 && len(w.paths[b]) == depth {
				here |= 1 << b
			}
		}
		mask &^= here
	}
	start := i
	var k kind
	var end int
	var err error
	escaped := false
	switch c := d[i]; {
	case c == '{':
		k = kindObject
		end, err = w.object(i, depth, mask)
	case c == '[':
		k = kindArray
		end, err = w.array(i, depth, mask)
	case c == '"':
		k = kindString
		end, escaped, err = scanString(d, i)
	case c == '-' || ('0' <= c && c <= '9'):
		k = kindNumber
		end, err = scanNumber(d, i)
	case c == 't':
		k = kindBool
		end, err = literal(d, i, "true")
	case c == 'f':
		k = kindBool
		end, err = literal(d, i, "false")
	case c == 'n':
		k = kindNull
		end, err = literal(d, i, "null")
	default:
		return i, errAt("unexpected character "+strconv.QuoteRune(rune(c)), i)
	}
	if err != nil {
		return end, err
	}
	if here != 0 {
		for b := 0; b < w.n; b++ {
			if here&(1<<b) != 0 {
				w.found[b] = span{start: start, end: end, kind: k, escaped: escaped}
			}
		}
	}
	return end, nil
}

func (w *walker) object(i, depth int, mask uint8) (int, error) {
	d := w.data
	if depth >= maxDepth {
		return i, errAt("nesting too deep", i)
	}
	i = skipWS(d, i+1)
	if i < len(d) && d[i] == '}' {
		return i + 1, nil
	}
	var keyBuf [64]byte
	for {
		if i >= len(d) || d[i] != '"' {
			return i, errAt("expected a member name", i)
		}
		kend, esc, err := scanString(d, i)
		if err != nil {
			return kend, err
		}
		var child uint8
		if mask != 0 {
			key := d[i+1 : kend-1]
			if esc || badUTF8(key) {
				key = unescape(keyBuf[:0], key)
			}
			for b := 0; b < w.n; b++ {
				if mask&(1<<b) != 0 && w.paths[b][depth].matchKey(key) {
					child |= 1 << b
				}
			}
		}
		i = skipWS(d, kend)
		if i >= len(d) || d[i] != ':' {
			return i, errAt("expected ':' after a member name", i)
		}
		i = skipWS(d, i+1)
		i, err = w.value(i, depth+1, child)
		if err != nil {
			return i, err
		}
		i = skipWS(d, i)
		if i >= len(d) {
			return i, errAt("unexpected end of input in an object", i)
		}
		switch d[i] {
		case ',':
			i = skipWS(d, i+1)
		case '}':
			return i + 1, nil
		default:
			return i, errAt("expected ',' or '}' in an object", i)
		}
	}
}

func (w *walker) array(i, depth int, mask uint8) (int, error) {
	d := w.data
	if depth >= maxDepth {
		return i, errAt("nesting too deep", i)
	}
	i = skipWS(d, i+1)
	if i < len(d) && d[i] == ']' {
		return i + 1, nil
	}
	for n := 0; ; n++ {
		var child uint8
		if mask != 0 {
			for b := 0; b < w.n; b++ {
				if mask&(1<<b) != 0 && w.paths[b][depth].matchIndex(n) {
					child |= 1 << b
				}
			}
		}
		var err error
		i, err = w.value(i, depth+1, child)
		if err != nil {
			return i, err
		}
		i = skipWS(d, i)
		if i >= len(d) {
			return i, errAt("unexpected end of input in an array", i)
		}
		switch d[i] {
		case ',':
			i = skipWS(d, i+1)
		case ']':
			return i + 1, nil
		default:
			return i, errAt("expected ',' or ']' in an array", i)
		}
	}
}

func literal(d []byte, i int, lit string) (int, error) {
	if len(d)-i >= len(lit) && string(d[i:i+len(lit)]) == lit {
		return i + len(lit), nil
	}
	return i, errAt("invalid literal", i)
}

// scanString scans a string starting at the opening quote d[i] and returns
// the offset after the closing quote and whether it has escapes.
func scanString(d []byte, i int) (int, bool, error) {
	esc := false
	for j := i + 1; j < len(d); j++ {
		c := d[j]
		if c >= 0x20 && c != '"' && c != '\\' {
			continue // the common case, kept tight
		}
		switch {
		case c == '"':
			return j + 1, esc, nil
		case c == '\\':
			esc = true
			j++
			if j >= len(d) {
				return j, esc, errAt("unterminated string", i)
			}
			switch d[j] {
			case '"', '\\', '/', 'b', 'f', 'n', 'r', 't':
			case 'u':
				if len(d)-j < 5 || !isHex4(d[j+1:j+5]) {
					return j, esc, errAt("invalid \\u escape", j)
				}
				j += 4
			default:
				return j, esc, errAt("invalid escape", j)
			}
		case c < 0x20:
			return j, esc, errAt("control character in a string", j)
		}
	}
	return len(d), esc, errAt("unterminated string", i)
}

func isHex4(b []byte) bool {
	for _, c := range b[:4] {
		if !('0' <= c && c <= '9' || 'a' <= c && c <= 'f' || 'A' <= c && c <= 'F') {
			return false
		}
	}
	return true
}

func hex4(b []byte) rune {
	var r rune
	for _, c := range b[:4] {
		r <<= 4
		switch {
		case '0' <= c && c <= '9':
			r |= rune(c - '0')
		case 'a' <= c && c <= 'f':
			r |= rune(c - 'a' + 10)
		default:
			r |= rune(c - 'A' + 10)
		}
	}
	return r
}

// badUTF8 reports whether b is not valid UTF-8 (encoding/json replaces
// such bytes with U+FFFD; so do we, through unescape).
func badUTF8(b []byte) bool {
	for _, c := range b {
		if c >= utf8.RuneSelf {
			return !utf8.Valid(b)
		}
	}
	return false
}

// unescape appends the decoded content of a validated string body (without
// quotes) to dst. Invalid UTF-8 and lone surrogates become U+FFFD, as in
// encoding/json.
func unescape(dst, s []byte) []byte {
	for i := 0; i < len(s); {
		c := s[i]
		if c != '\\' {
			if c < utf8.RuneSelf {
				dst = append(dst, c)
				i++
				continue
			}
			r, n := utf8.DecodeRune(s[i:])
			dst = utf8.AppendRune(dst, r)
			i += n
			continue
		}
		i++
		switch s[i] {
		case 'b':
			dst = append(dst, '\b')
		case 'f':
			dst = append(dst, '\f')
		case 'n':
			dst = append(dst, '\n')
		case 'r':
			dst = append(dst, '\r')
		case 't':
			dst = append(dst, '\t')
		case 'u':
			r := hex4(s[i+1:])
			i += 4
			if utf16.IsSurrogate(r) {
				if i+7 <= len(s) && s[i+1] == '\\' && s[i+2] == 'u' && isHex4(s[i+3:]) {
					if r2 := utf16.DecodeRune(r, hex4(s[i+3:])); r2 != utf8.RuneError {
						dst = utf8.AppendRune(dst, r2)
						i += 6
						break
					}
				}
				r = utf8.RuneError
			}
			dst = utf8.AppendRune(dst, r)
		default: // '"', '\\', '/'
			dst = append(dst, s[i])
		}
		i++
	}
	return dst
}

// scanNumber scans a JSON number (RFC 8259 §6) starting at d[i].
func scanNumber(d []byte, i int) (int, error) {
	start := i
	if d[i] == '-' {
		i++
	}
	if i >= len(d) {
		return i, errAt("invalid number", start)
	}
	switch {
	case d[i] == '0':
		i++
	case '1' <= d[i] && d[i] <= '9':
		for i < len(d) && '0' <= d[i] && d[i] <= '9' {
			i++
		}
	default:
		return i, errAt("invalid number", start)
	}
	if i < len(d) && d[i] == '.' {
		i++
		if i >= len(d) || d[i] < '0' || d[i] > '9' {
			return i, errAt("invalid number: digit expected after '.'", start)
		}
		for i < len(d) && '0' <= d[i] && d[i] <= '9' {
			i++
		}
	}
	if i < len(d) && (d[i] == 'e' || d[i] == 'E') {
		i++
		if i < len(d) && (d[i] == '+' || d[i] == '-') {
			i++
		}
		if i >= len(d) || d[i] < '0' || d[i] > '9' {
			return i, errAt("invalid number: digit expected in exponent", start)
		}
		for i < len(d) && '0' <= d[i] && d[i] <= '9' {
			i++
		}
	}
	return i, nil
}

// parseFloat parses a validated number; out-of-range magnitudes become
// ±Inf (reported by the pipeline as not finite), not errors.
func parseFloat(b []byte) (float64, error) {
	v, err := strconv.ParseFloat(string(b), 64)
	if err != nil {
		var ne *strconv.NumError
		if errors.As(err, &ne) && ne.Err == strconv.ErrRange {
			return v, nil
		}
		return 0, err
	}
	return v, nil
}
