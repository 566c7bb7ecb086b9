package readfile

import (
	"encoding/csv"
	"fmt"
	"math/rand/v2"
	"reflect"
	"strings"
	"testing"
	"time"

	"plumbline/model/telemetry"
)

// csvFields is how the reader took a line apart before the fast path:
// encoding/csv (the reference), leading space trimmed, any number of
// fields.
func csvFields(text string) ([]string, error) {
	cr := csv.NewReader(strings.NewReader(text))
	cr.FieldsPerRecord = -1
	cr.TrimLeadingSpace = true
	return cr.Read()
}

func trimAll(xs []string) []string {
	out := make([]string, len(xs))
	for i, x := range xs {
		out[i] = strings.TrimSpace(x)
	}
	return out
}

// checkSplit: for a line without quote characters, splitCommas gives the
// fields encoding/csv gives, once each is trimmed as every use of a
// field trims it, and encoding/csv finds nothing wrong with it.
func checkSplit(t *testing.T, text string) {
	if strings.ContainsAny(text, "\"\n") {
		return
	}
	text = strings.TrimRight(text, "\r")
	if tt := strings.TrimSpace(text); tt == "" || strings.HasPrefix(tt, "#") {
		return // skipped before splitting
	}
	want, err := csvFields(text)
	if err != nil {
		t.Fatalf("%q: encoding/csv: %v", text, err)
	}
	if got := splitCommas(text, nil); !reflect.DeepEqual(trimAll(got), trimAll(want)) {
		t.Fatalf("%q: split into %q, encoding/csv gives %q", text, got, want)
	}
}

func FuzzCSVFields(f *testing.F) {
	f.Add("2026-03-02T01:10:00Z,P-1,3.41,bar")
	f.Add(" a , b,,c\t,\u00a0d\u0085,")
	f.Add(",")
	f.Fuzz(checkSplit)
}

// checkTime: parseTime gives what time.Parse(time.RFC3339Nano, s) gives
// (the reference): the same instant with the same representation once
// in UTC, or an error for the same strings.
func checkTime(t *testing.T, s string) {
	got, gerr := parseTime(s)
	want, werr := time.Parse(time.RFC3339Nano, s)
	if (gerr == nil) != (werr == nil) {
		t.Fatalf("%q: error %v, time.Parse %v", s, gerr, werr)
	}
	if gerr == nil && got.UTC() != want.UTC() {
		t.Fatalf("%q: %v, time.Parse %v", s, got, want)
	}
}

func FuzzParseTime(f *testing.F) {
	for _, s := range []string{"2026-03-02T01:10:00Z", "2024-02-29T23:59:59Z", "2026-02-29T00:00:00Z", "0000-01-01T00:00:00Z",
		"2026-03-02T24:00:00Z", "2026-03-02T01:10:60Z", "2026-13-02T01:10:00Z", "2026-03-02T01:10:00+02:00", "2026-03-02T01:10:00.5Z"} {
		f.Add(s)
	}
	f.Fuzz(checkTime)
}

// Every valid whole-second UTC time of some years, and every broken
// variant of one, against time.Parse.
func TestParseTimeAgainstTimeParse(t *testing.T) {
	rnd := rand.New(rand.NewPCG(4, 4))
	for i := 0; i < 20000; i++ {
		at := time.Date(1+rnd.IntN(9998), time.Month(1+rnd.IntN(12)), 1+rnd.IntN(31), rnd.IntN(24), rnd.IntN(60), rnd.IntN(60), 0, time.UTC)
		s := at.Format(time.RFC3339)
		checkTime(t, s)
		b := []byte(s)
		b[rnd.IntN(len(b))] = "0123456789:-TZ+ x"[rnd.IntN(17)]
		checkTime(t, string(b))
	}
}

// orderBuffer gives back, at every pop, the least reading it holds by
// time, sensor and file position (the reference: a full scan of what it
// holds), for input in order, reversed, and shuffled within a window,
// with repeats of (sensor, time), pushes and pops interleaved, and
// every reading pushed comes back once.
func TestOrderBufferPopsTheLeast(t *testing.T) {
	rnd := rand.New(rand.NewPCG(8, 9))
	t0 := time.Date(2026, 3, 2, 0, 0, 0, 0, time.UTC)
	for trial := 0; trial < 300; trial++ {
		n := 1 + rnd.IntN(800)
		var b orderBuffer
		popped := map[int]bool{}
		pop := func() {
			want := b.least()
			if g := b.pop(); g.seq != want.seq || popped[g.seq] {
				t.Fatalf("trial %d: popped seq %d (again: %v), least held is %d", trial, g.seq, popped[g.seq], want.seq)
			}
			popped[want.seq] = true
		}
		for i := 0; i < n; i++ {
			k := i
			switch trial % 3 {
			case 1:
				k = n - i
			case 2:
				k = i + rnd.IntN(40) - 20
			}
			b.push(newItem(telemetry.Reading{Sensor: fmt.Sprintf("S%d", rnd.IntN(30)), Time: t0.Add(time.Duration(k/(1+trial%7*4)) * time.Minute)}, i+1))
			if rnd.IntN(3) == 0 {
				pop()
			}
		}
		for b.len() > 0 {
			pop()
		}
		if len(popped) != n {
			t.Fatalf("trial %d: %d readings back of %d", trial, len(popped), n)
		}
	}
}

// least is the held item a full scan finds smallest (test reference).
func (b *orderBuffer) least() item {
	var best *item
	for i := b.head; i < len(b.run); i++ {
		if best == nil || itemLess(&b.run[i], best) {
			best = &b.run[i]
		}
	}
	for i := range b.late {
		if best == nil || itemLess(&b.late[i], best) {
			best = &b.late[i]
		}
	}
	return *best
}
