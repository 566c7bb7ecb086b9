package decode

import (
	"errors"
	"fmt"
	"strings"
	"unicode/utf8"
)

// Capture is the segment of a topic filter that names the sensor: it
// matches one topic level like '+' and its text is the sensor id.
const Capture = "{sensor}"

// Topic filter rules, MQTT 3.1.1 (OASIS Standard, 29 October 2014) §4.7:
//
//   - §4.7.1.1 '/' separates levels; empty levels are allowed
//     ("/a" has two levels, the first empty).
//   - §4.7.1.2 '#' matches the parent level and any number of child
//     levels; it must be the whole last level ("a/#", "#"; not "a#", "a/#/b").
//   - §4.7.1.3 '+' matches exactly one level, possibly empty; it must be a
//     whole level ("a/+/b", "+"; not "a+").
//   - §4.7.2 a filter starting with a wildcard does not match a topic
//     starting with '$'.
//   - §4.7.3 topics and filters are at least one character, UTF-8, case
//     sensitive, without U+0000, at most 65535 bytes.
//   - §3.3.2.1 a topic name (what a message is published to) contains no
//     wildcard characters.

var (
	// ErrBadFilter is wrapped by every error about an invalid topic filter.
	ErrBadFilter = errors.New("invalid MQTT topic filter")
	// ErrBadTopic is wrapped by every error about an invalid topic name.
	ErrBadTopic = errors.New("invalid MQTT topic name")
)

func checkCommon(s string) error {
	if len(s) == 0 {
		return errors.New("empty (§4.7.3)")
	}
	if len(s) > 65535 {
		return errors.New("longer than 65535 bytes (§4.7.3)")
	}
	if !utf8.ValidString(s) {
		return errors.New("not valid UTF-8 (§4.7.3)")
	}
	if strings.IndexByte(s, 0) >= 0 {
		return errors.New("contains U+0000 (§4.7.3)")
	}
	return nil
}

// ValidTopic checks a topic name (not a filter).
func ValidTopic(topic string) error {
	if err := checkCommon(topic); err != nil {
		return fmt.Errorf("%w %q: %v", ErrBadTopic, topic, err)
	}
	if strings.ContainsAny(topic, "+#") {
		return fmt.Errorf("%w %q: contains a wildcard (§3.3.2.1)", ErrBadTopic, topic)
	}
	return nil
}

// segKind is one level of a compiled filter.
type segKind uint8

const (
	segLiteral segKind = iota
	segPlus
	segHash
	segCapture
)

type filterSeg struct {
	kind segKind
	text string
}

// Filter is a compiled topic filter, optionally with one {sensor} level.
type Filter struct {
	raw     string
	segs    []filterSeg
	capture int // index of the {sensor} level, -1 when none
	wild    bool
}

// CompileFilter validates a topic filter per MQTT 3.1.1 §4.7, allowing one
// level that is exactly "{sensor}" (which matches like '+'). The error
// wraps ErrBadFilter and cites the clause broken.
func CompileFilter(filter string) (*Filter, error) {
	if err := checkCommon(filter); err != nil {
		return nil, fmt.Errorf("%w %q: %v", ErrBadFilter, filter, err)
	}
	f := &Filter{raw: filter, capture: -1}
	levels := strings.Split(filter, "/")
	for i, l := range levels {
		switch {
		case l == "#":
			if i != len(levels)-1 {
				return nil, fmt.Errorf("%w %q: '#' must be the last level (§4.7.1.2)", ErrBadFilter, filter)
			}
			f.segs = append(f.segs, filterSeg{kind: segHash})
			f.wild = true
		case l == "+":
			f.segs = append(f.segs, filterSeg{kind: segPlus})
			f.wild = true
		case l == Capture:
			if f.capture >= 0 {
				return nil, fmt.Errorf("%w %q: more than one %s level", ErrBadFilter, filter, Capture)
			}
			f.capture = i
			f.segs = append(f.segs, filterSeg{kind: segCapture})
			f.wild = true
		case strings.Contains(l, "#"):
			return nil, fmt.Errorf("%w %q: '#' must be a whole level (§4.7.1.2)", ErrBadFilter, filter)
		case strings.Contains(l, "+"):
			return nil, fmt.Errorf("%w %q: '+' must be a whole level (§4.7.1.3)", ErrBadFilter, filter)
		default:
			f.segs = append(f.segs, filterSeg{kind: segLiteral, text: l})
		}
	}
	return f, nil
}

// String returns the filter as written.
func (f *Filter) String() string { return f.raw }

// Subscription returns the filter to subscribe to: {sensor} becomes '+'.
func (f *Filter) Subscription() string {
	if f.capture < 0 {
		return f.raw
	}
	levels := strings.Split(f.raw, "/")
	levels[f.capture] = "+"
	return strings.Join(levels, "/")
}

// Wildcard reports whether the filter has any wildcard or capture level.
func (f *Filter) Wildcard() bool { return f.wild }

// HasCapture reports whether the filter has a {sensor} level.
func (f *Filter) HasCapture() bool { return f.capture >= 0 }

// Match reports whether topic matches the filter and returns the text of
// the {sensor} level ("" when the filter has none). It does not allocate.
func (f *Filter) Match(topic string) (captured string, ok bool) {
	// §4.7.2: wildcards at the first level do not match '$' topics.
	if len(topic) > 0 && topic[0] == '$' && f.segs[0].kind != segLiteral {
		return "", false
	}
	pos := 0 // start of the current topic level
	for _, s := range f.segs {
		if s.kind == segHash {
			// §4.7.1.2: matches the parent level too ("a/#" matches "a"),
			// so '#' matches whatever is left, including nothing.
			return captured, true
		}
		if pos > len(topic) {
			// Topic has fewer levels than the filter.
			return "", false
		}
		end := strings.IndexByte(topic[pos:], '/')
		if end < 0 {
			end = len(topic)
		} else {
			end += pos
		}
		level := topic[pos:end]
		switch s.kind {
		case segLiteral:
			if level != s.text {
				return "", false
			}
		case segCapture:
			captured = level
		}
		pos = end + 1 // past the '/' (or past the end: no more levels)
	}
	// All filter levels used: the topic must have no more levels.
	return captured, pos == len(topic)+1
}
