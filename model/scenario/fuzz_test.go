package scenario

import (
	"path/filepath"
	"strings"
	"testing"
)

// FuzzLoad feeds arbitrary bytes to Load. Seeds are the files under
// testdata/fuzz/FuzzLoad plus the scenario corpus. Properties: Load never
// panics; every problem names the file; a scenario accepted without error
// has a span and every event starts inside it.
func FuzzLoad(f *testing.F) {
	files, _ := filepath.Glob(filepath.Join(dir, "*.yaml"))
	for _, p := range files {
		if data, err := readFile(p); err == nil {
			f.Add(data)
		}
	}
	name := filepath.Join(f.TempDir(), "fuzz.yaml")
	f.Fuzz(func(t *testing.T, data []byte) {
		s, err := Load(data, name)
		if err != nil {
			for _, m := range splitJoined(err) {
				if !strings.HasPrefix(m, name) {
					t.Errorf("message without the file name: %q", m)
				}
			}
			return
		}
		if s.Start.IsZero() || s.Duration <= 0 || s.Step <= 0 || len(s.Sensors) == 0 {
			t.Fatalf("accepted a scenario without span or sensors: %+v", s)
		}
		for i, e := range s.Events {
			if e.Start.Before(s.Start) || !e.Start.Before(s.End()) {
				t.Errorf("accepted events[%d] starting at %s outside [%s, %s)", i, e.Start, s.Start, s.End())
			}
		}
	})
}
