package config

import (
	"errors"
	"fmt"
	"strings"
	"unicode/utf8"
)

// SensorCapture is the topic level that names the sensor: it matches
// one level like '+', and the level's text is the sensor id.
const SensorCapture = "{sensor}"

// CheckTopicFilter checks a sensor's topic: an MQTT topic name or topic
// filter by the rules of MQTT 3.1.1 (OASIS Standard, 29 October 2014),
// with at most one level that is exactly "{sensor}":
//
//   - §4.7.3: at least one character, UTF-8, no U+0000, at most 65535
//     bytes;
//   - §4.7.1.2: '#' only as the whole last level ("a/#", "#");
//   - §4.7.1.3: '+' only as a whole level ("a/+/b", "+");
//   - '{' and '}' only in the capture level (our rule, so that a typo
//     such as "{sensors}" is not taken as a literal level).
//
// Topics starting with '$' are the broker's (§4.7.2) and are refused.
func CheckTopicFilter(topic string) error {
	switch {
	case topic == "":
		return errors.New("empty topic (MQTT 3.1.1 §4.7.3)")
	case len(topic) > 65535:
		return errors.New("topic longer than 65535 bytes (MQTT 3.1.1 §4.7.3)")
	case !utf8.ValidString(topic):
		return fmt.Errorf("topic %q is not valid UTF-8 (MQTT 3.1.1 §4.7.3)", topic)
	case strings.IndexByte(topic, 0) >= 0:
		return fmt.Errorf("topic %q contains U+0000 (MQTT 3.1.1 §4.7.3)", topic)
	case strings.HasPrefix(topic, "$"):
		return fmt.Errorf("topic %q: topics starting with '$' belong to the broker (MQTT 3.1.1 §4.7.2)", topic)
	}
	levels := strings.Split(topic, "/")
	captures := 0
	for i, lv := range levels {
		switch {
		case lv == "#":
			if i != len(levels)-1 {
				return fmt.Errorf("topic %q: '#' must be the last level (MQTT 3.1.1 §4.7.1.2)", topic)
			}
		case strings.Contains(lv, "#"):
			return fmt.Errorf("topic %q: '#' must be a whole level (MQTT 3.1.1 §4.7.1.2)", topic)
		case strings.Contains(lv, "+") && lv != "+":
			return fmt.Errorf("topic %q: '+' must be a whole level (MQTT 3.1.1 §4.7.1.3)", topic)
		case lv == SensorCapture:
			captures++
			if captures > 1 {
				return fmt.Errorf("topic %q: more than one %s level", topic, SensorCapture)
			}
		case strings.ContainsAny(lv, "{}"):
			return fmt.Errorf("topic %q: level %q: braces are only allowed in a whole %s level", topic, lv, SensorCapture)
		}
	}
	return nil
}
