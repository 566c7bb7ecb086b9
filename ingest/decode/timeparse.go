package decode

import (
	"errors"
	"math"
	"time"
)

// TimeFormat says how a time field is read.
type TimeFormat uint8

const (
	// TimeAuto reads a string as RFC 3339 and a number as Unix epoch
	// seconds, or milliseconds when its magnitude is at least 1e11 (1e11 s
	// is in the year 5138; 1e11 ms is in 1973).
	TimeAuto TimeFormat = iota
	// TimeRFC3339 accepts RFC 3339 strings only.
	TimeRFC3339
	// TimeUnix accepts numbers of seconds since 1970-01-01T00:00:00Z
	// (fractions allowed).
	TimeUnix
	// TimeUnixMilli accepts numbers of milliseconds since the epoch.
	TimeUnixMilli
)

// ParseTimeFormat maps the configuration words "auto", "rfc3339", "unix"
// (or "unix_s") and "unix_ms" to a TimeFormat.
func ParseTimeFormat(s string) (TimeFormat, error) {
	switch s {
	case "", "auto":
		return TimeAuto, nil
	case "rfc3339":
		return TimeRFC3339, nil
	case "unix", "unix_s", "epoch", "epoch_s":
		return TimeUnix, nil
	case "unix_ms", "epoch_ms":
		return TimeUnixMilli, nil
	}
	return 0, errors.New("time format " + quote(s) + " is not one of auto, rfc3339, unix, unix_ms")
}

var (
	errBadTime   = errors.New("time is not RFC 3339 (2006-01-02T15:04:05Z or with an offset)")
	errTimeRange = errors.New("epoch time out of range (years 0001 to 9999)")
)

// Epoch bounds: 0001-01-01T00:00:00Z and 9999-12-31T23:59:59Z.
const (
	minEpoch = -62135596800
	maxEpoch = 253402300799
)

// epochTime converts a number of seconds (or milliseconds) into a UTC time.
func epochTime(x float64, f TimeFormat) (time.Time, error) {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return time.Time{}, errTimeRange
	}
	if f == TimeUnixMilli || (f == TimeAuto && math.Abs(x) >= 1e11) {
		x /= 1000
	}
	if x < minEpoch || x > maxEpoch {
		return time.Time{}, errTimeRange
	}
	sec := math.Floor(x)
	nsec := math.Round((x - sec) * 1e9)
	if nsec >= 1e9 {
		sec++
		nsec -= 1e9
	}
	return time.Unix(int64(sec), int64(nsec)).UTC(), nil
}

// parseRFC3339 parses an RFC 3339 date-time (§5.6) without allocating:
// YYYY-MM-DD "T" HH:MM:SS [.fraction] ("Z" / ±HH:MM). It also accepts a
// lower-case "t"/"z" (§5.6: case-insensitive) and a space instead of "T"
// (the note in §5.6). Fractions beyond nanoseconds are truncated. Leap
// seconds (:60) are rejected, as by time.Parse. The result is UTC.
func parseRFC3339(s []byte) (time.Time, error) {
	if len(s) < len("2006-01-02T15:04:05Z") {
		return time.Time{}, errBadTime
	}
	ok := true
	num := func(b []byte, lo, hi int) int {
		x := 0
		for _, c := range b {
			if c < '0' || c > '9' {
				ok = false
				return lo
			}
			x = x*10 + int(c-'0')
		}
		if x < lo || x > hi {
			ok = false
			return lo
		}
		return x
	}
	year := num(s[0:4], 0, 9999)
	month := num(s[5:7], 1, 12)
	day := num(s[8:10], 1, daysIn(month, year))
	hour := num(s[11:13], 0, 23)
	minute := num(s[14:16], 0, 59)
	sec := num(s[17:19], 0, 59)
	sep := s[10]
	if !ok || s[4] != '-' || s[7] != '-' || !(sep == 'T' || sep == 't' || sep == ' ') || s[13] != ':' || s[16] != ':' {
		return time.Time{}, errBadTime
	}
	s = s[19:]
	nsec := 0
	if len(s) >= 2 && s[0] == '.' && isDigit(s[1]) {
		n := 1
		scale := 100000000
		for ; n < len(s) && isDigit(s[n]); n++ {
			if scale > 0 {
				nsec += int(s[n]-'0') * scale
				scale /= 10
			}
		}
		s = s[n:]
	}
	t := time.Date(year, time.Month(month), day, hour, minute, sec, nsec, time.UTC)
	if len(s) == 1 && (s[0] == 'Z' || s[0] == 'z') {
		return t, nil
	}
	if len(s) != len("+07:00") || !(s[0] == '+' || s[0] == '-') || s[3] != ':' {
		return time.Time{}, errBadTime
	}
	oh := num(s[1:3], 0, 23)
	om := num(s[4:6], 0, 59)
	if !ok {
		return time.Time{}, errBadTime
	}
	off := time.Duration(oh*60+om) * time.Minute
	if s[0] == '+' {
		return t.Add(-off), nil
	}
	return t.Add(off), nil
}

func isDigit(c byte) bool { return '0' <= c && c <= '9' }

func daysIn(month, year int) int {
	switch month {
	case 2:
		if year%4 == 0 && (year%100 != 0 || year%400 == 0) {
			return 29
		}
		return 28
	case 4, 6, 9, 11:
		return 30
	}
	return 31
}
