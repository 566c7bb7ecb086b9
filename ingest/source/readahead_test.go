package source

import (
	"context"
	"errors"
	"fmt"
	"runtime"
	"testing"
	"time"

	"plumbline/model/telemetry"
)

// listSource delivers its readings in order, checking ctx, then fails
// with err (nil: none).
type listSource struct {
	rs  []telemetry.Reading
	err error
}

func (l listSource) Read(ctx context.Context, from, to time.Time, sensors []string, fn func(telemetry.Reading) error) error {
	for i, r := range l.rs {
		if i%1000 == 0 {
			if err := ctx.Err(); err != nil {
				return err
			}
		}
		if err := fn(r); err != nil {
			return err
		}
	}
	return l.err
}

func readings(n int) []telemetry.Reading {
	t0 := time.Date(2026, 3, 2, 0, 0, 0, 0, time.UTC)
	rs := make([]telemetry.Reading, n)
	for i := range rs {
		rs[i] = telemetry.Reading{Sensor: fmt.Sprint("S", i%7), Time: t0.Add(time.Duration(i/7) * time.Minute), Value: float64(i)}
	}
	return rs
}

// ReadAhead hands fn what Read hands it, in the same order (the
// reference is the list itself), for lengths around the batch size;
// a source's error comes back after every reading it let through.
func TestReadAheadSameReadings(t *testing.T) {
	bad := errors.New("store went away")
	for _, n := range []int{0, 1, readAheadBatch - 1, readAheadBatch, readAheadBatch + 1, 5*readAheadBatch + 17, 40 * readAheadBatch} {
		for _, srcErr := range []error{nil, bad} {
			src := listSource{rs: readings(n), err: srcErr}
			var got []telemetry.Reading
			err := ReadAhead(context.Background(), src, time.Time{}, time.Time{}, nil, func(r telemetry.Reading) error {
				got = append(got, r)
				return nil
			})
			if !errors.Is(err, srcErr) || (srcErr == nil) != (err == nil) {
				t.Fatalf("n=%d: error %v, want %v", n, err, srcErr)
			}
			if len(got) != n {
				t.Fatalf("n=%d: %d readings delivered", n, len(got))
			}
			for i := range got {
				if got[i] != src.rs[i] {
					t.Fatalf("n=%d: reading %d is %+v, want %+v", n, i, got[i], src.rs[i])
				}
			}
		}
	}
}

// An error from fn comes back as it is, stops the reading goroutine and
// no reading after it reaches fn; a cancelled context stops the read.
// No goroutine is left behind either way.
func TestReadAheadStops(t *testing.T) {
	before := runtime.NumGoroutine()
	stop := errors.New("detector failed")
	src := listSource{rs: readings(50 * readAheadBatch)}
	n := 0
	err := ReadAhead(context.Background(), src, time.Time{}, time.Time{}, nil, func(r telemetry.Reading) error {
		n++
		if n == 3*readAheadBatch+5 {
			return stop
		}
		return nil
	})
	if err != stop || n != 3*readAheadBatch+5 {
		t.Fatalf("error %v after %d readings, want the consumer's error after %d", err, n, 3*readAheadBatch+5)
	}
	ctx, cancel := context.WithCancel(context.Background())
	n = 0
	err = ReadAhead(ctx, src, time.Time{}, time.Time{}, nil, func(r telemetry.Reading) error {
		n++
		if n == 2*readAheadBatch {
			cancel()
		}
		return nil
	})
	if !errors.Is(err, context.Canceled) || n >= len(src.rs) {
		t.Fatalf("after cancel: error %v with %d of %d readings", err, n, len(src.rs))
	}
	time.Sleep(10 * time.Millisecond)
	if g := runtime.NumGoroutine(); g > before {
		t.Fatalf("%d goroutines after, %d before", g, before)
	}
}
