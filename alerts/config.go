package alerts

import (
	"bytes"
	"errors"
	"fmt"
	"net/url"
	"os"
	"path/filepath"
	"regexp"
	"sort"
	"strconv"
	"strings"
	"time"

	"go.yaml.in/yaml/v3"

	"plumbline/model/finding"
)

// Severity is how urgently an alert needs a person.
type Severity string

const (
	// Urgent: act now, day or night (a burst).
	Urgent Severity = "urgent"
	// High: act within the shift.
	High Severity = "high"
	// Low: act in working hours (a slow rise, an instrument to check).
	Low Severity = "low"
)

// rank orders severities: higher is more urgent; 0 is unknown.
func (s Severity) rank() int {
	switch s {
	case Urgent:
		return 3
	case High:
		return 2
	case Low:
		return 1
	}
	return 0
}

// Config is the `alerts:` section of the service configuration. Zero
// values mean the documented defaults (see applyDefaults). Paths are
// relative to the config file until Resolve is called.
type Config struct {
	// ClearAfter is the hysteresis: an alert returns to normal once no
	// finding for it arrived for this long (default 30m).
	ClearAfter time.Duration `yaml:"clear_after"`
	// UpdateInterval limits feed messages for an alert whose size or
	// candidates changed to one per interval (default 5m).
	UpdateInterval time.Duration `yaml:"update_interval"`
	// MaxShelve is the longest shelving an operator may ask for (default 24h).
	MaxShelve time.Duration `yaml:"max_shelve"`
	// Cluster says when two findings are the same event.
	Cluster ClusterConfig `yaml:"cluster"`
	// Severity maps the size of the loss and the kind to a severity.
	Severity SeverityConfig `yaml:"severity"`
	// Receivers are the people (and desks) alerts can reach.
	Receivers []Receiver `yaml:"receivers"`
	// Rotas are on-call rotas whose shifts name receivers.
	Rotas []Rota `yaml:"rotas"`
	// Routes are tried in order; the first whose match fits takes the alert.
	Routes []Route `yaml:"routes"`
	// HourlyCap is the most notifications one person gets in any hour
	// (default 10); the overflow is summarised in one message. News of an
	// urgent alert (raised, made urgent, escalated, unshelved, handed
	// over) is sent over the cap; see pressing.
	HourlyCap int `yaml:"hourly_cap"`
	// Feeds are channels that get every alert change regardless of
	// routing (default: log, and mqtt when configured).
	Feeds []string `yaml:"feeds"`
	// Channels configures the delivery channels.
	Channels ChannelsConfig `yaml:"channels"`
	// OperatorURL is the base URL of the operator page; a message links to
	// OperatorURL + "/alerts/" + id.
	OperatorURL string `yaml:"operator_url"`
	// APITokenFile holds the bearer token of the operator HTTP API.
	APITokenFile string `yaml:"api_token_file"`
	// OutboxLimit bounds the durable notification queue (default 10000).
	OutboxLimit int `yaml:"outbox_limit"`
}

// ClusterConfig decides whether a finding belongs to an open alert: the
// same zone and kind, and either one of the Top best candidates in common,
// or (with a Locator) best candidates at most DistanceM metres apart.
type ClusterConfig struct {
	Top       int     `yaml:"top"`
	DistanceM float64 `yaml:"distance_m"`
}

// SeverityConfig holds, per kind, rules tried in order; the first that
// fits gives the severity, and Low when none does.
type SeverityConfig struct {
	Leak        []SeverityRule `yaml:"leak"`
	Blockage    []SeverityRule `yaml:"blockage"`
	SensorFault []SeverityRule `yaml:"sensor-fault"`
}

// SeverityRule fits a finding whose size is at least MinSizeLPS and, if
// MaxOpenFraction is set, whose open fraction is at most MaxOpenFraction.
type SeverityRule struct {
	MinSizeLPS      float64  `yaml:"min_size_lps"`
	MaxOpenFraction float64  `yaml:"max_open_fraction"`
	Level           Severity `yaml:"level"`
}

// Receiver is a person or desk with contacts. Email goes through the SMTP
// channel, Webhook and MQTT through those channels naming the receiver.
type Receiver struct {
	ID      string `yaml:"id"`
	Name    string `yaml:"name"`
	Email   string `yaml:"email"`
	Webhook bool   `yaml:"webhook"`
	MQTT    bool   `yaml:"mqtt"`
}

// Rota is an on-call rota: shifts in one time zone. The start and end of
// each shift are its handover times; who is on call is decided when a
// notification is sent, so an alert open across a handover reaches the
// incoming shift.
type Rota struct {
	ID       string  `yaml:"id"`
	Timezone string  `yaml:"timezone"`
	Shifts   []Shift `yaml:"shifts"`

	loc *time.Location
}

// Shift is a daily window from Start to End (local "HH:MM"; End before
// Start runs past midnight) on Days (mon..sun; empty means every day,
// counted on the day the shift starts), staffed by People (receiver ids).
type Shift struct {
	Days   []string `yaml:"days"`
	Start  string   `yaml:"start"`
	End    string   `yaml:"end"`
	People []string `yaml:"people"`

	start, end int // minutes after local midnight
	days       uint8
}

// Route sends alerts that fit Match through escalation Levels.
type Route struct {
	Name   string  `yaml:"name"`
	Match  Match   `yaml:"match"`
	Levels []Level `yaml:"levels"`
	// Repeat re-notifies the current level while unacknowledged (0: never).
	Repeat time.Duration `yaml:"repeat"`
}

// Match fits an alert when each non-empty list contains its value.
type Match struct {
	Zones      []string       `yaml:"zones"`
	Kinds      []finding.Kind `yaml:"kinds"`
	Severities []Severity     `yaml:"severities"`
}

// Level is one escalation step: whom to notify (receiver or rota ids), and
// how long to wait for an acknowledgement before the next level.
type Level struct {
	Notify     []string      `yaml:"notify"`
	AckTimeout time.Duration `yaml:"ack_timeout"`
}

// Delivery is the retry policy shared by channels: Attempts tries in all,
// waiting Backoff, then twice that, and so on, up to MaxBackoff; each try
// limited to Timeout.
type Delivery struct {
	Attempts   int           `yaml:"attempts"`
	Backoff    time.Duration `yaml:"backoff"`
	MaxBackoff time.Duration `yaml:"max_backoff"`
	Timeout    time.Duration `yaml:"timeout"`
}

// ChannelsConfig configures each channel; a nil pointer leaves it off.
type ChannelsConfig struct {
	Webhook *WebhookConfig `yaml:"webhook"`
	SMTP    *SMTPConfig    `yaml:"smtp"`
	MQTT    *MQTTConfig    `yaml:"mqtt"`
	Log     *LogConfig     `yaml:"log"`
}

// WebhookConfig: POST JSON to URL, signed with the secret in SecretFile.
type WebhookConfig struct {
	URL        string `yaml:"url"`
	SecretFile string `yaml:"secret_file"`
	Delivery   `yaml:",inline"`
}

// SMTPConfig: mail through Host:Port, STARTTLS when StartTLS, PLAIN
// authentication when Username is set. CAFile adds a private CA.
type SMTPConfig struct {
	Host         string `yaml:"host"`
	Port         int    `yaml:"port"`
	Username     string `yaml:"username"`
	PasswordFile string `yaml:"password_file"`
	From         string `yaml:"from"`
	StartTLS     bool   `yaml:"starttls"`
	CAFile       string `yaml:"ca_file"`
	Delivery     `yaml:",inline"`
}

// MQTTConfig: retained state per alert on TopicPrefix/alert/ZONE/ID and
// notifications to receivers on TopicPrefix/notify/RECEIVER, at QoS.
type MQTTConfig struct {
	TopicPrefix string `yaml:"topic_prefix"`
	QoS         byte   `yaml:"qos"`
	Delivery    `yaml:",inline"`
}

// LogConfig: the log channel (always on; listed for its retry policy).
type LogConfig struct {
	Delivery `yaml:",inline"`
}

// Channel names used in feeds, the outbox and the delivery log.
const (
	ChannelWebhook = "webhook"
	ChannelEmail   = "email"
	ChannelMQTT    = "mqtt"
	ChannelLog     = "log"
)

// ConfigError is one problem in the alerts section, with the YAML line
// (of the original document) and the path of the key.
type ConfigError struct {
	Line int
	Path string
	Msg  string
}

// Error formats the problem as "alerts: line N: path: message".
func (e ConfigError) Error() string {
	var b strings.Builder
	b.WriteString("alerts")
	if e.Line > 0 {
		fmt.Fprintf(&b, ": line %d", e.Line)
	}
	if e.Path != "" {
		b.WriteString(": " + e.Path)
	}
	return b.String() + ": " + e.Msg
}

// ConfigErrors is every problem found, in line order.
type ConfigErrors []ConfigError

// Error lists every problem, one a line.
func (es ConfigErrors) Error() string {
	s := make([]string, len(es))
	for i, e := range es {
		s[i] = e.Error()
	}
	return strings.Join(s, "\n")
}

// ParseConfig decodes an alerts section given as YAML text (the mapping
// that sits under `alerts:`). It is DecodeConfig for tests and tools.
func ParseConfig(data []byte) (Config, error) {
	var doc yaml.Node
	if err := yaml.Unmarshal(data, &doc); err != nil {
		return Config{}, fmt.Errorf("alerts: %w", err)
	}
	return DecodeConfig(&doc)
}

// DecodeConfig decodes the `alerts:` node of the service configuration
// strictly (unknown keys are errors), applies defaults and validates
// cross-references. The error is a ConfigErrors listing every problem with
// its line in the original document.
func DecodeConfig(node *yaml.Node) (Config, error) {
	var cfg Config
	if node == nil {
		return cfg, ConfigErrors{{Msg: "missing alerts section"}}
	}
	if node.Kind == yaml.DocumentNode {
		if len(node.Content) == 0 {
			return cfg, ConfigErrors{{Msg: "empty alerts section"}}
		}
		node = node.Content[0]
	}
	if node.Kind != yaml.MappingNode {
		return cfg, ConfigErrors{{Line: node.Line, Msg: "alerts must be a mapping"}}
	}
	// yaml.Node.Decode has no KnownFields: re-marshal and decode strictly,
	// then map the re-marshalled lines back to the original ones.
	text, err := yaml.Marshal(node)
	if err != nil {
		return cfg, ConfigErrors{{Line: node.Line, Msg: err.Error()}}
	}
	var copyDoc yaml.Node
	if err := yaml.Unmarshal(text, &copyDoc); err != nil {
		return cfg, ConfigErrors{{Line: node.Line, Msg: err.Error()}}
	}
	lineMap := map[int]int{}
	if len(copyDoc.Content) > 0 {
		mapLines(copyDoc.Content[0], node, lineMap)
	}
	var errs ConfigErrors
	dec := yaml.NewDecoder(bytes.NewReader(text))
	dec.KnownFields(true)
	if err := dec.Decode(&cfg); err != nil {
		var te *yaml.TypeError
		if errors.As(err, &te) {
			for _, m := range te.Errors {
				errs = append(errs, remapLine(m, lineMap))
			}
		} else {
			errs = append(errs, remapLine(err.Error(), lineMap))
		}
	}
	lines := map[string]int{}
	pathLines(node, "", lines)
	cfg.applyDefaults()
	errs = append(errs, cfg.validate(lines)...)
	if len(errs) > 0 {
		sort.SliceStable(errs, func(i, j int) bool { return errs[i].Line < errs[j].Line })
		return cfg, errs
	}
	return cfg, nil
}

// mapLines records, for each node of the re-marshalled copy, the line of
// the matching node in the original tree (the two have the same shape).
func mapLines(cp, orig *yaml.Node, m map[int]int) {
	if cp == nil || orig == nil {
		return
	}
	if _, ok := m[cp.Line]; !ok {
		m[cp.Line] = orig.Line
	}
	for i := range cp.Content {
		if i < len(orig.Content) {
			mapLines(cp.Content[i], orig.Content[i], m)
		}
	}
}

var lineRE = regexp.MustCompile(`^(?:yaml: )?line (\d+): `)

// remapLine turns a decoder message "line N: ..." into a ConfigError on
// the original line.
func remapLine(msg string, m map[int]int) ConfigError {
	sub := lineRE.FindStringSubmatch(msg)
	if sub == nil {
		return ConfigError{Msg: msg}
	}
	n, _ := strconv.Atoi(sub[1])
	if o, ok := m[n]; ok {
		n = o
	}
	return ConfigError{Line: n, Msg: msg[len(sub[0]):]}
}

// pathLines records the line of every key path ("routes[0].levels[1]").
func pathLines(n *yaml.Node, path string, m map[string]int) {
	switch n.Kind {
	case yaml.MappingNode:
		for i := 0; i+1 < len(n.Content); i += 2 {
			p := n.Content[i].Value
			if path != "" {
				p = path + "." + p
			}
			m[p] = n.Content[i].Line
			pathLines(n.Content[i+1], p, m)
		}
	case yaml.SequenceNode:
		for i, c := range n.Content {
			p := fmt.Sprintf("%s[%d]", path, i)
			m[p] = c.Line
			pathLines(c, p, m)
		}
	}
}

// Defaults of the alerts section.
const (
	DefaultClearAfter     = 30 * time.Minute
	DefaultUpdateInterval = 5 * time.Minute
	DefaultMaxShelve      = 24 * time.Hour
	DefaultClusterTop     = 3
	DefaultHourlyCap      = 10
	DefaultOutboxLimit    = 10000
	DefaultAttempts       = 5
	DefaultBackoff        = 2 * time.Second
	DefaultMaxBackoff     = 5 * time.Minute
	DefaultTimeout        = 10 * time.Second
)

func (d *Delivery) applyDefaults() {
	if d.Attempts == 0 {
		d.Attempts = DefaultAttempts
	}
	if d.Backoff == 0 {
		d.Backoff = DefaultBackoff
	}
	if d.MaxBackoff == 0 {
		d.MaxBackoff = DefaultMaxBackoff
	}
	if d.Timeout == 0 {
		d.Timeout = DefaultTimeout
	}
}

func (c *Config) applyDefaults() {
	if c.ClearAfter == 0 {
		c.ClearAfter = DefaultClearAfter
	}
	if c.UpdateInterval == 0 {
		c.UpdateInterval = DefaultUpdateInterval
	}
	if c.MaxShelve == 0 {
		c.MaxShelve = DefaultMaxShelve
	}
	if c.Cluster.Top == 0 {
		c.Cluster.Top = DefaultClusterTop
	}
	if c.HourlyCap == 0 {
		c.HourlyCap = DefaultHourlyCap
	}
	if c.OutboxLimit == 0 {
		c.OutboxLimit = DefaultOutboxLimit
	}
	if c.Channels.Log == nil {
		c.Channels.Log = &LogConfig{}
	}
	c.Channels.Log.applyDefaults()
	if w := c.Channels.Webhook; w != nil {
		w.applyDefaults()
	}
	if s := c.Channels.SMTP; s != nil {
		s.applyDefaults()
		if s.Port == 0 {
			s.Port = 587
		}
	}
	if m := c.Channels.MQTT; m != nil {
		m.applyDefaults()
		if m.TopicPrefix == "" {
			m.TopicPrefix = "plumbline/alerts"
		}
	}
	if c.Feeds == nil {
		c.Feeds = []string{ChannelLog}
		if c.Channels.MQTT != nil {
			c.Feeds = append(c.Feeds, ChannelMQTT)
		}
	}
}

var dayNames = map[string]uint{"sun": 0, "mon": 1, "tue": 2, "wed": 3, "thu": 4, "fri": 5, "sat": 6}

// parseClock reads "HH:MM" as minutes after midnight.
func parseClock(s string) (int, error) {
	t, err := time.Parse("15:04", s)
	if err != nil {
		return 0, fmt.Errorf("time %q is not HH:MM", s)
	}
	return t.Hour()*60 + t.Minute(), nil
}

// validate checks values and cross-references, and prepares rotas.
func (c *Config) validate(lines map[string]int) ConfigErrors {
	var errs ConfigErrors
	bad := func(path, format string, args ...any) {
		// Use the closest recorded ancestor path for the line.
		p := path
		line := 0
		for p != "" {
			if l, ok := lines[p]; ok {
				line = l
				break
			}
			if i := strings.LastIndexAny(p, ".["); i >= 0 {
				p = p[:i]
			} else {
				p = ""
			}
		}
		errs = append(errs, ConfigError{Line: line, Path: path, Msg: fmt.Sprintf(format, args...)})
	}
	if c.ClearAfter < 0 {
		bad("clear_after", "must be positive")
	}
	if c.UpdateInterval < 0 {
		bad("update_interval", "must be positive")
	}
	if c.MaxShelve < 0 {
		bad("max_shelve", "must be positive")
	}
	if c.Cluster.Top < 0 {
		bad("cluster.top", "must be at least 1")
	}
	if c.Cluster.DistanceM < 0 {
		bad("cluster.distance_m", "must not be negative")
	}
	if c.HourlyCap < 0 {
		bad("hourly_cap", "must be at least 1")
	}
	if c.OutboxLimit < 0 {
		bad("outbox_limit", "must be at least 1")
	}
	for kind, rules := range map[string][]SeverityRule{"leak": c.Severity.Leak, "blockage": c.Severity.Blockage, "sensor-fault": c.Severity.SensorFault} {
		for i, r := range rules {
			p := fmt.Sprintf("severity.%s[%d]", kind, i)
			if r.Level.rank() == 0 {
				bad(p+".level", "severity %q is not one of urgent, high, low", r.Level)
			}
			if r.MinSizeLPS < 0 {
				bad(p+".min_size_lps", "must not be negative")
			}
			if r.MaxOpenFraction < 0 || r.MaxOpenFraction > 1 {
				bad(p+".max_open_fraction", "must be in [0, 1]")
			}
		}
	}
	ids := map[string]string{} // id -> what
	hasChannel := map[string]bool{ChannelLog: true, ChannelWebhook: c.Channels.Webhook != nil, ChannelEmail: c.Channels.SMTP != nil, ChannelMQTT: c.Channels.MQTT != nil}
	for i, r := range c.Receivers {
		p := fmt.Sprintf("receivers[%d]", i)
		if r.ID == "" {
			bad(p+".id", "missing id")
			continue
		}
		if !validID(r.ID) {
			bad(p+".id", "id %q may hold only letters, digits, '-', '_' and '.'", r.ID)
		}
		if _, dup := ids[r.ID]; dup {
			bad(p+".id", "duplicate id %q", r.ID)
		}
		ids[r.ID] = "receiver"
		if r.Email != "" && !strings.Contains(r.Email, "@") {
			bad(p+".email", "%q is not an email address", r.Email)
		}
		if r.Email != "" && !hasChannel[ChannelEmail] {
			bad(p+".email", "receiver %s has an email address but channels.smtp is not configured", r.ID)
		}
		if r.Webhook && !hasChannel[ChannelWebhook] {
			bad(p+".webhook", "receiver %s uses the webhook but channels.webhook is not configured", r.ID)
		}
		if r.MQTT && !hasChannel[ChannelMQTT] {
			bad(p+".mqtt", "receiver %s uses mqtt but channels.mqtt is not configured", r.ID)
		}
	}
	for i := range c.Rotas {
		r := &c.Rotas[i]
		p := fmt.Sprintf("rotas[%d]", i)
		if r.ID == "" {
			bad(p+".id", "missing id")
		} else if _, dup := ids[r.ID]; dup {
			bad(p+".id", "id %q is already used by a %s", r.ID, ids[r.ID])
		} else {
			ids[r.ID] = "rota"
		}
		tz := r.Timezone
		if tz == "" {
			tz = "UTC"
		}
		loc, err := time.LoadLocation(tz)
		if err != nil {
			bad(p+".timezone", "unknown time zone %q", r.Timezone)
		}
		r.loc = loc
		if len(r.Shifts) == 0 {
			bad(p+".shifts", "a rota needs at least one shift")
		}
		for j := range r.Shifts {
			s := &r.Shifts[j]
			sp := fmt.Sprintf("%s.shifts[%d]", p, j)
			var err error
			if s.start, err = parseClock(s.Start); err != nil {
				bad(sp+".start", "%v", err)
			}
			if s.end, err = parseClock(s.End); err != nil {
				bad(sp+".end", "%v", err)
			}
			if s.Start == s.End && s.Start != "" {
				// Equal handover times mean a 24-hour shift.
				s.end = s.start + 24*60
			}
			if len(s.Days) == 0 {
				s.days = 0x7f
			}
			for k, d := range s.Days {
				n, ok := dayNames[strings.ToLower(d)]
				if !ok {
					bad(fmt.Sprintf("%s.days[%d]", sp, k), "day %q is not one of mon tue wed thu fri sat sun", d)
				}
				s.days |= 1 << n
			}
			if len(s.People) == 0 {
				bad(sp+".people", "a shift needs at least one person")
			}
			for k, id := range s.People {
				if ids[id] != "receiver" {
					bad(fmt.Sprintf("%s.people[%d]", sp, k), "unknown receiver %q", id)
				}
			}
		}
	}
	for i, r := range c.Routes {
		p := fmt.Sprintf("routes[%d]", i)
		if r.Name == "" {
			c.Routes[i].Name = fmt.Sprintf("route-%d", i+1)
		}
		for k, kind := range r.Match.Kinds {
			if kind != finding.Leak && kind != finding.Blockage && kind != finding.SensorFault {
				bad(fmt.Sprintf("%s.match.kinds[%d]", p, k), "kind %q is not one of leak, blockage, sensor-fault", kind)
			}
		}
		for k, s := range r.Match.Severities {
			if s.rank() == 0 {
				bad(fmt.Sprintf("%s.match.severities[%d]", p, k), "severity %q is not one of urgent, high, low", s)
			}
		}
		if len(r.Levels) == 0 {
			bad(p+".levels", "a route needs at least one level")
		}
		for j, l := range r.Levels {
			lp := fmt.Sprintf("%s.levels[%d]", p, j)
			if len(l.Notify) == 0 {
				bad(lp+".notify", "a level needs at least one receiver or rota")
			}
			for k, id := range l.Notify {
				if ids[id] == "" {
					bad(fmt.Sprintf("%s.notify[%d]", lp, k), "unknown receiver or rota %q", id)
				}
			}
			if j < len(r.Levels)-1 && l.AckTimeout <= 0 {
				bad(lp+".ack_timeout", "every level but the last needs a positive ack_timeout")
			}
			if l.AckTimeout < 0 {
				bad(lp+".ack_timeout", "must be positive")
			}
		}
		if r.Repeat < 0 {
			bad(p+".repeat", "must not be negative")
		}
	}
	for i, f := range c.Feeds {
		if !hasChannel[f] {
			bad(fmt.Sprintf("feeds[%d]", i), "feed %q is not a configured channel (log, webhook, email, mqtt)", f)
		}
		if f == ChannelEmail {
			bad(fmt.Sprintf("feeds[%d]", i), "email cannot be a feed: it needs a receiver")
		}
	}
	if w := c.Channels.Webhook; w != nil {
		if u, err := url.Parse(w.URL); err != nil || (u.Scheme != "http" && u.Scheme != "https") || u.Host == "" {
			bad("channels.webhook.url", "%q is not an http(s) URL", w.URL)
		}
		if w.SecretFile == "" {
			bad("channels.webhook.secret_file", "the webhook needs a secret_file for its signature")
		}
		errs = append(errs, validDelivery("channels.webhook", w.Delivery, bad)...)
	}
	if s := c.Channels.SMTP; s != nil {
		if s.Host == "" {
			bad("channels.smtp.host", "missing host")
		}
		if s.Port < 1 || s.Port > 65535 {
			bad("channels.smtp.port", "port %d out of range", s.Port)
		}
		if s.From == "" || !strings.Contains(s.From, "@") {
			bad("channels.smtp.from", "from %q is not an email address", s.From)
		}
		if s.Username != "" && s.PasswordFile == "" {
			bad("channels.smtp.password_file", "username set without password_file")
		}
		if s.Username != "" && !s.StartTLS {
			bad("channels.smtp.starttls", "authentication needs starttls: true (the password would cross the network in clear)")
		}
		validDelivery("channels.smtp", s.Delivery, bad)
	}
	if m := c.Channels.MQTT; m != nil {
		if strings.ContainsAny(m.TopicPrefix, "#+") {
			bad("channels.mqtt.topic_prefix", "topic prefix %q may not contain MQTT wildcards", m.TopicPrefix)
		}
		if m.QoS > 2 {
			bad("channels.mqtt.qos", "qos %d is not 0, 1 or 2", m.QoS)
		}
		validDelivery("channels.mqtt", m.Delivery, bad)
	}
	if c.OperatorURL != "" {
		if u, err := url.Parse(c.OperatorURL); err != nil || u.Scheme == "" || u.Host == "" {
			bad("operator_url", "%q is not an absolute URL", c.OperatorURL)
		}
	}
	return errs
}

func validDelivery(path string, d Delivery, bad func(string, string, ...any)) ConfigErrors {
	if d.Attempts < 1 {
		bad(path+".attempts", "must be at least 1")
	}
	if d.Backoff < 0 || d.MaxBackoff < 0 || d.Timeout < 0 {
		bad(path, "backoff, max_backoff and timeout must be positive")
	}
	return nil
}

// validID reports whether id is safe in a URL path and an MQTT topic.
func validID(id string) bool {
	for _, r := range id {
		if !(r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9' || r == '-' || r == '_' || r == '.') {
			return false
		}
	}
	return id != ""
}

// Resolve makes the file paths of c absolute against dir (the directory
// of the config file).
func (c *Config) Resolve(dir string) {
	abs := func(p *string) {
		if *p != "" && !filepath.IsAbs(*p) {
			*p = filepath.Join(dir, *p)
		}
	}
	abs(&c.APITokenFile)
	if w := c.Channels.Webhook; w != nil {
		abs(&w.SecretFile)
	}
	if s := c.Channels.SMTP; s != nil {
		abs(&s.PasswordFile)
		abs(&s.CAFile)
	}
}

// ReadSecret reads a secret file, trimming one trailing newline. The
// error names the file, never the content.
func ReadSecret(path string) ([]byte, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("alerts: secret: %w", err)
	}
	b = bytes.TrimRight(b, "\r\n")
	if len(b) == 0 {
		return nil, fmt.Errorf("alerts: secret file %s is empty", path)
	}
	return b, nil
}
