package main

import (
	"context"
	"fmt"
	"strconv"
	"strings"
	"time"

	mqtt "github.com/eclipse/paho.mqtt.golang"

	"plumbline/model/sim"
	"plumbline/model/telemetry"
)

// livePublisher publishes simulated readings to an MQTT broker as a
// utility's loggers would, paced so that simulated time runs speedup
// times faster than the wall clock.
type livePublisher struct {
	ctx     context.Context
	client  mqtt.Client
	topics  map[string]string
	speedup float64
	simT0   time.Time
	wallT0  time.Time
	buf     []byte
}

func newLivePublisher(ctx context.Context, url string, sensors []telemetry.Sensor, speedup float64, start time.Time) (*livePublisher, error) {
	if speedup <= 0 {
		return nil, fmt.Errorf("--speedup %g: must be positive", speedup)
	}
	opts := mqtt.NewClientOptions().AddBroker(url).
		SetClientID(fmt.Sprintf("plumbline-sim-%d", time.Now().UnixNano())).
		SetCleanSession(true).SetAutoReconnect(true).SetConnectRetry(true).
		SetMaxReconnectInterval(30 * time.Second).SetKeepAlive(30 * time.Second)
	c := mqtt.NewClient(opts)
	tok := c.Connect()
	if !tok.WaitTimeout(30 * time.Second) {
		return nil, fmt.Errorf("mqtt %s: connect timed out", url)
	}
	if err := tok.Error(); err != nil {
		return nil, fmt.Errorf("mqtt %s: %w", url, err)
	}
	p := &livePublisher{ctx: ctx, client: c, topics: map[string]string{}, speedup: speedup, simT0: start, wallT0: time.Now()}
	for _, s := range sensors {
		p.topics[s.ID] = topicFor(s)
	}
	return p, nil
}

// topicFor is the concrete topic a sensor publishes on: its topic, with
// a {sensor} capture replaced by its id and any other wildcard level by
// the id too.
func topicFor(s telemetry.Sensor) string {
	t := strings.ReplaceAll(s.Topic, "{sensor}", s.ID)
	parts := strings.Split(t, "/")
	for i, p := range parts {
		if p == "+" || p == "#" {
			parts[i] = s.ID
		}
	}
	if t == "" {
		return "plumbline/sim/" + s.ID
	}
	return strings.Join(parts, "/")
}

// Publish sends one reading at QoS 1 once its arrival time has come on
// the paced clock.
func (p *livePublisher) Publish(r sim.Reading) error {
	due := p.wallT0.Add(time.Duration(float64(r.Arrival.Sub(p.simT0)) / p.speedup))
	if wait := time.Until(due); wait > 0 {
		select {
		case <-p.ctx.Done():
			return p.ctx.Err()
		case <-time.After(wait):
		}
	}
	b := append(p.buf[:0], `{"value":`...)
	b = strconv.AppendFloat(b, r.Value, 'g', -1, 64)
	b = append(b, `,"time":"`...)
	b = r.Time.UTC().AppendFormat(b, time.RFC3339Nano)
	b = append(b, `","unit":`...)
	b = strconv.AppendQuote(b, r.Unit)
	b = append(b, '}')
	p.buf = b
	tok := p.client.Publish(p.topics[r.Sensor], 1, false, append([]byte(nil), b...))
	select {
	case <-tok.Done():
		if err := tok.Error(); err != nil {
			return fmt.Errorf("publish %s: %w", r.Sensor, err)
		}
	case <-p.ctx.Done():
		return p.ctx.Err()
	case <-time.After(30 * time.Second):
		return fmt.Errorf("publish %s: timed out", r.Sensor)
	}
	return nil
}

// Close disconnects after letting in-flight messages finish.
func (p *livePublisher) Close() { p.client.Disconnect(1000) }
