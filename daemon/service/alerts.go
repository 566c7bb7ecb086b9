package service

import (
	"fmt"
	"path/filepath"
	"strings"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"

	"plumbline/alerts"
)

// openAlerts decodes the `alerts:` section (an empty one gives the
// log channel only), builds the channels and opens the alert store under
// data_dir. The MQTT channel publishes through a paho client that Run
// connects; messages wait in the durable outbox until it does.
func (s *Service) openAlerts() error {
	var cfg alerts.Config
	if s.cfg.Alerts.Kind != 0 {
		c, err := alerts.DecodeConfig(&s.cfg.Alerts)
		if err != nil {
			return fmt.Errorf("%s: alerts: %w", s.cfg.File, err)
		}
		cfg = c
	}
	cfg.Resolve(filepath.Dir(s.cfg.File))
	pub := alerts.PublisherFunc(func(topic string, qos byte, retained bool, payload []byte) error {
		s.mu.Lock()
		c := s.alertPub
		s.mu.Unlock()
		if c == nil || !c.IsConnectionOpen() {
			return fmt.Errorf("mqtt alert publisher not connected")
		}
		tok := c.Publish(topic, qos, retained, payload)
		if !tok.WaitTimeout(10 * time.Second) {
			return fmt.Errorf("mqtt publish %s timed out", topic)
		}
		return tok.Error()
	})
	chans, err := alerts.BuildChannels(cfg, pub)
	if err != nil {
		return err
	}
	net := s.cfg.Network
	m, err := alerts.Open(alerts.Options{Config: cfg, DataDir: s.cfg.DataDir, Channels: chans, Logger: s.log,
		Locator: func(id string) (float64, float64, bool) {
			if i, ok := net.NodeIndex(id); ok && net.Nodes[i].HasCoord {
				return net.Nodes[i].Coord.Lon, net.Nodes[i].Coord.Lat, true
			}
			if l, ok := net.LinkIndex(id); ok {
				a, b := net.Nodes[net.Links[l].From], net.Nodes[net.Links[l].To]
				if a.HasCoord && b.HasCoord {
					return (a.Coord.Lon + b.Coord.Lon) / 2, (a.Coord.Lat + b.Coord.Lat) / 2, true
				}
			}
			return 0, 0, false
		}})
	if err != nil {
		return err
	}
	s.alerts = m
	if cfg.APITokenFile != "" {
		tok, err := alerts.ReadSecret(cfg.APITokenFile)
		if err != nil {
			m.Close()
			return fmt.Errorf("alerts: api token: %w", err)
		}
		api, err := alerts.NewAPI(m, []byte(strings.TrimSpace(string(tok))))
		if err != nil {
			m.Close()
			return err
		}
		s.alertAPI = api
	}
	return nil
}

// startAlertPublisher connects the client the alert MQTT channel publishes
// through (same broker as ingest, its own client id).
func (s *Service) startAlertPublisher(url string) error {
	c := s.cfg.MQTT
	id := c.ClientID
	if id == "" {
		id = "plumbline"
	}
	opts := paho.NewClientOptions().AddBroker(url).SetClientID(id + "-alerts").
		SetCleanSession(true).SetAutoReconnect(true).SetConnectRetry(true).
		SetMaxReconnectInterval(30 * time.Second).SetKeepAlive(30 * time.Second)
	if c.Username != "" {
		opts.SetCredentialsProvider(func() (string, string) {
			pw := ""
			if c.PasswordFile != "" {
				if b, err := alerts.ReadSecret(c.PasswordFile); err == nil {
					pw = strings.TrimSpace(string(b))
				}
			}
			return c.Username, pw
		})
	}
	cl := paho.NewClient(opts)
	s.mu.Lock()
	s.alertPub = cl
	s.mu.Unlock()
	tok := cl.Connect()
	if !tok.WaitTimeout(5 * time.Second) {
		return fmt.Errorf("mqtt alert publisher: connect pending")
	}
	return tok.Error()
}
