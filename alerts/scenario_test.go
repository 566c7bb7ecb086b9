package alerts

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strings"
	"testing"
	"time"

	"github.com/rs/zerolog"
	bolt "go.etcd.io/bbolt"
	"go.yaml.in/yaml/v3"

	"plumbline/model/finding"
)

// scenario is one file of testdata/scenarios: findings and operator
// actions at offsets from start, and the states and notifications
// expected at stated times.
type scenario struct {
	Description string        `yaml:"description"`
	Start       time.Time     `yaml:"start"`
	Tick        time.Duration `yaml:"tick"`
	Config      yaml.Node     `yaml:"config"`
	Steps       []step        `yaml:"steps"`
}

type step struct {
	At time.Duration `yaml:"at"`
	// Repeat the finding this many times, Every apart (a burst).
	Repeat  int           `yaml:"repeat"`
	Every   time.Duration `yaml:"every"`
	Finding *scenFinding  `yaml:"finding"`
	Ack     *scenAction   `yaml:"ack"`
	Shelve  *scenAction   `yaml:"shelve"`
	Clear   *scenAction   `yaml:"clear"`
	// Error is a substring the action's error must contain ("" : none).
	Error  string      `yaml:"error"`
	Expect *scenExpect `yaml:"expect"`
}

type scenFinding struct {
	Kind       finding.Kind  `yaml:"kind"`
	Zone       string        `yaml:"zone"`
	SizeLPS    float64       `yaml:"size_lps"`
	OpenFrac   float64       `yaml:"open_fraction"`
	Onset      time.Duration `yaml:"onset"` // offset from the step time (negative: earlier)
	Candidates []string      `yaml:"candidates"`
	Evidence   string        `yaml:"evidence"`
}

type scenAction struct {
	Alert    string        `yaml:"alert"`
	By       string        `yaml:"by"`
	Comment  string        `yaml:"comment"`
	Duration time.Duration `yaml:"duration"`
	Reason   string        `yaml:"reason"`
}

type scenAlert struct {
	State    State    `yaml:"state"`
	Severity Severity `yaml:"severity"`
	Level    int      `yaml:"level"` // 1-based; 0 means not checked
	Findings int      `yaml:"findings"`
	Best     string   `yaml:"best"`
}

type scenExpect struct {
	// Alerts maps alert id to expected fields (all stored alerts).
	Alerts map[string]scenAlert `yaml:"alerts"`
	// Count is the number of stored alerts (-1: not checked).
	Count *int `yaml:"count"`
	// Notify lists "ALERT NOTICE RECEIVER CHANNEL" for personal
	// notifications since the previous expect ("-" as alert for a summary);
	// nil means not checked, [] means none.
	Notify *[]string `yaml:"notify"`
	// Feed lists "ALERT NOTICE CHANNEL" for feed messages since the
	// previous expect.
	Feed *[]string `yaml:"feed"`
}

// drainOutbox removes and returns every pending notification, in order:
// what the dispatchers would send.
func drainOutbox(t *testing.T, m *Manager) []Notification {
	t.Helper()
	var out []Notification
	err := m.st.db.Update(func(tx *bolt.Tx) error {
		b := tx.Bucket(bucketOutbox)
		var keys [][]byte
		err := b.ForEach(func(k, v []byte) error {
			var n Notification
			if err := json.Unmarshal(v, &n); err != nil {
				return err
			}
			out = append(out, n)
			keys = append(keys, slices.Clone(k))
			return nil
		})
		if err != nil {
			return err
		}
		for _, k := range keys {
			if err := b.Delete(k); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		t.Fatalf("drain outbox: %v", err)
	}
	m.pendingN.Store(0)
	sort.SliceStable(out, func(i, j int) bool { return out[i].ID < out[j].ID })
	return out
}

// stubChannel is a named channel for scenarios, whose notifications stay
// in the outbox (Run is not started) and are read by drainOutbox.
type stubChannel string

func (s stubChannel) Name() string { return string(s) }
func (s stubChannel) Send(context.Context, Notification) error {
	return errors.New("scenario channel never sends")
}

func TestScenarios(t *testing.T) {
	files, err := filepath.Glob("testdata/scenarios/*.yaml")
	if err != nil || len(files) == 0 {
		t.Fatalf("no scenario files: %v", err)
	}
	for _, f := range files {
		t.Run(strings.TrimSuffix(filepath.Base(f), ".yaml"), func(t *testing.T) { runScenario(t, f) })
	}
}

func runScenario(t *testing.T, path string) {
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var sc scenario
	dec := yaml.NewDecoder(bytes.NewReader(data))
	dec.KnownFields(true)
	if err := dec.Decode(&sc); err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	cfg, err := DecodeConfig(&sc.Config)
	if err != nil {
		t.Fatalf("%s: config: %v", path, err)
	}
	if sc.Tick == 0 {
		sc.Tick = time.Minute
	}
	now := sc.Start.UTC()
	var chans []Channel
	for _, name := range []string{ChannelWebhook, ChannelEmail, ChannelMQTT} {
		chans = append(chans, stubChannel(name))
	}
	m, err := Open(Options{Config: cfg, DataDir: t.TempDir(), Channels: chans, Logger: zerolog.Nop(), Now: func() time.Time { return now }, TickInterval: -1})
	if err != nil {
		t.Fatal(err)
	}
	defer m.Close()

	// Expand bursts into single timed events, kept in file order at equal times.
	type ev struct {
		at time.Duration
		s  step
		i  int
	}
	var evs []ev
	for i, s := range sc.Steps {
		n := max(1, s.Repeat)
		for k := range n {
			evs = append(evs, ev{s.At + time.Duration(k)*s.Every, s, i})
		}
	}
	sort.SliceStable(evs, func(i, j int) bool { return evs[i].at < evs[j].at })

	ctx := context.Background()
	tick := func(to time.Time) {
		now = to
		if err := m.Tick(ctx, now); err != nil {
			t.Fatalf("tick %s: %v", now.Format(time.RFC3339), err)
		}
	}
	for _, e := range evs {
		at := sc.Start.Add(e.at).UTC()
		for !now.Add(sc.Tick).After(at) {
			tick(now.Add(sc.Tick))
		}
		if at.After(now) {
			tick(at)
		}
		where := fmt.Sprintf("%s step %d (at %s)", filepath.Base(path), e.i+1, e.at)
		s := e.s
		var actErr error
		switch {
		case s.Finding != nil:
			f := finding.Finding{Kind: s.Finding.Kind, Zone: s.Finding.Zone, SizeLPS: s.Finding.SizeLPS, OpenFrac: s.Finding.OpenFrac, Onset: now.Add(s.Finding.Onset), Raised: now, Evidence: s.Finding.Evidence}
			for k, id := range s.Finding.Candidates {
				f.Candidates = append(f.Candidates, finding.Candidate{ID: id, Score: 0.9 - 0.1*float64(k)})
			}
			_, actErr = m.Observe(ctx, f)
		case s.Ack != nil:
			_, actErr = m.Acknowledge(ctx, s.Ack.Alert, s.Ack.By, s.Ack.Comment)
		case s.Shelve != nil:
			_, actErr = m.Shelve(ctx, s.Shelve.Alert, s.Shelve.By, s.Shelve.Duration, s.Shelve.Reason)
		case s.Clear != nil:
			_, actErr = m.Clear(ctx, s.Clear.Alert, s.Clear.By, s.Clear.Reason)
		}
		switch {
		case s.Error == "" && actErr != nil:
			t.Errorf("%s: unexpected error: %v", where, actErr)
		case s.Error != "" && (actErr == nil || !strings.Contains(actErr.Error(), s.Error)):
			t.Errorf("%s: got error %v, want one containing %q", where, actErr, s.Error)
		}
		if s.Expect != nil {
			checkExpect(t, where, m, s.Expect, drainOutbox(t, m))
		}
	}
}

func checkExpect(t *testing.T, where string, m *Manager, x *scenExpect, got []Notification) {
	t.Helper()
	all, err := m.Alerts(true)
	if err != nil {
		t.Fatal(err)
	}
	byID := map[string]Alert{}
	for _, a := range all {
		byID[a.ID] = a
	}
	if x.Count != nil && len(all) != *x.Count {
		t.Errorf("%s: %d alerts stored, want %d", where, len(all), *x.Count)
	}
	for id, w := range x.Alerts {
		a, ok := byID[id]
		if !ok {
			t.Errorf("%s: alert %s missing", where, id)
			continue
		}
		if w.State != "" && a.State != w.State {
			t.Errorf("%s: %s state got %s, want %s", where, id, a.State, w.State)
		}
		if w.Severity != "" && a.Severity != w.Severity {
			t.Errorf("%s: %s severity got %s, want %s", where, id, a.Severity, w.Severity)
		}
		if w.Level != 0 && a.Level+1 != w.Level {
			t.Errorf("%s: %s level got %d, want %d", where, id, a.Level+1, w.Level)
		}
		if w.Findings != 0 && a.Findings != w.Findings {
			t.Errorf("%s: %s findings got %d, want %d", where, id, a.Findings, w.Findings)
		}
		if w.Best != "" && a.Best() != w.Best {
			t.Errorf("%s: %s best candidate got %s, want %s", where, id, a.Best(), w.Best)
		}
	}
	var notify, feed []string
	for _, n := range got {
		id := n.Alert.ID
		if id == "" {
			id = "-"
		}
		if n.To != nil {
			notify = append(notify, fmt.Sprintf("%s %s %s %s", id, n.Notice, n.To.ID, n.Channel))
		} else {
			feed = append(feed, fmt.Sprintf("%s %s %s", id, n.Notice, n.Channel))
		}
	}
	cmp := func(what string, want *[]string, got []string) {
		if want == nil {
			return
		}
		w := slices.Clone(*want)
		g := slices.Clone(got)
		slices.Sort(w)
		slices.Sort(g)
		if !slices.Equal(w, g) {
			t.Errorf("%s: %s notifications differ\n got: %q\nwant: %q", where, what, g, w)
		}
	}
	cmp("personal", x.Notify, notify)
	cmp("feed", x.Feed, feed)
}
