// Package service wires plumbline's components into the long-running
// service: MQTT ingest (or the embedded broker), the durable store of
// readings and results, the pipeline (alignment and detection), alerts,
// detector state kept across restarts, and the HTTP surface.
//
// # Lifecycle
//
// New loads and validates everything and starts nothing. Run starts the
// components, blocks until its context ends, then stops them in order:
//
//  1. MQTT ingest stops taking messages and drains its queue (readings it
//     accepted are already durable in the store or its spool);
//  2. the step in hand is finished and the detector state saved;
//  3. the store writer drains its spool within the shutdown deadline;
//  4. the HTTP server shuts down;
//  5. alerts stop delivering and their store closes;
//  6. the embedded broker stops.
//
// A component that fails on its own (the HTTP listener, the store writer,
// alert delivery, ingest) stops the whole service the same way, and Run
// returns its error.
//
// Nothing consumes telemetry before the configuration and model have
// loaded: a ready channel is closed once everything listens.
package service

import (
	"context"
	"errors"
	"fmt"
	"math"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"sync"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"
	"github.com/rs/zerolog"
	"golang.org/x/sync/errgroup"

	"plumbline/alerts"
	"plumbline/daemon/config"
	"plumbline/daemon/pipeline"
	"plumbline/ingest/broker"
	"plumbline/ingest/decode"
	"plumbline/ingest/filestore"
	"plumbline/ingest/lineproto"
	"plumbline/ingest/mqtt"
	"plumbline/ingest/spool"
	"plumbline/ingest/store"
	"plumbline/model/detect"
	"plumbline/model/finding"
	"plumbline/model/network"
	"plumbline/model/telemetry"
)

// Options tune a Service beyond its configuration file.
type Options struct {
	Logger zerolog.Logger
	// ShutdownTimeout bounds the whole stop sequence (default 8 s, within
	// the 10 s a service manager allows).
	ShutdownTimeout time.Duration
	// MaxPast is how old a reading's timestamp may be on arrival (default
	// 7 days); the demo replays a history older than that.
	MaxPast time.Duration
	// WallClock advances the aligner by the wall clock so quiet sensors
	// still close their steps (default on; the demo runs on simulated time
	// and turns it off).
	NoWallClock bool
	// Listen overrides the configured HTTP address ("" keeps it).
	Listen string
	// Handler builds the HTTP handler; nil serves the built-in minimum
	// (health, readiness, metrics, JSON view).
	Handler func(s *Service) http.Handler
	// OnStep, when set, sees every step after the service did (tests,
	// the demo's progress line).
	OnStep func(telemetry.Snapshot, *detect.StepResult)
	// CalibrationEvery and CalibrationWindow override the configuration's
	// calibration.every and window (tests; a negative interval turns
	// periodic recalibration off).
	CalibrationEvery, CalibrationWindow time.Duration
}

// Service is the running plumbline service. Its exported methods are
// safe for concurrent use.
type Service struct {
	cfg *config.Config
	opt Options
	log zerolog.Logger

	broker   *broker.Broker
	mqttURL  string
	decoder  *decode.Pipeline
	ingest   *mqtt.Client
	fileSt   *filestore.Store
	writer   *store.Writer
	spool    *spool.Spool
	sink     pipeline.PointSink
	alerts   *alerts.Manager
	alertPub paho.Client
	alertAPI http.Handler
	httpSrv  *http.Server
	listener net.Listener

	mu       sync.Mutex // guards pipe and view
	pipe     *pipeline.Pipeline
	view     View
	stepTime time.Duration // the detector's last step
	lastSave time.Time
	// net is the network the pipeline runs on (the recorded one or an
	// adopted calibration); lastStep the end of the last step processed;
	// lastDecision the last recalibration's (recalibrate.go).
	net          *network.Network
	lastStep     time.Time
	lastDecision *Decision
	recalMu      sync.Mutex // one recalibration at a time

	// alertSeen is the Updated time of each alert last written to the
	// store's `alert` measurement (s.mu held).
	alertSeen map[string]time.Time

	ready     chan struct{}
	readyOnce sync.Once
	metrics   metrics
}

// statePath is where the detector's state is kept between runs.
func (s *Service) statePath() string { return filepath.Join(s.cfg.DataDir, "detector.state") }

// New builds the service from a loaded configuration. It opens the store
// and the alert store and restores the detector's state, but connects to
// nothing and serves nothing until Run.
func New(cfg *config.Config, opt Options) (*Service, error) {
	if opt.ShutdownTimeout <= 0 {
		opt.ShutdownTimeout = 8 * time.Second
	}
	s := &Service{cfg: cfg, opt: opt, log: opt.Logger, ready: make(chan struct{})}
	if err := os.MkdirAll(cfg.DataDir, 0o750); err != nil {
		return nil, fmt.Errorf("data_dir: %w", err)
	}
	var err error
	if err = s.openStore(); err != nil {
		return nil, err
	}
	pcfg := cfg
	net, adopted := s.startNetwork()
	if net != cfg.Network {
		c := *cfg
		c.Network = net
		pcfg = &c
	}
	s.net = net
	s.pipe, err = pipeline.New(pipeline.Options{Config: pcfg, Store: s.sink, OnStep: s.onStep})
	if err != nil {
		s.closeStore()
		return nil, err
	}
	restored := false
	if b, err := os.ReadFile(s.statePath()); err == nil {
		if err := s.pipe.Detector().Restore(b); err != nil {
			s.log.Warn().Err(err).Msg("detector state not restored; starting fresh")
		} else {
			restored = true
			s.log.Info().Str("file", s.statePath()).Msg("detector state restored")
		}
	}
	if !restored {
		s.seedNoise(adopted)
	}
	decs := map[string]decode.Decoder{}
	for id, d := range cfg.Decode {
		dec, err := decode.New(decode.Spec{Format: d.Format, Value: d.Value, Time: d.Time, Unit: d.Unit, TimeFormat: d.TimeFormat})
		if err != nil {
			s.closeStore()
			return nil, fmt.Errorf("sensor %s: decode: %w", id, err)
		}
		decs[id] = dec
	}
	maxPast := opt.MaxPast
	s.decoder, err = decode.NewPipeline(cfg.Sensors, decode.Options{SensorDecoders: decs, MaxPast: maxPast, Log: s.log.With().Str("component", "decode").Logger()})
	if err != nil {
		s.closeStore()
		return nil, err
	}
	if err := s.openAlerts(); err != nil {
		s.closeStore()
		return nil, err
	}
	s.view = s.initialView()
	if restored {
		if err := s.catchUp(); err != nil {
			s.log.Warn().Err(err).Msg("catch-up from the store incomplete")
		}
	}
	return s, nil
}

// catchUp feeds the pipeline the stored readings newer than the restored
// detector state: readings made durable and acknowledged after the last
// state save (a crash between the two) reach the detector after all.
func (s *Service) catchUp() error {
	last := s.pipe.Detector().LastStep()
	if last.IsZero() {
		return nil
	}
	from := last.Add(s.cfg.Step)
	var src interface {
		Read(ctx context.Context, from, to time.Time, sensors []string, fn func(telemetry.Reading) error) error
	}
	if s.fileSt != nil {
		src = s.fileSt
	} else {
		sc, err := storeConfig(s.cfg)
		if err != nil {
			return err
		}
		is, err := store.NewSource(sc)
		if err != nil {
			return err
		}
		defer is.Close()
		src = is
	}
	ids := make([]string, len(s.cfg.Sensors))
	for i, sen := range s.cfg.Sensors {
		ids[i] = sen.ID
	}
	n := 0
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Minute)
	defer cancel()
	err := src.Read(ctx, from, time.Now().Add(time.Hour), ids, func(r telemetry.Reading) error {
		n++
		return s.pipe.Add(r)
	})
	s.log.Info().Time("from", from).Int("readings", n).Msg("caught up from the store")
	return err
}

// storeConfig is the InfluxDB client configuration of c, with the token
// read from its file.
func storeConfig(c *config.Config) (store.Config, error) {
	sc := store.Config{URL: c.Store.URL, Org: c.Store.Org, Bucket: c.Store.Bucket, CreateDatabase: true}
	if c.Store.TokenFile != "" {
		b, err := os.ReadFile(c.Store.TokenFile)
		if err != nil {
			return sc, fmt.Errorf("store token: %w", err)
		}
		sc.Token = string(trimSpace(b))
	}
	return sc, nil
}

func (s *Service) openStore() error {
	c := s.cfg
	if c.Store.Embedded() {
		fs, err := filestore.Open(filepath.Join(c.DataDir, "store"), filestore.Options{})
		if err != nil {
			return err
		}
		s.fileSt, s.sink = fs, fs
		return nil
	}
	sc := store.Config{URL: c.Store.URL, Org: c.Store.Org, Bucket: c.Store.Bucket, CreateDatabase: true}
	if c.Store.TokenFile != "" {
		b, err := os.ReadFile(c.Store.TokenFile)
		if err != nil {
			return fmt.Errorf("store token: %w", err)
		}
		sc.Token = string(trimSpace(b))
	}
	sp, _, err := spool.Open(filepath.Join(c.DataDir, "spool"), spool.Options{})
	if err != nil {
		return err
	}
	w, err := store.NewWriter(sc, sp, s.log)
	if err != nil {
		sp.Close()
		return err
	}
	s.spool, s.writer, s.sink = sp, w, w
	return nil
}

func (s *Service) closeStore() {
	if s.fileSt != nil {
		s.fileSt.Close()
	}
	if s.writer != nil {
		s.writer.Close()
		s.spool.Close()
	}
}

func trimSpace(b []byte) []byte {
	for len(b) > 0 && (b[len(b)-1] == '\n' || b[len(b)-1] == '\r' || b[len(b)-1] == ' ') {
		b = b[:len(b)-1]
	}
	return b
}

// Ready is closed once the service listens and consumes telemetry.
func (s *Service) Ready() <-chan struct{} { return s.ready }

// Config returns the service's configuration.
func (s *Service) Config() *config.Config { return s.cfg }

// MQTTURL is the broker the service subscribes to (the embedded one's
// loopback address when none is configured); empty before Run.
func (s *Service) MQTTURL() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.mqttURL
}

// Addr is the HTTP listener's address; empty before Run.
func (s *Service) Addr() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.listener == nil {
		return ""
	}
	return s.listener.Addr().String()
}

// Alerts returns the alert manager.
func (s *Service) Alerts() *alerts.Manager { return s.alerts }

// AlertsAPI returns the operator actions' HTTP handler (nil without an
// API token).
func (s *Service) AlertsAPI() http.Handler { return s.alertAPI }

// Accept makes readings durable in the store, then feeds them to the
// pipeline: the MQTT client calls it before acknowledging, and the demo
// feeds history through it. Repeats of a (sensor, time) are harmless: the
// store overwrites the same point and the aligner averages them in.
func (s *Service) Accept(ctx context.Context, rs []telemetry.Reading) error {
	pts := make([]lineproto.Point, 0, len(rs))
	for _, r := range rs {
		sen, _ := s.cfg.Sensor(r.Sensor)
		pts = append(pts, lineproto.FromReading(r, sen.Quantity, sen.Zone))
	}
	if err := s.sink.Add(pts...); err != nil {
		return fmt.Errorf("store readings: %w", err)
	}
	s.mu.Lock()
	defer s.mu.Unlock()
	for _, r := range rs {
		if err := s.pipe.Add(r); err != nil {
			return err
		}
	}
	s.metrics.accepted.Add(uint64(len(rs)))
	return nil
}

// Flush closes every step ending at or before end (the demo's last step).
func (s *Service) Flush(end time.Time) error {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.pipe.Flush(end)
}

// Findings returns every finding so far.
func (s *Service) Findings() []finding.Finding {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.pipe.Findings()
}

// onStep runs inside the pipeline (s.mu held): keep the view, feed the
// alerts, save the detector state every minute of wall time and at every
// step that raised a finding.
func (s *Service) onStep(snap telemetry.Snapshot, res *detect.StepResult) error {
	s.updateView(snap, res)
	s.lastStep = snap.Step.Add(s.cfg.Step)
	s.metrics.steps.Add(1)
	s.metrics.iterations.Add(uint64(res.Iterations))
	for _, f := range res.Findings {
		s.metrics.countFinding(string(f.Kind))
	}
	if s.alerts != nil {
		ctx := context.Background()
		for _, f := range s.pipe.Detector().Active() {
			if _, err := s.alerts.Observe(ctx, f); err != nil {
				s.log.Error().Err(err).Str("kind", string(f.Kind)).Str("zone", f.Zone).Msg("alert not updated")
			}
		}
		s.storeAlerts()
	}
	// A raised finding is saved at once, so that a crash right after the
	// alert does not make the restarted detector find the same event anew.
	if len(res.Findings) > 0 || time.Since(s.lastSave) > time.Minute {
		s.saveState()
	}
	if s.opt.OnStep != nil {
		s.opt.OnStep(snap, res)
	}
	s.stepTime = res.Elapsed
	return nil
}

// storeAlerts writes an `alert` point for every alert that changed since
// it was last written: its state, severity and size over time, beside the
// findings (s.mu held).
func (s *Service) storeAlerts() {
	as, err := s.alerts.Alerts(true)
	if err != nil {
		return
	}
	if s.alertSeen == nil {
		s.alertSeen = map[string]time.Time{}
	}
	var pts []lineproto.Point
	for _, a := range as {
		if seen, ok := s.alertSeen[a.ID]; ok && !a.Updated.After(seen) {
			continue
		}
		s.alertSeen[a.ID] = a.Updated
		pts = append(pts, lineproto.Stamp(lineproto.MeasurementAlert, a.Updated, []lineproto.Field{
			{Key: "state", Value: string(a.State)}, {Key: "severity", Value: string(a.Severity)},
			{Key: "size_lps", Value: a.SizeLPS}, {Key: "open_fraction", Value: a.OpenFrac},
			{Key: "best", Value: a.Best()}, {Key: "level", Value: int64(a.Level)},
		}, "id", a.ID, "zone", a.Zone, "kind", string(a.Kind)))
	}
	if len(pts) > 0 {
		if err := s.sink.Add(pts...); err != nil {
			s.log.Error().Err(err).Msg("alert points not stored")
		}
	}
}

// saveState writes the detector's state atomically: a temporary file,
// fsync, rename (s.mu held).
func (s *Service) saveState() {
	b, err := s.pipe.Detector().State()
	if err == nil {
		err = writeFileAtomic(s.statePath(), b)
	}
	if err != nil {
		s.log.Error().Err(err).Msg("detector state not saved")
		return
	}
	s.lastSave = time.Now()
}

func writeFileAtomic(path string, b []byte) error {
	tmp, err := os.CreateTemp(filepath.Dir(path), ".state-*")
	if err != nil {
		return err
	}
	if _, err := tmp.Write(b); err != nil {
		tmp.Close()
		os.Remove(tmp.Name())
		return err
	}
	if err := tmp.Sync(); err != nil {
		tmp.Close()
		os.Remove(tmp.Name())
		return err
	}
	if err := tmp.Close(); err != nil {
		os.Remove(tmp.Name())
		return err
	}
	return os.Rename(tmp.Name(), path)
}

// Run starts the components and blocks until ctx ends; then it stops
// them in the documented order within Options.ShutdownTimeout.
func (s *Service) Run(ctx context.Context) error {
	c := s.cfg
	mqttURL := c.MQTT.URL
	if c.MQTT.Embedded() {
		b, err := broker.Start(broker.Config{}, s.log)
		if err != nil {
			return err
		}
		s.broker = b
		mqttURL = b.URL()
		s.log.Info().Str("address", b.Addr()).Msg("embedded MQTT broker on loopback (it keeps no messages across a crash)")
	}
	s.mu.Lock()
	s.mqttURL = mqttURL
	s.mu.Unlock()
	ing, err := mqtt.New(mqtt.Config{URL: mqttURL, ClientID: c.MQTT.ClientID, Username: c.MQTT.Username, PasswordFile: c.MQTT.PasswordFile,
		CAFile: c.MQTT.CAFile, CertFile: c.MQTT.CertFile, KeyFile: c.MQTT.KeyFile, KeepAlive: c.MQTT.KeepAlive}, s.decoder, mqtt.SinkFunc(s.Accept), s.log)
	if err != nil {
		s.stopBroker()
		return err
	}
	s.ingest = ing
	if err := s.startAlertPublisher(mqttURL); err != nil {
		s.log.Warn().Err(err).Msg("alert MQTT publisher not connected yet; it keeps trying")
	}
	listen := c.HTTP.Listen
	if s.opt.Listen != "" {
		listen = s.opt.Listen
	}
	ln, err := net.Listen("tcp", listen)
	if err != nil {
		if s.alertPub != nil {
			s.alertPub.Disconnect(0)
		}
		if s.alerts != nil {
			s.alerts.Close()
		}
		s.closeStore()
		s.stopBroker()
		return fmt.Errorf("http: %w", err)
	}
	var h http.Handler
	if s.opt.Handler != nil {
		h = s.opt.Handler(s)
	} else {
		h = s.MinimalHandler()
	}
	s.mu.Lock()
	s.listener = ln
	s.mu.Unlock()
	s.httpSrv = &http.Server{Handler: h, ReadHeaderTimeout: 10 * time.Second}
	s.log.Info().Str("address", ln.Addr().String()).Msg("http listening")

	// Components run in groups so that they stop in order; any of them
	// failing on its own stops the service.
	ctx, failed := context.WithCancelCause(ctx)
	defer failed(nil)
	guard := func(name string, run func() error) func() error {
		return func() error {
			err := run()
			if err != nil && !errors.Is(err, context.Canceled) {
				s.log.Error().Err(err).Str("component", name).Msg("component stopped; stopping the service")
				failed(fmt.Errorf("%s: %w", name, err))
			}
			return err
		}
	}
	ingestCtx, stopIngest := context.WithCancel(context.WithoutCancel(ctx))
	backCtx, stopBack := context.WithCancel(context.WithoutCancel(ctx))
	var ingestG, backG errgroup.Group
	ingestG.Go(guard("mqtt", func() error { return ing.Run(ingestCtx) }))
	if !s.opt.NoWallClock {
		ingestG.Go(func() error { s.clock(ingestCtx); return nil })
	}
	if s.writer != nil {
		backG.Go(guard("store", func() error { return s.writer.Run(backCtx) }))
	}
	if s.alerts != nil {
		backG.Go(guard("alerts", func() error { return s.alerts.Run(backCtx) }))
	}
	if every := s.recalEvery(); every > 0 {
		backG.Go(func() error { s.recalibrateLoop(backCtx, every); return nil })
	}
	backG.Go(guard("http", func() error {
		if err := s.httpSrv.Serve(ln); !errors.Is(err, http.ErrServerClosed) {
			return err
		}
		return nil
	}))
	s.readyOnce.Do(func() { close(s.ready) })

	<-ctx.Done()
	s.log.Info().Msg("stopping")
	deadline, cancel := context.WithTimeout(context.Background(), s.opt.ShutdownTimeout)
	defer cancel()
	// 1. ingest stops and drains.
	stopIngest()
	errs := []error{ingestG.Wait()}
	// 2. the step in hand was finished by the drain; save the state.
	s.mu.Lock()
	s.saveState()
	s.mu.Unlock()
	// 3. the store's spool drains within the deadline.
	if s.writer != nil {
		if err := s.writer.Drain(deadline); err != nil {
			errs = append(errs, fmt.Errorf("store drain: %w", err))
		}
	}
	// 4. alerts and 5. HTTP stop.
	if err := s.httpSrv.Shutdown(deadline); err != nil {
		errs = append(errs, fmt.Errorf("http shutdown: %w", err))
	}
	stopBack()
	if err := backG.Wait(); err != nil && !errors.Is(err, context.Canceled) {
		errs = append(errs, err)
	}
	if s.alerts != nil {
		errs = append(errs, s.alerts.Close())
	}
	if s.alertPub != nil {
		s.alertPub.Disconnect(250)
	}
	s.closeStore()
	// 6. the embedded broker.
	s.stopBroker()
	s.log.Info().Msg("stopped")
	if cause := context.Cause(ctx); cause != nil && !errors.Is(cause, context.Canceled) {
		errs = append(errs, cause)
	}
	return errors.Join(errs...)
}

func (s *Service) stopBroker() {
	if s.broker != nil {
		s.broker.Close()
	}
}

// clock advances the aligner with the wall clock once a minute, so that a
// silent sensor still lets its steps close (as missing).
func (s *Service) clock(ctx context.Context) {
	t := time.NewTicker(time.Minute)
	defer t.Stop()
	for {
		select {
		case <-ctx.Done():
			return
		case now := <-t.C:
			s.mu.Lock()
			if err := s.pipe.Advance(now.Add(-2 * s.cfg.Step)); err != nil {
				s.log.Error().Err(err).Msg("pipeline stopped")
			}
			s.mu.Unlock()
		}
	}
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// Logger returns the service's logger.
func (s *Service) Logger() zerolog.Logger { return s.log }

// LastStep returns the start of the last model step the detector processed.
func (s *Service) LastStep() time.Time {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.pipe.Detector().LastStep()
}
