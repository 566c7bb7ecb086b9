package mqtt

import (
	"context"
	"crypto/tls"
	"crypto/x509"
	"errors"
	"fmt"
	"net/url"
	"os"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"
	"github.com/rs/zerolog"

	"plumbline/ingest/decode"
	"plumbline/model/telemetry"
)

// Sink makes readings durable. Accept is called from one goroutine with a
// batch of readings in receive order; it returns nil only when every
// reading is safe (spooled or stored). It must tolerate repeats of a
// (sensor, time) pair. The slice is reused after Accept returns.
type Sink interface {
	Accept(ctx context.Context, readings []telemetry.Reading) error
}

// SinkFunc adapts a function to Sink.
type SinkFunc func(ctx context.Context, readings []telemetry.Reading) error

// Accept calls f.
func (f SinkFunc) Accept(ctx context.Context, r []telemetry.Reading) error { return f(ctx, r) }

// Config is the `mqtt` block of the service configuration.
type Config struct {
	// URL of the broker: tcp://host:1883, ssl://host:8883, ws://, wss://.
	URL string
	// ClientID must be stable across restarts and unique among the
	// broker's clients (the persistent session hangs on it); default
	// "plumbline-" + host name.
	ClientID string
	// Username and a password from PasswordFile (first line, trailing
	// newline removed) or the environment variable PasswordEnv.
	Username     string
	PasswordFile string
	PasswordEnv  string
	// CAFile is a PEM bundle of CAs to trust instead of the system roots;
	// CertFile and KeyFile a client certificate (both or neither);
	// ServerName overrides the name checked in the broker's certificate.
	CAFile     string
	CertFile   string
	KeyFile    string
	ServerName string
	// KeepAlive (default 30 s, never 0), ConnectTimeout (default 10 s),
	// ConnectRetryInterval (first connect, default 2 s) and
	// MaxReconnectInterval (default 30 s).
	KeepAlive            time.Duration
	ConnectTimeout       time.Duration
	ConnectRetryInterval time.Duration
	MaxReconnectInterval time.Duration
	// QueueSize bounds the messages waiting for the consumer (default
	// 16384); BatchSize bounds a Sink.Accept call (default 1000).
	QueueSize int
	BatchSize int
	// DrainTimeout bounds the work done at stop (default 5 s).
	DrainTimeout time.Duration
	// Subscriptions overrides the filters subscribed to; default the
	// pipeline's (decode.Pipeline.Subscriptions).
	Subscriptions []string
}

// Defaults.
const (
	DefaultKeepAlive            = 30 * time.Second
	DefaultConnectTimeout       = 10 * time.Second
	DefaultConnectRetryInterval = 2 * time.Second
	DefaultMaxReconnectInterval = 30 * time.Second
	DefaultQueueSize            = 16384
	DefaultBatchSize            = 1000
	DefaultDrainTimeout         = 5 * time.Second
	// QoS of every subscription.
	QoS = 1
)

// Stats are the client's counters, for /metrics.
type Stats struct {
	// Received: messages handed to the handler.
	Received uint64
	// Accepted: readings the Sink accepted (repeats included).
	Accepted uint64
	// Rejected: messages the pipeline rejected (see
	// decode.Pipeline.Rejections for sensor and reason).
	Rejected uint64
	// Dropped: messages dropped unacknowledged because the queue was full
	// (redelivered by the broker on the next session).
	Dropped uint64
	// SinkErrors: failed Accept calls (each retried).
	SinkErrors uint64
	// Queued: messages waiting now.
	Queued int
	// Lag: at the last Accept, now minus the newest reading's time.
	Lag time.Duration
}

// Status is the connection's state for the operator page.
type Status struct {
	// Broker is the URL (never with credentials).
	Broker   string
	ClientID string
	// Connected reports whether the connection is up now.
	Connected bool
	// Since is when the connection last went up or down.
	Since time.Time
	// Subscribed reports whether the broker granted every subscription
	// on the current connection.
	Subscribed bool
	// Connects counts successful connections; Lost counts connections
	// lost.
	Connects, Lost uint64
	// LastError is the last connection error (connect failure, loss,
	// subscription refused), with its time.
	LastError   string
	LastErrorAt time.Time
	// Stopped is set when Run has returned, StopCause says why.
	Stopped   bool
	StopCause string
}

type item struct {
	msg     paho.Message
	arrival time.Time
}

// Client is an MQTT ingest client. Build it with New and call Run once.
type Client struct {
	cfg  Config
	pipe *decode.Pipeline
	sink Sink
	log  zerolog.Logger
	tls  *tls.Config
	subs []string

	queue    chan item
	stopping atomic.Bool
	stopped  chan struct{} // closed when Run begins to stop
	paho     atomic.Pointer[paho.Client]
	ran      atomic.Bool

	received, accepted, rejected, dropped, sinkErrors atomic.Uint64
	lag                                               atomic.Int64

	mu     sync.Mutex
	status Status
}

// New checks the configuration (URL, TLS files, credentials source) and
// builds a client; nothing connects until Run.
func New(cfg Config, pipe *decode.Pipeline, sink Sink, log zerolog.Logger) (*Client, error) {
	if pipe == nil || sink == nil {
		return nil, errors.New("mqtt: pipeline and sink are required")
	}
	u, err := url.Parse(cfg.URL)
	if err != nil {
		return nil, fmt.Errorf("mqtt: url %q: %w", cfg.URL, err)
	}
	if u.User != nil {
		return nil, fmt.Errorf("mqtt: url %s: put credentials in username and password_file, not in the URL", u.Redacted())
	}
	if u.Host == "" {
		return nil, fmt.Errorf("mqtt: url %q has no host", cfg.URL)
	}
	secure := false
	switch u.Scheme {
	case "tcp", "mqtt", "ws":
	case "ssl", "tls", "mqtts", "tcps", "wss":
		secure = true
	default:
		return nil, fmt.Errorf("mqtt: url %q: scheme %q is not one of tcp, mqtt, ssl, tls, mqtts, ws, wss", cfg.URL, u.Scheme)
	}
	if cfg.PasswordFile != "" && cfg.PasswordEnv != "" {
		return nil, errors.New("mqtt: give password_file or password_env, not both")
	}
	if (cfg.PasswordFile != "" || cfg.PasswordEnv != "") && cfg.Username == "" {
		return nil, errors.New("mqtt: a password needs a username")
	}
	if cfg.PasswordFile != "" {
		if _, err := readSecret(cfg.PasswordFile); err != nil {
			return nil, fmt.Errorf("mqtt: %w", err)
		}
	}
	if cfg.ClientID == "" {
		host, err := os.Hostname()
		if err != nil || host == "" {
			host = "host"
		}
		cfg.ClientID = "plumbline-" + host
	}
	def := func(d *time.Duration, v time.Duration) {
		if *d <= 0 {
			*d = v
		}
	}
	def(&cfg.KeepAlive, DefaultKeepAlive)
	def(&cfg.ConnectTimeout, DefaultConnectTimeout)
	def(&cfg.ConnectRetryInterval, DefaultConnectRetryInterval)
	def(&cfg.MaxReconnectInterval, DefaultMaxReconnectInterval)
	def(&cfg.DrainTimeout, DefaultDrainTimeout)
	if cfg.QueueSize <= 0 {
		cfg.QueueSize = DefaultQueueSize
	}
	if cfg.BatchSize <= 0 {
		cfg.BatchSize = DefaultBatchSize
	}
	c := &Client{cfg: cfg, pipe: pipe, sink: sink, queue: make(chan item, cfg.QueueSize), stopped: make(chan struct{})}
	if secure {
		if c.tls, err = tlsConfig(cfg, u.Hostname()); err != nil {
			return nil, fmt.Errorf("mqtt: %w", err)
		}
	} else if cfg.CAFile != "" || cfg.CertFile != "" || cfg.KeyFile != "" {
		return nil, fmt.Errorf("mqtt: url %s is not TLS (use ssl:// or wss://) but TLS files are given", u.Redacted())
	}
	c.subs = cfg.Subscriptions
	if len(c.subs) == 0 {
		c.subs = pipe.Subscriptions()
	}
	for _, s := range c.subs {
		if _, err := decode.CompileFilter(s); err != nil {
			return nil, fmt.Errorf("mqtt: subscription: %w", err)
		}
	}
	c.log = log.With().Str("component", "mqtt").Str("broker", u.Redacted()).Str("client_id", cfg.ClientID).Logger()
	c.status = Status{Broker: u.Redacted(), ClientID: cfg.ClientID}
	return c, nil
}

func tlsConfig(cfg Config, host string) (*tls.Config, error) {
	t := &tls.Config{MinVersion: tls.VersionTLS12, ServerName: host}
	if cfg.ServerName != "" {
		t.ServerName = cfg.ServerName
	}
	if cfg.CAFile != "" {
		pem, err := os.ReadFile(cfg.CAFile)
		if err != nil {
			return nil, fmt.Errorf("ca_file: %w", err)
		}
		pool := x509.NewCertPool()
		if !pool.AppendCertsFromPEM(pem) {
			return nil, fmt.Errorf("ca_file %s: no PEM certificate found", cfg.CAFile)
		}
		t.RootCAs = pool
	}
	if (cfg.CertFile == "") != (cfg.KeyFile == "") {
		return nil, errors.New("cert_file and key_file go together")
	}
	if cfg.CertFile != "" {
		pair, err := tls.LoadX509KeyPair(cfg.CertFile, cfg.KeyFile)
		if err != nil {
			return nil, fmt.Errorf("client certificate %s: %w", cfg.CertFile, err)
		}
		t.Certificates = []tls.Certificate{pair}
	}
	return t, nil
}

// readSecret reads the first line of a secret file. The error names the
// file, never its content.
func readSecret(path string) (string, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return "", fmt.Errorf("password_file: %w", err)
	}
	s := string(b)
	if i := strings.IndexAny(s, "\r\n"); i >= 0 {
		s = s[:i]
	}
	return s, nil
}

// credentials is called by paho at each connect.
func (c *Client) credentials() (string, string) {
	switch {
	case c.cfg.PasswordFile != "":
		pw, err := readSecret(c.cfg.PasswordFile)
		if err != nil {
			c.log.Error().Err(err).Msg("cannot read the MQTT password; connecting without it")
			c.noteError(err)
		}
		return c.cfg.Username, pw
	case c.cfg.PasswordEnv != "":
		pw, ok := os.LookupEnv(c.cfg.PasswordEnv)
		if !ok {
			err := fmt.Errorf("password_env: %s is not set", c.cfg.PasswordEnv)
			c.log.Error().Err(err).Msg("cannot read the MQTT password; connecting without it")
			c.noteError(err)
		}
		return c.cfg.Username, pw
	}
	return c.cfg.Username, ""
}

func (c *Client) options() *paho.ClientOptions {
	o := paho.NewClientOptions()
	o.AddBroker(c.cfg.URL)
	o.SetClientID(c.cfg.ClientID)
	o.SetCleanSession(false)
	o.SetOrderMatters(true)
	o.SetAutoAckDisabled(true)
	o.SetAutoReconnect(true)
	o.SetConnectRetry(true)
	o.SetConnectRetryInterval(c.cfg.ConnectRetryInterval)
	o.SetMaxReconnectInterval(c.cfg.MaxReconnectInterval)
	o.SetKeepAlive(c.cfg.KeepAlive)
	o.SetPingTimeout(10 * time.Second)
	o.SetConnectTimeout(c.cfg.ConnectTimeout)
	o.SetWriteTimeout(10 * time.Second)
	o.SetStore(paho.NewMemoryStore())
	o.SetResumeSubs(false) // we resubscribe in OnConnect
	o.SetCredentialsProvider(c.credentials)
	if c.tls != nil {
		o.SetTLSConfig(c.tls)
	}
	o.SetCustomOpenConnectionFn(openConnection) // buffered reads (conn.go)
	o.SetDefaultPublishHandler(c.onMessage)     // before Connect (queued session messages)
	o.SetOnConnectHandler(c.onConnect)
	o.SetConnectionLostHandler(c.onLost)
	o.SetConnectionNotificationHandler(c.onNotification)
	return o
}

// onMessage runs on paho's router goroutine: it never blocks.
func (c *Client) onMessage(_ paho.Client, m paho.Message) {
	c.received.Add(1)
	if c.stopping.Load() {
		return // not acknowledged: redelivered next session
	}
	select {
	case c.queue <- item{msg: m, arrival: time.Now()}:
	default:
		if n := c.dropped.Add(1); n&(n-1) == 0 { // log at powers of two
			c.log.Warn().Uint64("dropped", n).Int("queue", cap(c.queue)).
				Msg("ingest queue full: message dropped unacknowledged, the broker redelivers it on reconnect")
		}
	}
}

func (c *Client) onConnect(cl paho.Client) {
	c.mu.Lock()
	c.status.Connects++
	c.status.Since = time.Now()
	c.mu.Unlock()
	c.log.Info().Strs("filters", c.subs).Msg("connected; subscribing")
	filters := make(map[string]byte, len(c.subs))
	for _, s := range c.subs {
		filters[s] = QoS
	}
	// Retry a refused or timed-out subscription while this connection
	// lasts; a new connection calls onConnect again.
	for backoff := time.Second; cl.IsConnectionOpen() && !c.stopping.Load(); backoff = min(2*backoff, c.cfg.MaxReconnectInterval) {
		tok := cl.SubscribeMultiple(filters, nil) // nil: the default handler, so a message is handled once
		err := waitToken(tok, 10*time.Second)
		if err == nil {
			if st, ok := tok.(*paho.SubscribeToken); ok {
				for f, code := range st.Result() {
					if code == 0x80 {
						err = errors.Join(err, fmt.Errorf("broker refused subscription %q", f))
					}
				}
			}
		}
		if err == nil {
			c.mu.Lock()
			c.status.Subscribed = true
			c.mu.Unlock()
			c.log.Info().Msg("subscribed")
			return
		}
		c.noteError(err)
		c.log.Error().Err(err).Dur("retry_in", backoff).Msg("subscribe failed")
		t := time.NewTimer(backoff)
		select {
		case <-t.C:
		case <-c.stopped:
			t.Stop()
			return
		}
	}
}

func (c *Client) onLost(_ paho.Client, err error) {
	if err == nil {
		err = errors.New("connection lost")
	}
	c.mu.Lock()
	c.status.Lost++
	c.status.Subscribed = false
	c.status.Since = time.Now()
	c.mu.Unlock()
	c.noteError(fmt.Errorf("connection lost: %w", err))
	c.log.Warn().Err(err).Msg("connection lost; reconnecting")
}

func (c *Client) onNotification(_ paho.Client, n paho.ConnectionNotification) {
	switch n := n.(type) {
	case paho.ConnectionNotificationFailed:
		c.noteError(fmt.Errorf("connect failed: %w", n.Reason))
		c.log.Warn().Err(n.Reason).Msg("connect failed; retrying")
	case paho.ConnectionNotificationBrokerFailed:
		c.noteError(fmt.Errorf("connect failed: %w", n.Reason))
	}
}

func (c *Client) noteError(err error) {
	c.mu.Lock()
	c.status.LastError = err.Error()
	c.status.LastErrorAt = time.Now()
	c.mu.Unlock()
}

// waitToken waits for a token with a timeout (never a bare Wait).
func waitToken(t paho.Token, d time.Duration) error {
	if !t.WaitTimeout(d) {
		return fmt.Errorf("no answer from the broker within %v", d)
	}
	return t.Error()
}

// Run connects and ingests until ctx is done, then drains and disconnects
// (see the package doc). It returns nil after a normal stop; Run may be
// called once.
func (c *Client) Run(ctx context.Context) error {
	if !c.ran.CompareAndSwap(false, true) {
		return errors.New("mqtt: Run called twice")
	}
	cl := paho.NewClient(c.options())
	c.paho.Store(&cl)
	c.log.Info().Msg("connecting")
	consumeCtx, cancelConsume := context.WithCancel(context.WithoutCancel(ctx))
	defer cancelConsume()
	done := make(chan struct{})
	go func() {
		defer close(done)
		c.consume(consumeCtx, c.stopped)
	}()
	tok := cl.Connect() // with ConnectRetry it completes once connected
	select {
	case <-tok.Done():
		if err := tok.Error(); err != nil {
			c.noteError(err)
			c.log.Error().Err(err).Msg("connect failed")
		}
	case <-ctx.Done():
	}
	<-ctx.Done()

	// Stop: refuse new messages, drain the queue, then disconnect so the
	// drained messages' acknowledgements still reach the broker.
	c.stopping.Store(true)
	close(c.stopped)
	timer := time.NewTimer(c.cfg.DrainTimeout)
	select {
	case <-done:
	case <-timer.C:
		c.log.Warn().Int("queued", len(c.queue)).Msg("drain timed out; the rest is redelivered next session")
		cancelConsume()
		<-done
	}
	timer.Stop()
	cl.Disconnect(250)
	cause := context.Cause(ctx)
	c.mu.Lock()
	c.status.Stopped = true
	c.status.StopCause = fmt.Sprintf("stopped: %v", cause)
	c.status.Since = time.Now()
	c.mu.Unlock()
	c.log.Info().AnErr("cause", cause).Msg("disconnected")
	return nil
}

// consume is the single consumer: batch, decode, Accept, acknowledge.
func (c *Client) consume(ctx context.Context, stop <-chan struct{}) {
	batch := make([]item, 0, c.cfg.BatchSize)
	readings := make([]telemetry.Reading, 0, c.cfg.BatchSize)
	draining := false
	for {
		batch = batch[:0]
		if !draining {
			select {
			case it := <-c.queue:
				batch = append(batch, it)
			case <-stop:
				draining = true
			case <-ctx.Done():
				return
			}
		}
	fill:
		for len(batch) < cap(batch) {
			select {
			case it := <-c.queue:
				batch = append(batch, it)
			default:
				break fill
			}
		}
		if len(batch) == 0 {
			if draining {
				return
			}
			continue
		}
		readings = readings[:0]
		var newest time.Time
		for _, it := range batch {
			r, reason := c.pipe.Process(it.msg.Topic(), it.msg.Payload(), it.arrival)
			if reason != decode.Accepted {
				c.rejected.Add(1)
				continue
			}
			if r.Time.After(newest) {
				newest = r.Time
			}
			readings = append(readings, r)
		}
		if len(readings) > 0 && !c.accept(ctx, readings) {
			return // ctx done: unacknowledged, redelivered next session
		}
		for _, it := range batch {
			it.msg.Ack()
		}
		c.accepted.Add(uint64(len(readings)))
		if !newest.IsZero() {
			c.lag.Store(int64(time.Since(newest)))
		}
	}
}

// accept calls the sink until it succeeds or ctx is done.
func (c *Client) accept(ctx context.Context, readings []telemetry.Reading) bool {
	backoff := 100 * time.Millisecond
	for {
		err := c.sink.Accept(ctx, readings)
		if err == nil {
			return true
		}
		c.sinkErrors.Add(1)
		c.log.Error().Err(err).Int("readings", len(readings)).Dur("retry_in", backoff).Msg("cannot make readings durable; retrying")
		t := time.NewTimer(backoff)
		select {
		case <-ctx.Done():
			t.Stop()
			return false
		case <-t.C:
		}
		backoff = min(2*backoff, 5*time.Second)
	}
}

// Stats returns the counters (safe from any goroutine).
func (c *Client) Stats() Stats {
	return Stats{
		Received:   c.received.Load(),
		Accepted:   c.accepted.Load(),
		Rejected:   c.rejected.Load(),
		Dropped:    c.dropped.Load(),
		SinkErrors: c.sinkErrors.Load(),
		Queued:     len(c.queue),
		Lag:        time.Duration(c.lag.Load()),
	}
}

// Status returns the connection state (safe from any goroutine).
func (c *Client) Status() Status {
	c.mu.Lock()
	defer c.mu.Unlock()
	s := c.status
	if cl := c.paho.Load(); cl != nil && !s.Stopped {
		s.Connected = (*cl).IsConnectionOpen()
	}
	s.Subscribed = s.Subscribed && s.Connected
	return s
}
