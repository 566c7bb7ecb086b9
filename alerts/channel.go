package alerts

import (
	"context"
	"errors"
)

// Channel delivers notifications by one means (webhook, email, MQTT, log).
//
// Contract:
//   - Name is constant and matches the channel's key in the config and in
//     receivers' contacts (ChannelWebhook, ChannelEmail, ChannelMQTT,
//     ChannelLog, or a new name).
//   - Send delivers one notification and returns only when it is
//     delivered (nil) or has failed. It honours ctx (the dispatcher sets
//     the per-attempt timeout) and must not retry: the dispatcher retries
//     with backoff. Wrap an error that retrying cannot fix with Permanent.
//   - Send is called from one goroutine at a time per channel, in outbox
//     order, and may be called again with the same notification after a
//     restart (at-least-once): n.ID identifies it for de-duplication.
//   - A notification with To == nil is a feed message (every change of an
//     alert); with To set it is for that person. Send must not keep n.
//   - Send never writes secrets into errors or logs.
type Channel interface {
	Name() string
	Send(ctx context.Context, n Notification) error
}

// permanentError marks a delivery failure that retrying cannot fix.
type permanentError struct{ err error }

// Error returns the wrapped error's text.
func (e permanentError) Error() string { return e.err.Error() }

// Unwrap returns the wrapped error.
func (e permanentError) Unwrap() error { return e.err }

// Permanent wraps err so the dispatcher gives up at once (a 4xx answer, a
// rejected address, a notification the channel cannot express).
func Permanent(err error) error {
	if err == nil {
		return nil
	}
	return permanentError{err}
}

// IsPermanent reports whether err was wrapped with Permanent.
func IsPermanent(err error) bool {
	var p permanentError
	return errors.As(err, &p)
}
