package alerts

import (
	"context"

	"github.com/rs/zerolog"
)

// LogChannel writes each notification as one structured log line. It is
// always present and never fails.
type LogChannel struct {
	log zerolog.Logger
}

// NewLogChannel returns a log channel writing to log.
func NewLogChannel(log zerolog.Logger) *LogChannel {
	return &LogChannel{log: log.With().Str("component", "alerts").Str("channel", ChannelLog).Logger()}
}

// Name returns "log".
func (c *LogChannel) Name() string { return ChannelLog }

// Send writes n at warn level for urgent alerts and info otherwise.
func (c *LogChannel) Send(ctx context.Context, n Notification) error {
	ev := c.log.Info()
	if n.Alert.Severity == Urgent && n.Notice != NoticeCleared && n.Notice != NoticeAcknowledged {
		ev = c.log.Warn()
	}
	ev = ev.Uint64("notification", n.ID).Str("notice", string(n.Notice))
	if n.To != nil {
		ev = ev.Str("to", n.To.ID)
	}
	if n.Notice == NoticeSummary {
		ev.Int("held", len(n.Held)).Str("summary", Subject(n)).Msg("alert notification")
		return nil
	}
	a := n.Alert
	ev = ev.Str("alert", a.ID).Str("zone", a.Zone).Str("kind", string(a.Kind)).Str("state", string(a.State)).
		Str("severity", string(a.Severity)).Float64("size_lps", a.SizeLPS).Time("onset", a.Onset).Str("best", a.Best()).Int("level", a.Level+1)
	if n.Actor != "" {
		ev = ev.Str("actor", n.Actor)
	}
	if n.Link != "" {
		ev = ev.Str("link", n.Link)
	}
	ev.Str("summary", Subject(n)).Msg("alert notification")
	return nil
}
