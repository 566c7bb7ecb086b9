package alerts

import (
	"context"
	"errors"
	"fmt"
	"slices"
	"sort"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"github.com/rs/zerolog"

	"plumbline/model/finding"
)

// Errors of operator actions; the HTTP API maps them to 404, 409 and 400.
var (
	ErrNotFound = errors.New("alerts: no such alert")
	ErrInvalid  = errors.New("alerts: invalid request")
)

// systemActor is the actor recorded for changes the service makes itself.
const systemActor = "plumbline"

// Options configure a Manager. Zero values mean the documented defaults.
type Options struct {
	// Config is the decoded alerts section.
	Config Config
	// DataDir is where alerts.db is kept (required).
	DataDir string
	// Channels are the delivery channels; one must exist for every
	// configured channel. A log channel on Logger is added if missing.
	Channels []Channel
	// Logger receives the service's own log lines (a sub-logger is made).
	Logger zerolog.Logger
	// Now is the clock (default time.Now); tests pass a controllable one.
	Now func() time.Time
	// Locator, if set, lets findings cluster by distance (cluster.distance_m).
	Locator Locator
	// TickInterval is how often Run calls Tick with Now() (default 15s;
	// negative: never, the owner calls Tick).
	TickInterval time.Duration
}

// Manager owns the alerts: it merges findings into alerts, drives the
// lifecycle, routing, escalation and caps on Tick, records every change,
// and (in Run) delivers the notifications. Its methods are safe for
// concurrent use. Close it after Run has returned.
type Manager struct {
	cfg       Config
	log       zerolog.Logger
	now       func() time.Time
	locate    Locator
	tickEvery time.Duration
	st        *store
	channels  map[string]Channel
	policy    map[string]Delivery
	receivers map[string]Receiver
	rotas     map[string]*Rota

	mu      sync.Mutex
	open    map[string]*Alert
	people  map[string]*personState
	seq     int
	unsaved *batch
	dirty   map[string]bool
	wake    map[string]chan struct{}
	closed  bool

	pendingN atomic.Int64
	dropped  atomic.Int64
	failed   atomic.Int64
}

// Open loads the alert store under opts.DataDir and returns a Manager
// holding every open alert as it was before a restart.
func Open(opts Options) (*Manager, error) {
	cfg := opts.Config
	// A Config built in code gets the same defaults and checks as a decoded
	// one (which makes this idempotent for those).
	cfg.applyDefaults()
	if errs := cfg.validate(map[string]int{}); len(errs) > 0 {
		return nil, errs
	}
	m := &Manager{
		cfg:       cfg,
		log:       opts.Logger.With().Str("component", "alerts").Logger(),
		now:       opts.Now,
		locate:    opts.Locator,
		tickEvery: opts.TickInterval,
		channels:  map[string]Channel{},
		policy:    map[string]Delivery{},
		receivers: map[string]Receiver{},
		rotas:     map[string]*Rota{},
		open:      map[string]*Alert{},
		people:    map[string]*personState{},
		unsaved:   newBatch(),
		dirty:     map[string]bool{},
		wake:      map[string]chan struct{}{},
	}
	if m.now == nil {
		m.now = time.Now
	}
	if m.tickEvery == 0 {
		m.tickEvery = 15 * time.Second
	}
	for _, r := range cfg.Receivers {
		m.receivers[r.ID] = r
	}
	for i := range cfg.Rotas {
		m.rotas[cfg.Rotas[i].ID] = &m.cfg.Rotas[i]
	}
	for _, c := range opts.Channels {
		if strings.HasPrefix(c.Name(), urgentPrefix) || strings.ContainsRune(c.Name(), 0) {
			return nil, fmt.Errorf("alerts: channel name %q: must not start with %q or hold a NUL (outbox keys)", c.Name(), urgentPrefix)
		}
		if _, dup := m.channels[c.Name()]; dup {
			return nil, fmt.Errorf("alerts: two channels named %q", c.Name())
		}
		m.channels[c.Name()] = c
	}
	if _, ok := m.channels[ChannelLog]; !ok {
		m.channels[ChannelLog] = NewLogChannel(opts.Logger)
	}
	ch := cfg.Channels
	m.policy[ChannelLog] = ch.Log.Delivery
	if ch.Webhook != nil {
		m.policy[ChannelWebhook] = ch.Webhook.Delivery
	}
	if ch.SMTP != nil {
		m.policy[ChannelEmail] = ch.SMTP.Delivery
	}
	if ch.MQTT != nil {
		m.policy[ChannelMQTT] = ch.MQTT.Delivery
	}
	for name := range m.policy {
		if _, ok := m.channels[name]; !ok {
			return nil, fmt.Errorf("alerts: channel %s is configured but no Channel was given for it", name)
		}
	}
	for name := range m.channels {
		if _, ok := m.policy[name]; !ok {
			d := Delivery{}
			d.applyDefaults()
			m.policy[name] = d
		}
		m.wake[name] = make(chan struct{}, 1)
	}
	st, err := openStore(opts.DataDir)
	if err != nil {
		return nil, err
	}
	m.st = st
	alerts, people, err := st.load()
	if err != nil {
		st.close()
		return nil, err
	}
	for _, a := range alerts {
		if n, err := strconv.Atoi(strings.TrimPrefix(a.ID, "AL-")); err == nil && n > m.seq {
			m.seq = n
		}
		if a.State.Open() {
			a := a
			m.open[a.ID] = &a
		}
	}
	for id, p := range people {
		p := p
		m.people[id] = &p
	}
	// Hysteresis counts only time the service was watching: after a
	// downtime, evidence times move forward by the gap since the last Tick,
	// so an outage does not return every alert to normal at once.
	// Escalation and shelving keep wall-clock time: they are due anyway.
	last, err := st.lastTick()
	if err != nil {
		st.close()
		return nil, fmt.Errorf("alerts: store: %w", err)
	}
	if now := m.now().UTC(); !last.IsZero() && now.After(last) {
		gap := now.Sub(last)
		for id, a := range m.open {
			a.LastEvidence = a.LastEvidence.Add(gap)
			if a.LastEvidence.After(now) {
				a.LastEvidence = now
			}
			m.dirty[id] = true
		}
		if len(m.open) > 0 && gap > time.Minute {
			m.log.Info().Dur("gap", gap).Int("open", len(m.open)).Msg("resuming after downtime: hysteresis paused for the gap")
		}
	}
	n, err := st.pending()
	if err != nil {
		st.close()
		return nil, fmt.Errorf("alerts: store: %w", err)
	}
	m.pendingN.Store(int64(n))
	return m, nil
}

// Close writes what is not yet persisted and closes the store. Call it
// after Run has returned.
func (m *Manager) Close() error {
	m.mu.Lock()
	defer m.mu.Unlock()
	if m.closed {
		return nil
	}
	m.closed = true
	b := newBatch()
	for id := range m.dirty {
		if a, ok := m.open[id]; ok {
			b.alerts[id] = a.clone()
		}
	}
	err := m.commitLocked(b)
	if cerr := m.st.close(); err == nil {
		err = cerr
	}
	return err
}

// Observe merges finding f into its alert, raising one if none is open
// for the same zone, kind and location cluster. It returns the alert.
func (m *Manager) Observe(ctx context.Context, f finding.Finding) (Alert, error) {
	if f.Zone == "" {
		return Alert{}, fmt.Errorf("%w: finding without zone", ErrInvalid)
	}
	switch f.Kind {
	case finding.Leak, finding.Blockage, finding.SensorFault:
	default:
		return Alert{}, fmt.Errorf("%w: finding in zone %s: unknown kind %q", ErrInvalid, f.Zone, f.Kind)
	}
	m.mu.Lock()
	defer m.mu.Unlock()
	if m.closed {
		return Alert{}, errors.New("alerts: manager closed")
	}
	now := m.now().UTC()
	b := newBatch()
	sev := m.cfg.severityOf(f)
	a := m.match(f)
	if a == nil {
		m.seq++
		a = &Alert{ID: fmt.Sprintf("AL-%06d", m.seq), Zone: f.Zone, Kind: f.Kind, State: Normal, Raised: now, Onset: f.Onset.UTC(), Severity: sev}
		m.mergeFinding(a, f, now)
		if err := m.apply(b, a, Evidence, systemActor, f.Evidence, now); err != nil {
			return Alert{}, err
		}
		if r := m.cfg.routeFor(a.Zone, a.Kind, a.Severity); r != nil {
			a.Route = r.Name
		}
		m.enterLevel(a, 0, now)
		m.open[a.ID] = a
		m.notifyLevel(b, a, NoticeRaised, now, "", "")
		m.feed(b, a, NoticeRaised, now)
		b.alerts[a.ID] = a.clone()
		return a.clone(), m.commitLocked(b)
	}
	m.mergeFinding(a, f, now)
	prev := a.State
	if err := m.apply(b, a, Evidence, systemActor, "", now); err != nil {
		return a.clone(), err
	}
	changed := false
	if prev == ReturnedUnacknowledged {
		// Re-alarm: the evidence came back before anyone acknowledged.
		m.enterLevel(a, 0, now)
		m.notifyLevel(b, a, NoticeRaised, now, "", "")
		m.feed(b, a, NoticeRaised, now)
		changed = true
	}
	if sev.rank() > a.Severity.rank() {
		// Worse than before: tell those who know, and if the new severity
		// takes another route, announce it to that route's first level.
		a.Severity = sev
		before := slices.Clone(a.Notified)
		rerouted := false
		if r := m.cfg.routeFor(a.Zone, a.Kind, a.Severity); r != nil && r.Name != a.Route {
			a.Route = r.Name
			m.enterLevel(a, 0, now)
			rerouted = true
		}
		switch a.State {
		case Unacknowledged:
			if !rerouted {
				m.notifyLevel(b, a, NoticeUpdated, now, "", "")
				break
			}
			m.notifyNotified(b, a, NoticeUpdated, now, "", "")
			if r := m.cfg.routeNamed(a.Route); r != nil {
				for _, p := range m.peopleOf(r.Levels[0].Notify, now) {
					if !slices.Contains(before, p) {
						m.notifyPerson(b, p, a, NoticeRaised, now, "", "")
					}
				}
			}
		case Acknowledged:
			m.notifyNotified(b, a, NoticeUpdated, now, "", "")
		}
		m.feed(b, a, NoticeUpdated, now)
		changed = true
	}
	if changed {
		b.alerts[a.ID] = a.clone()
		delete(m.dirty, a.ID)
	} else {
		a.FeedDue = true
		m.dirty[a.ID] = true
	}
	return a.clone(), m.commitLocked(b)
}

// match finds the open alert f belongs to (lowest id first).
func (m *Manager) match(f finding.Finding) *Alert {
	for _, id := range m.openIDs() {
		a := m.open[id]
		if a.State == Cleared {
			continue
		}
		if sameEvent(a, f, m.cfg.Cluster.Top, m.cfg.Cluster.DistanceM, m.locate) {
			return a
		}
	}
	return nil
}

func (m *Manager) openIDs() []string {
	ids := make([]string, 0, len(m.open))
	for id := range m.open {
		ids = append(ids, id)
	}
	sort.Strings(ids)
	return ids
}

// mergeFinding copies the latest finding's measures into a.
func (m *Manager) mergeFinding(a *Alert, f finding.Finding, now time.Time) {
	a.Findings++
	a.LastEvidence = now
	a.Updated = now
	if !f.Onset.IsZero() && (a.Onset.IsZero() || f.Onset.Before(a.Onset)) {
		a.Onset = f.Onset.UTC()
	}
	a.SizeLPS = f.SizeLPS
	a.MaxSizeLPS = max(a.MaxSizeLPS, f.SizeLPS)
	a.OpenFrac = f.OpenFrac
	if len(f.Candidates) > 0 {
		a.Candidates = slices.Clone(f.Candidates)
	}
	if f.Evidence != "" {
		a.Evidence = f.Evidence
	}
}

// apply runs the transition and records it when the state changes.
func (m *Manager) apply(b *batch, a *Alert, e Event, actor, comment string, now time.Time) error {
	next, err := Transition(a.State, e)
	if err != nil {
		return fmt.Errorf("alert %s: %w", a.ID, err)
	}
	if next != a.State || e != Evidence {
		b.audit = append(b.audit, AuditRecord{Time: now, Alert: a.ID, Actor: actor, Event: e, From: a.State, To: next, Comment: comment})
	}
	a.State = next
	a.Updated = now
	if next == Cleared && a.ClearedAt.IsZero() {
		a.ClearedAt = now
	}
	return nil
}

// enterLevel puts a at escalation level lvl from now.
func (m *Manager) enterLevel(a *Alert, lvl int, now time.Time) {
	a.Level = lvl
	a.LevelSince = now
	a.NextRepeat = time.Time{}
	if r := m.cfg.routeNamed(a.Route); r != nil && r.Repeat > 0 {
		a.NextRepeat = now.Add(r.Repeat)
	}
}

// peopleOf resolves receiver and rota ids to receiver ids on call at t.
func (m *Manager) peopleOf(ids []string, t time.Time) []string {
	var out []string
	add := func(id string) {
		if !slices.Contains(out, id) {
			out = append(out, id)
		}
	}
	for _, id := range ids {
		if r, ok := m.rotas[id]; ok {
			on := r.OnCall(t)
			if len(on) == 0 {
				m.log.Warn().Str("rota", id).Time("at", t).Msg("nobody on call")
			}
			for _, p := range on {
				add(p)
			}
			continue
		}
		add(id)
	}
	return out
}

// notifyLevel notifies the people of a's current escalation level.
func (m *Manager) notifyLevel(b *batch, a *Alert, notice Notice, now time.Time, actor, comment string) {
	r := m.cfg.routeNamed(a.Route)
	if r == nil || a.Level >= len(r.Levels) {
		return
	}
	for _, p := range m.peopleOf(r.Levels[a.Level].Notify, now) {
		m.notifyPerson(b, p, a, notice, now, actor, comment)
	}
}

// notifyNotified tells everyone notified of a so far.
func (m *Manager) notifyNotified(b *batch, a *Alert, notice Notice, now time.Time, actor, comment string) {
	for _, p := range slices.Clone(a.Notified) {
		m.notifyPerson(b, p, a, notice, now, actor, comment)
	}
}

// notifyPerson sends one notice to one receiver on each of their
// channels, unless the hourly cap is reached; then it is held for the
// summary. A pressing notice (see pressing) is sent over the cap: it
// counts in the window like any other but is never held.
func (m *Manager) notifyPerson(b *batch, id string, a *Alert, notice Notice, now time.Time, actor, comment string) {
	rc, ok := m.receivers[id]
	if !ok {
		m.log.Error().Str("receiver", id).Str("alert", a.ID).Msg("unknown receiver")
		return
	}
	ps := m.person(id, now)
	if !slices.Contains(a.Notified, id) {
		a.Notified = append(a.Notified, id)
	}
	if len(ps.Sent) >= m.cfg.HourlyCap {
		if !pressing(a.Severity, notice) {
			ps.Held = append(ps.Held, Held{Time: now, AlertID: a.ID, Notice: notice, Zone: a.Zone, Kind: a.Kind, Severity: a.Severity})
			b.people[id] = clonePerson(ps)
			return
		}
		m.log.Warn().Str("receiver", id).Str("alert", a.ID).Str("notice", string(notice)).Int("cap", m.cfg.HourlyCap).
			Msg("urgent notice sent over the hourly cap")
	}
	ps.Sent = append(ps.Sent, now)
	b.people[id] = clonePerson(ps)
	n := Notification{Notice: notice, Time: now, To: &Recipient{ID: rc.ID, Name: rc.Name, Email: rc.Email}, Alert: a.clone(), Levels: m.levels(a), Link: m.link(a.ID), Actor: actor, Comment: comment}
	for _, c := range m.contactChannels(rc) {
		n.Channel = c
		b.notes = append(b.notes, n)
	}
}

// pressing reports whether a notice of an alert of severity sev must
// reach its person now, whatever the hourly cap: an urgent alert that is
// news to them, that is, raised (or raised again), made urgent (its
// severity rose), escalated to them, back from the shelf, or handed
// over to them at a rota change. Reminders (repeated) and the notices
// that need no action (acknowledged, shelved, returned, cleared) are
// capped as usual, and so is everything of a lower severity: the cap
// keeps a flood of small things from burying the one big one, and must
// not delay the big one itself.
func pressing(sev Severity, notice Notice) bool {
	if sev != Urgent {
		return false
	}
	switch notice {
	case NoticeRaised, NoticeUpdated, NoticeEscalated, NoticeUnshelved, NoticeHandover:
		return true
	}
	return false
}

// contactChannels lists the channels that reach rc (log if none).
func (m *Manager) contactChannels(rc Receiver) []string {
	var out []string
	if rc.Email != "" {
		out = append(out, ChannelEmail)
	}
	if rc.Webhook {
		out = append(out, ChannelWebhook)
	}
	if rc.MQTT {
		out = append(out, ChannelMQTT)
	}
	if len(out) == 0 {
		out = append(out, ChannelLog)
	}
	return out
}

// person returns id's cap state with sends older than an hour dropped.
func (m *Manager) person(id string, now time.Time) *personState {
	ps, ok := m.people[id]
	if !ok {
		ps = &personState{}
		m.people[id] = ps
	}
	cut := now.Add(-time.Hour)
	keep := ps.Sent[:0]
	for _, t := range ps.Sent {
		if t.After(cut) {
			keep = append(keep, t)
		}
	}
	ps.Sent = keep
	return ps
}

func clonePerson(p *personState) personState {
	return personState{Sent: slices.Clone(p.Sent), Held: slices.Clone(p.Held)}
}

func (m *Manager) levels(a *Alert) int {
	if r := m.cfg.routeNamed(a.Route); r != nil {
		return len(r.Levels)
	}
	return 0
}

// link is the operator page of alert id ("" without operator_url).
func (m *Manager) link(id string) string {
	if m.cfg.OperatorURL == "" {
		return ""
	}
	base := strings.TrimRight(m.cfg.OperatorURL, "/")
	if id == "" {
		return base + "/alerts"
	}
	return base + "/alerts/" + id
}

// feed sends the alert's current state to every feed channel.
func (m *Manager) feed(b *batch, a *Alert, notice Notice, now time.Time) {
	a.LastFeed = now
	a.FeedDue = false
	for _, f := range m.cfg.Feeds {
		b.notes = append(b.notes, Notification{Channel: f, Notice: notice, Time: now, Alert: a.clone(), Levels: m.levels(a), Link: m.link(a.ID)})
	}
}

// Tick advances time to now: hysteresis (return to normal), shelf
// expiry, escalation, repeats, held summaries and throttled feed updates.
// Call it regularly (Run does, every TickInterval).
func (m *Manager) Tick(ctx context.Context, now time.Time) error {
	m.mu.Lock()
	defer m.mu.Unlock()
	if m.closed {
		return errors.New("alerts: manager closed")
	}
	now = now.UTC()
	b := newBatch()
	var errs []error
	gone := "no evidence for " + m.cfg.ClearAfter.String()
	for _, id := range m.openIDs() {
		a := m.open[id]
		changed, err := m.tickAlert(b, a, now, gone)
		if err != nil {
			errs = append(errs, err)
		}
		if a.FeedDue && a.State.Open() && !now.Before(a.LastFeed.Add(m.cfg.UpdateInterval)) {
			m.feed(b, a, NoticeUpdated, now)
			changed = true
		}
		if changed || m.dirty[id] {
			b.alerts[id] = a.clone()
			delete(m.dirty, id)
		}
		if !a.State.Open() {
			delete(m.open, id)
		}
	}
	m.summaries(b, now)
	b.lastTick = now
	if err := m.commitLocked(b); err != nil {
		errs = append(errs, err)
	}
	return errors.Join(errs...)
}

// tickAlert applies the time-driven rules to one alert.
func (m *Manager) tickAlert(b *batch, a *Alert, now time.Time, gone string) (bool, error) {
	quiet := !now.Before(a.LastEvidence.Add(m.cfg.ClearAfter))
	switch a.State {
	case Shelved:
		if quiet {
			err := m.apply(b, a, ReturnToNormal, systemActor, gone, now)
			m.feed(b, a, NoticeCleared, now)
			return true, err
		}
		if !a.ShelvedUntil.IsZero() && !now.Before(a.ShelvedUntil) {
			err := m.apply(b, a, ShelfExpired, systemActor, "", now)
			m.enterLevel(a, 0, now)
			m.notifyLevel(b, a, NoticeUnshelved, now, "", "")
			m.feed(b, a, NoticeUnshelved, now)
			return true, err
		}
	case Acknowledged:
		if quiet {
			err := m.apply(b, a, ReturnToNormal, systemActor, gone, now)
			m.notifyNotified(b, a, NoticeCleared, now, "", gone)
			m.feed(b, a, NoticeCleared, now)
			return true, err
		}
	case Unacknowledged:
		if quiet {
			err := m.apply(b, a, ReturnToNormal, systemActor, gone, now)
			m.notifyNotified(b, a, NoticeReturned, now, "", gone)
			m.feed(b, a, NoticeReturned, now)
			return true, err
		}
		r := m.cfg.routeNamed(a.Route)
		if r == nil || a.Level >= len(r.Levels) {
			return false, nil
		}
		if l := r.Levels[a.Level]; a.Level+1 < len(r.Levels) && l.AckTimeout > 0 && !now.Before(a.LevelSince.Add(l.AckTimeout)) {
			m.enterLevel(a, a.Level+1, now)
			b.audit = append(b.audit, AuditRecord{Time: now, Alert: a.ID, Actor: systemActor, Event: Escalate, From: a.State, To: a.State, Comment: fmt.Sprintf("not acknowledged within %s: level %d", l.AckTimeout, a.Level+1)})
			m.notifyLevel(b, a, NoticeEscalated, now, "", "")
			m.feed(b, a, NoticeEscalated, now)
			return true, nil
		}
		if !a.NextRepeat.IsZero() && !now.Before(a.NextRepeat) {
			a.NextRepeat = now.Add(r.Repeat)
			m.notifyLevel(b, a, NoticeRepeated, now, "", "")
			return true, nil
		}
		// After a rota handover, whoever came on call hears of it once.
		changed := false
		for _, p := range m.peopleOf(r.Levels[a.Level].Notify, now) {
			if !slices.Contains(a.Notified, p) {
				m.notifyPerson(b, p, a, NoticeHandover, now, "", "")
				changed = true
			}
		}
		return changed, nil
	}
	return false, nil
}

// summaries sends each person's held notices as one message once their
// hourly window has room.
func (m *Manager) summaries(b *batch, now time.Time) {
	ids := make([]string, 0, len(m.people))
	for id, p := range m.people {
		if len(p.Held) > 0 {
			ids = append(ids, id)
		}
	}
	sort.Strings(ids)
	for _, id := range ids {
		ps := m.person(id, now)
		if len(ps.Sent) >= m.cfg.HourlyCap {
			continue
		}
		rc, ok := m.receivers[id]
		if !ok {
			ps.Held = nil
			b.people[id] = clonePerson(ps)
			continue
		}
		ps.Sent = append(ps.Sent, now)
		n := Notification{Notice: NoticeSummary, Time: now, To: &Recipient{ID: rc.ID, Name: rc.Name, Email: rc.Email}, Held: slices.Clone(ps.Held), Link: m.link("")}
		for _, c := range m.contactChannels(rc) {
			n.Channel = c
			b.notes = append(b.notes, n)
		}
		ps.Held = nil
		b.people[id] = clonePerson(ps)
	}
}

// commitLocked persists b with whatever an earlier failed commit left,
// then wakes the dispatchers. Notifications beyond the outbox limit are
// dropped and counted, the newest first; pressing ones are kept even
// over the limit (they are few: news of urgent alerts).
func (m *Manager) commitLocked(b *batch) error {
	if room := int64(m.cfg.OutboxLimit) - m.pendingN.Load() - int64(len(m.unsaved.notes)); int64(len(b.notes)) > room {
		keep := b.notes[:0]
		var drop int64
		for _, n := range b.notes {
			if room > 0 || pressing(n.Alert.Severity, n.Notice) {
				keep = append(keep, n)
				room--
				continue
			}
			drop++
		}
		b.notes = keep
		if drop > 0 {
			m.dropped.Add(drop)
			m.log.Error().Int64("dropped", drop).Int("limit", m.cfg.OutboxLimit).Msg("outbox full: notifications dropped")
		}
	}
	m.unsaved.merge(b)
	if m.unsaved.empty() {
		return nil
	}
	if err := m.st.commit(m.unsaved); err != nil {
		m.log.Error().Err(err).Msg("alert store write failed; will retry")
		return fmt.Errorf("alerts: store: %w", err)
	}
	woke := map[string]bool{}
	for _, n := range m.unsaved.notes {
		if !woke[n.Channel] {
			woke[n.Channel] = true
			if w, ok := m.wake[n.Channel]; ok {
				select {
				case w <- struct{}{}:
				default:
				}
			}
		}
	}
	m.pendingN.Add(int64(len(m.unsaved.notes)))
	m.unsaved = newBatch()
	return nil
}

// lookup returns the open alert id, or the right error for a closed or
// unknown one.
func (m *Manager) lookup(id string) (*Alert, error) {
	if a, ok := m.open[id]; ok {
		return a, nil
	}
	a, found, err := m.st.alert(id)
	if err != nil {
		return nil, fmt.Errorf("alerts: store: %w", err)
	}
	if !found {
		return nil, fmt.Errorf("%w: %s", ErrNotFound, id)
	}
	return nil, fmt.Errorf("alert %s: %w: it is %s", id, ErrTransition, a.State)
}

// Acknowledge records that by has responded to alert id.
func (m *Manager) Acknowledge(ctx context.Context, id, by, comment string) (Alert, error) {
	if by == "" {
		return Alert{}, fmt.Errorf("%w: acknowledge needs who (by)", ErrInvalid)
	}
	return m.act(id, func(b *batch, a *Alert, now time.Time) error {
		if err := m.apply(b, a, Acknowledge, by, comment, now); err != nil {
			return err
		}
		a.AckedBy, a.AckedAt, a.AckComment = by, now, comment
		if a.State == Cleared {
			a.ClearedBy = by
		}
		m.notifyNotified(b, a, NoticeAcknowledged, now, by, comment)
		m.feed(b, a, NoticeAcknowledged, now)
		return nil
	})
}

// Shelve suppresses alert id for d (at most max_shelve).
func (m *Manager) Shelve(ctx context.Context, id, by string, d time.Duration, reason string) (Alert, error) {
	if by == "" {
		return Alert{}, fmt.Errorf("%w: shelve needs who (by)", ErrInvalid)
	}
	if d <= 0 || d > m.cfg.MaxShelve {
		return Alert{}, fmt.Errorf("%w: shelve duration %s not in (0, %s]", ErrInvalid, d, m.cfg.MaxShelve)
	}
	return m.act(id, func(b *batch, a *Alert, now time.Time) error {
		if err := m.apply(b, a, Shelve, by, reason, now); err != nil {
			return err
		}
		a.ShelvedBy, a.ShelvedUntil, a.ShelveReason = by, now.Add(d), reason
		m.notifyNotified(b, a, NoticeShelved, now, by, reason)
		m.feed(b, a, NoticeShelved, now)
		return nil
	})
}

// Clear closes alert id by hand; a reason is required.
func (m *Manager) Clear(ctx context.Context, id, by, reason string) (Alert, error) {
	if by == "" || reason == "" {
		return Alert{}, fmt.Errorf("%w: clear needs who (by) and a reason", ErrInvalid)
	}
	return m.act(id, func(b *batch, a *Alert, now time.Time) error {
		if err := m.apply(b, a, ClearByHand, by, reason, now); err != nil {
			return err
		}
		a.ClearedBy, a.ClearReason = by, reason
		m.notifyNotified(b, a, NoticeCleared, now, by, reason)
		m.feed(b, a, NoticeCleared, now)
		return nil
	})
}

// act runs an operator action on an open alert and persists it.
func (m *Manager) act(id string, f func(*batch, *Alert, time.Time) error) (Alert, error) {
	m.mu.Lock()
	defer m.mu.Unlock()
	if m.closed {
		return Alert{}, errors.New("alerts: manager closed")
	}
	a, err := m.lookup(id)
	if err != nil {
		return Alert{}, err
	}
	now := m.now().UTC()
	b := newBatch()
	if err := f(b, a, now); err != nil {
		return a.clone(), err
	}
	b.alerts[id] = a.clone()
	delete(m.dirty, id)
	if !a.State.Open() {
		delete(m.open, id)
	}
	return a.clone(), m.commitLocked(b)
}

// Alerts lists alerts by id: the open ones, or all stored when all is set.
func (m *Manager) Alerts(all bool) ([]Alert, error) {
	m.mu.Lock()
	defer m.mu.Unlock()
	if !all {
		out := make([]Alert, 0, len(m.open))
		for _, id := range m.openIDs() {
			out = append(out, m.open[id].clone())
		}
		return out, nil
	}
	stored, _, err := m.st.load()
	if err != nil {
		return nil, err
	}
	byID := map[string]Alert{}
	for _, a := range stored {
		byID[a.ID] = a
	}
	for id, a := range m.open {
		byID[id] = a.clone()
	}
	out := make([]Alert, 0, len(byID))
	for _, a := range byID {
		out = append(out, a)
	}
	sort.Slice(out, func(i, j int) bool { return out[i].ID < out[j].ID })
	return out, nil
}

// Get returns one alert (open or closed) and its audit records.
func (m *Manager) Get(id string) (Alert, []AuditRecord, error) {
	m.mu.Lock()
	defer m.mu.Unlock()
	var a Alert
	if o, ok := m.open[id]; ok {
		a = o.clone()
	} else {
		s, found, err := m.st.alert(id)
		if err != nil {
			return Alert{}, nil, err
		}
		if !found {
			return Alert{}, nil, fmt.Errorf("%w: %s", ErrNotFound, id)
		}
		a = s
	}
	audit, err := m.st.auditOf(id)
	return a, audit, err
}

// Deliveries returns the delivery log, oldest first.
func (m *Manager) Deliveries() ([]DeliveryRecord, error) { return m.st.deliveries() }

// Counts returns the number of open alerts per state (for the
// plumbline_alerts{state} gauge).
func (m *Manager) Counts() map[State]int {
	m.mu.Lock()
	defer m.mu.Unlock()
	out := map[State]int{}
	for _, a := range m.open {
		out[a.State]++
	}
	return out
}

// Stats are the dispatcher counters: notifications pending in the outbox,
// dropped because it was full, and failed after every attempt.
type Stats struct {
	Pending, Dropped, Failed int64
}

// Stats returns the dispatcher counters.
func (m *Manager) Stats() Stats {
	return Stats{Pending: m.pendingN.Load(), Dropped: m.dropped.Load(), Failed: m.failed.Load()}
}
