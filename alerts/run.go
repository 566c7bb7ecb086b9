package alerts

import (
	"context"
	"sort"
	"sync"
	"time"
)

// Run delivers notifications and, unless TickInterval is negative, calls
// Tick every TickInterval. It starts one dispatcher goroutine per channel,
// each draining its part of the durable outbox in order, and blocks until
// ctx is cancelled and they have all stopped. A notification being sent
// when ctx ends stays in the outbox and is sent after the next start.
func (m *Manager) Run(ctx context.Context) error {
	var wg sync.WaitGroup
	names := make([]string, 0, len(m.channels))
	for name := range m.channels {
		names = append(names, name)
	}
	sort.Strings(names)
	for _, name := range names {
		wg.Add(1)
		go func() {
			defer wg.Done()
			m.dispatch(ctx, name)
		}()
	}
	if m.tickEvery > 0 {
		wg.Add(1)
		go func() {
			defer wg.Done()
			t := time.NewTicker(m.tickEvery)
			defer t.Stop()
			for {
				select {
				case <-ctx.Done():
					return
				case <-t.C:
					if err := m.Tick(ctx, m.now()); err != nil {
						m.log.Error().Err(err).Msg("tick failed")
					}
				}
			}
		}()
	}
	<-ctx.Done()
	wg.Wait()
	return nil
}

// dispatch is the loop of one channel's dispatcher.
func (m *Manager) dispatch(ctx context.Context, name string) {
	ch, pol, wake := m.channels[name], m.policy[name], m.wake[name]
	log := m.log.With().Str("channel", name).Logger()
	for ctx.Err() == nil {
		n, ok, err := m.st.next(name)
		if err != nil {
			log.Error().Err(err).Msg("outbox read failed")
			sleep(ctx, time.Second)
			continue
		}
		if !ok {
			select {
			case <-ctx.Done():
				return
			case <-wake:
			case <-time.After(time.Minute):
			}
			continue
		}
		attempts, err := m.send(ctx, ch, pol, n)
		if err != nil && ctx.Err() != nil {
			return // not delivered: stays in the outbox for the next start
		}
		rec := DeliveryRecord{Time: m.now().UTC(), Notification: n.ID, Channel: name, Alert: n.Alert.ID, Notice: n.Notice, Attempts: attempts, OK: err == nil}
		if n.To != nil {
			rec.To = n.To.ID
		}
		ev := log.Info()
		if err != nil {
			rec.Error = err.Error()
			m.failed.Add(1)
			ev = log.Error().Err(err)
		}
		ev.Uint64("notification", n.ID).Str("alert", rec.Alert).Str("notice", string(n.Notice)).Str("to", rec.To).Int("attempts", attempts).Bool("ok", rec.OK).Msg("delivery")
		if derr := m.st.done(n, rec); derr != nil {
			log.Error().Err(derr).Msg("delivery log write failed")
			sleep(ctx, time.Second)
			continue
		}
		m.pendingN.Add(-1)
	}
}

// send tries n up to pol.Attempts times with exponential backoff.
func (m *Manager) send(ctx context.Context, ch Channel, pol Delivery, n Notification) (int, error) {
	wait := pol.Backoff
	var err error
	for i := 1; ; i++ {
		cctx, cancel := context.WithTimeout(ctx, pol.Timeout)
		err = ch.Send(cctx, n)
		cancel()
		if err == nil || IsPermanent(err) || i >= pol.Attempts || ctx.Err() != nil {
			return i, err
		}
		m.log.Warn().Err(err).Str("channel", ch.Name()).Uint64("notification", n.ID).Int("attempt", i).Dur("backoff", wait).Msg("delivery failed; retrying")
		if !sleep(ctx, wait) {
			return i, ctx.Err()
		}
		wait = min(2*wait, pol.MaxBackoff)
	}
}

// sleep waits d or until ctx ends; it reports whether d elapsed.
func sleep(ctx context.Context, d time.Duration) bool {
	t := time.NewTimer(d)
	defer t.Stop()
	select {
	case <-ctx.Done():
		return false
	case <-t.C:
		return true
	}
}
