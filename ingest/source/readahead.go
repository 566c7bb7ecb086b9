package source

import (
	"context"
	"errors"
	"sync"
	"time"

	"plumbline/model/telemetry"
)

// readAheadBatch is the number of readings handed over at a time, and
// readAheadBatches how many batches may wait: about 1.5 MB of readings
// held at most, whatever the length of the period.
const (
	readAheadBatch   = 4096
	readAheadBatches = 4
)

// errConsumer stops the reading goroutine after fn failed.
var errConsumer = errors.New("source: read ahead: the consumer stopped")

// ReadAhead is src.Read with the reading (parsing, decoding, sorting)
// done on a second goroutine while fn runs on the caller's: a replay
// uses two cores where one does the detector's work. fn sees the same
// readings in the same order, from the caller's goroutine only, so what
// fn computes is as with src.Read. The goroutine is started and joined
// within the call. Errors are as src.Read's: fn's error comes back as it
// is (and stops the reading), a source error after the readings it let
// through.
func ReadAhead(ctx context.Context, src Source, from, to time.Time, sensors []string, fn func(telemetry.Reading) error) error {
	rctx, cancel := context.WithCancelCause(ctx)
	defer cancel(nil)
	full := make(chan []telemetry.Reading, readAheadBatches)
	free := make(chan []telemetry.Reading, readAheadBatches+2)
	for i := 0; i < readAheadBatches+2; i++ {
		free <- make([]telemetry.Reading, 0, readAheadBatch)
	}
	var readErr error
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		defer close(full)
		batch := <-free
		readErr = src.Read(rctx, from, to, sensors, func(r telemetry.Reading) error {
			batch = append(batch, r)
			if len(batch) < readAheadBatch {
				return nil
			}
			select {
			case full <- batch:
				// Handed over: the consumer owns it now. If the wait for a
				// free one is cut short, nothing is left to flush (sending
				// it again would hand one buffer over twice and overfill
				// free).
				batch = nil
			case <-rctx.Done():
				return context.Cause(rctx)
			}
			select {
			case batch = <-free:
			case <-rctx.Done():
				return context.Cause(rctx)
			}
			return nil
		})
		if len(batch) > 0 {
			select {
			case full <- batch:
			case <-rctx.Done():
			}
		}
	}()
	var fnErr error
	for batch := range full {
		if fnErr == nil {
			for _, r := range batch {
				if err := fn(r); err != nil {
					fnErr = err
					cancel(errConsumer)
					break
				}
			}
		}
		clear(batch)
		free <- batch[:0]
	}
	wg.Wait()
	if fnErr != nil {
		return fnErr
	}
	return readErr
}
