package broker

import (
	"context"
	"fmt"
	"log/slog"
	"net"
	"strings"
	"sync"

	mqtt "github.com/mochi-mqtt/server/v2"
	"github.com/mochi-mqtt/server/v2/listeners"
	"github.com/mochi-mqtt/server/v2/packets"
	"github.com/rs/zerolog"
)

// Config says where the broker listens.
type Config struct {
	// Address is host:port on loopback; default "127.0.0.1:0" (a free
	// port, see Broker.URL). A non-loopback host is an error.
	Address string
}

// Broker is a running embedded broker. Close stops it; Close is
// idempotent.
type Broker struct {
	srv       *mqtt.Server
	addr      string
	log       zerolog.Logger
	closeOnce sync.Once
	closeErr  error
}

// Start starts the broker and returns once it accepts connections.
func Start(cfg Config, log zerolog.Logger) (*Broker, error) {
	addr := cfg.Address
	if addr == "" {
		addr = "127.0.0.1:0"
	}
	host, _, err := net.SplitHostPort(addr)
	if err != nil {
		return nil, fmt.Errorf("embedded broker: address %q: %w", addr, err)
	}
	if ip := net.ParseIP(host); host != "localhost" && (ip == nil || !ip.IsLoopback()) {
		return nil, fmt.Errorf("embedded broker: address %q is not on loopback (127.0.0.1 or ::1)", addr)
	}
	log = log.With().Str("component", "broker").Logger()
	// Raise the per-client limits above the ingest client's queue (16384):
	// at mochi's defaults (8192) a backlog makes it drop QoS 1 messages
	// for good (mochi-mqtt/server issue 340).
	caps := mqtt.NewDefaultServerCapabilities()
	caps.MaximumInflight = 65535
	caps.MaximumClientWritesPending = 65536
	srv := mqtt.New(&mqtt.Options{
		Logger:       slog.New(&slogBridge{log: log}),
		InlineClient: false,
		Capabilities: caps,
	})
	if err := srv.AddHook(new(loopbackOnly), nil); err != nil {
		return nil, fmt.Errorf("embedded broker: auth hook: %w", err)
	}
	// Listen ourselves so that a ":0" port is known before Serve.
	ln := listeners.NewTCP(listeners.Config{ID: "loopback", Address: addr})
	if err := srv.AddListener(ln); err != nil {
		return nil, fmt.Errorf("embedded broker: listen on %s: %w", addr, err)
	}
	if err := srv.Serve(); err != nil {
		_ = srv.Close()
		return nil, fmt.Errorf("embedded broker: serve: %w", err)
	}
	b := &Broker{srv: srv, addr: ln.Address(), log: log}
	log.Info().Str("address", b.addr).Bool("persistent", false).Msg("embedded broker listening")
	return b, nil
}

// Addr returns host:port the broker listens on.
func (b *Broker) Addr() string { return b.addr }

// URL returns tcp://host:port for the MQTT client.
func (b *Broker) URL() string { return "tcp://" + b.addr }

// Close stops the broker and disconnects its clients.
func (b *Broker) Close() error {
	b.closeOnce.Do(func() {
		b.closeErr = b.srv.Close()
		b.log.Info().Msg("embedded broker stopped")
	})
	return b.closeErr
}

// Stats are the broker's counters.
type Stats struct {
	ClientsConnected int64
	MessagesReceived int64
	MessagesSent     int64
	// MessagesDropped counts messages dropped to slow subscribers;
	// InflightDropped counts QoS 1 messages dropped from the in-flight
	// window. Both mean readings lost: export them.
	MessagesDropped int64
	InflightDropped int64
}

// Stats reads the broker's counters (safe from any goroutine).
func (b *Broker) Stats() Stats {
	info := b.srv.Info.Clone()
	return Stats{
		ClientsConnected: info.ClientsConnected,
		MessagesReceived: info.MessagesReceived,
		MessagesSent:     info.MessagesSent,
		MessagesDropped:  info.MessagesDropped,
		InflightDropped:  info.InflightDropped,
	}
}

// loopbackOnly admits clients connecting from a loopback address and lets
// admitted clients publish and subscribe anywhere.
type loopbackOnly struct {
	mqtt.HookBase
}

func (h *loopbackOnly) ID() string { return "loopback-only" }

func (h *loopbackOnly) Provides(b byte) bool {
	return b == mqtt.OnConnectAuthenticate || b == mqtt.OnACLCheck
}

func (h *loopbackOnly) OnConnectAuthenticate(cl *mqtt.Client, _ packets.Packet) bool {
	return isLoopback(cl.Net.Remote)
}

func (h *loopbackOnly) OnACLCheck(*mqtt.Client, string, bool) bool { return true }

func isLoopback(remote string) bool {
	host, _, err := net.SplitHostPort(remote)
	if err != nil {
		host = remote
	}
	ip := net.ParseIP(strings.Trim(host, "[]"))
	return ip != nil && ip.IsLoopback()
}

// slogBridge sends the broker's slog records to zerolog at their level.
type slogBridge struct {
	log   zerolog.Logger
	attrs []slog.Attr
	group string
}

func (s *slogBridge) Enabled(_ context.Context, l slog.Level) bool {
	return s.log.GetLevel() <= zlevel(l)
}

func (s *slogBridge) Handle(_ context.Context, r slog.Record) error {
	ev := s.log.WithLevel(zlevel(r.Level))
	if ev == nil {
		return nil
	}
	add := func(a slog.Attr) bool {
		key := a.Key
		if s.group != "" {
			key = s.group + "." + key
		}
		if err, ok := a.Value.Any().(error); ok {
			ev = ev.AnErr(key, err)
		} else {
			ev = ev.Str(key, a.Value.String())
		}
		return true
	}
	for _, a := range s.attrs {
		add(a)
	}
	r.Attrs(add)
	ev.Msg(r.Message)
	return nil
}

func (s *slogBridge) WithAttrs(attrs []slog.Attr) slog.Handler {
	c := *s
	c.attrs = append(append([]slog.Attr(nil), s.attrs...), attrs...)
	return &c
}

func (s *slogBridge) WithGroup(name string) slog.Handler {
	c := *s
	if c.group != "" {
		name = c.group + "." + name
	}
	c.group = name
	return &c
}

func zlevel(l slog.Level) zerolog.Level {
	switch {
	case l >= slog.LevelError:
		return zerolog.ErrorLevel
	case l >= slog.LevelWarn:
		return zerolog.WarnLevel
	case l >= slog.LevelInfo:
		return zerolog.InfoLevel
	}
	return zerolog.DebugLevel
}
