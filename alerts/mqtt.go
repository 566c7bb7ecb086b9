package alerts

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"
)

// Publisher publishes one MQTT message; the service passes its own client
// so this package does not depend on ingest/. It must return once the
// broker has accepted the message (for QoS 1, PUBACK) or on failure.
type Publisher interface {
	Publish(topic string, qos byte, retained bool, payload []byte) error
}

// PublisherFunc adapts a function to Publisher.
type PublisherFunc func(topic string, qos byte, retained bool, payload []byte) error

// Publish calls f.
func (f PublisherFunc) Publish(topic string, qos byte, retained bool, payload []byte) error {
	return f(topic, qos, retained, payload)
}

// PahoPublisher adapts a connected paho client, waiting at most timeout
// for each publish (never a bare Wait, LIBRARIES.md).
func PahoPublisher(c paho.Client, timeout time.Duration) Publisher {
	return PublisherFunc(func(topic string, qos byte, retained bool, payload []byte) error {
		tok := c.Publish(topic, qos, retained, payload)
		if !tok.WaitTimeout(timeout) {
			return fmt.Errorf("mqtt publish %s: no acknowledgement within %s", topic, timeout)
		}
		return tok.Error()
	})
}

// MQTT publishes alert state for SCADA and notifications for receivers:
// a feed message goes retained to PREFIX/alert/ZONE/ID (the current state
// of each alert, replaced on every change); a personal one goes, not
// retained, to PREFIX/notify/RECEIVER. The payload is Payload as JSON.
type MQTT struct {
	prefix string
	qos    byte
	pub    Publisher
}

// NewMQTT returns the MQTT channel publishing through pub.
func NewMQTT(cfg MQTTConfig, pub Publisher) (*MQTT, error) {
	if pub == nil {
		return nil, errors.New("alerts: mqtt: no publisher")
	}
	prefix := strings.TrimRight(cfg.TopicPrefix, "/")
	if prefix == "" {
		prefix = "plumbline/alerts"
	}
	return &MQTT{prefix: prefix, qos: cfg.QoS, pub: pub}, nil
}

// Name returns "mqtt".
func (c *MQTT) Name() string { return ChannelMQTT }

// topicPart makes an id safe as one topic level.
func topicPart(s string) string {
	return strings.Map(func(r rune) rune {
		if r == '/' || r == '+' || r == '#' || r == 0 {
			return '_'
		}
		return r
	}, s)
}

// Topic returns the topic and retain flag for n.
func (c *MQTT) Topic(n Notification) (string, bool) {
	if n.To == nil {
		return fmt.Sprintf("%s/alert/%s/%s", c.prefix, topicPart(n.Alert.Zone), topicPart(n.Alert.ID)), true
	}
	return fmt.Sprintf("%s/notify/%s", c.prefix, topicPart(n.To.ID)), false
}

// Send publishes n.
func (c *MQTT) Send(ctx context.Context, n Notification) error {
	body, err := MarshalPayload(n)
	if err != nil {
		return Permanent(fmt.Errorf("mqtt: notification %d: %w", n.ID, err))
	}
	topic, retained := c.Topic(n)
	done := make(chan error, 1)
	go func() { done <- c.pub.Publish(topic, c.qos, retained, body) }()
	select {
	case err := <-done:
		if err != nil {
			return fmt.Errorf("mqtt: %s: %w", topic, err)
		}
		return nil
	case <-ctx.Done():
		return fmt.Errorf("mqtt: %s: %w", topic, ctx.Err())
	}
}

// BuildChannels makes the configured channels, reading secrets from their
// files (cfg paths already resolved). pub is the MQTT publisher (needed
// only when channels.mqtt is set).
func BuildChannels(cfg Config, pub Publisher) ([]Channel, error) {
	var out []Channel
	if w := cfg.Channels.Webhook; w != nil {
		secret, err := ReadSecret(w.SecretFile)
		if err != nil {
			return nil, fmt.Errorf("alerts: webhook: %w", err)
		}
		ch, err := NewWebhook(*w, secret, nil)
		if err != nil {
			return nil, err
		}
		out = append(out, ch)
	}
	if s := cfg.Channels.SMTP; s != nil {
		var pass []byte
		if s.PasswordFile != "" {
			p, err := ReadSecret(s.PasswordFile)
			if err != nil {
				return nil, fmt.Errorf("alerts: smtp: %w", err)
			}
			pass = p
		}
		ch, err := NewEmail(*s, pass, nil)
		if err != nil {
			return nil, err
		}
		out = append(out, ch)
	}
	if m := cfg.Channels.MQTT; m != nil {
		ch, err := NewMQTT(*m, pub)
		if err != nil {
			return nil, err
		}
		out = append(out, ch)
	}
	return out, nil
}
