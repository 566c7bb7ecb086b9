package alerts

import (
	"math"
	"slices"
	"testing"
	"time"

	"plumbline/model/finding"
)

func TestOnCall(t *testing.T) {
	cfg, err := ParseConfig([]byte(`
receivers: [{id: day}, {id: night}, {id: weekend}]
rotas:
  - id: r
    timezone: Etc/GMT-2
    shifts:
      - {days: [mon, tue, wed, thu, fri], start: "07:00", end: "19:00", people: [day]}
      - {days: [mon, tue, wed, thu, fri], start: "19:00", end: "07:00", people: [night]}
      - {days: [sat, sun], start: "07:00", end: "07:00", people: [weekend]}
`))
	if err != nil {
		t.Fatal(err)
	}
	r := &cfg.Rotas[0]
	// Etc/GMT-2 is UTC+2 (POSIX sign convention, IANA tz database).
	for _, c := range []struct {
		utc  string
		want []string
	}{
		{"2026-03-02T04:59:00Z", []string{"weekend"}}, // Mon 06:59 local: Sunday's 24 h shift runs to Monday 07:00
		{"2026-03-02T05:00:00Z", []string{"day"}},     // Mon 07:00 handover
		{"2026-03-02T16:59:00Z", []string{"day"}},     // Mon 18:59
		{"2026-03-02T17:00:00Z", []string{"night"}},   // Mon 19:00 handover
		{"2026-03-03T04:59:00Z", []string{"night"}},   // Tue 06:59, Monday's night shift
		{"2026-03-06T23:00:00Z", []string{"night"}},   // Sat 01:00, Friday's night shift
		{"2026-03-07T05:00:00Z", []string{"weekend"}},
		{"2026-03-08T23:00:00Z", []string{"weekend"}}, // Mon 01:00, Sunday's 24 h shift
	} {
		at, _ := time.Parse(time.RFC3339, c.utc)
		got := r.OnCall(at)
		if !slices.Equal(got, c.want) {
			t.Errorf("OnCall(%s) = %v, want %v", c.utc, got, c.want)
		}
	}
}

func TestHaversine(t *testing.T) {
	// On a sphere the arc between two points on a meridian is R·Δφ (radians):
	// one degree of latitude is 6371008.8·π/180 = 111195.08 m, and a quarter
	// of the equator is π·R/2 = 10007557.2 m (spherical geometry).
	for _, c := range []struct {
		lon1, lat1, lon2, lat2, want float64
	}{
		{0, 0, 0, 1, earthRadiusM * math.Pi / 180},
		{0, 0, 90, 0, earthRadiusM * math.Pi / 2},
		{10, 45, 10, 45, 0},
	} {
		got := haversine(c.lon1, c.lat1, c.lon2, c.lat2)
		if math.Abs(got-c.want) > 1e-6*max(1, c.want) {
			t.Errorf("haversine(%g,%g,%g,%g) = %.3f m, want %.3f m (rel tol 1e-6)", c.lon1, c.lat1, c.lon2, c.lat2, got, c.want)
		}
	}
	// Published check value (from memory): about 111.2 km per degree of latitude.
	if got := haversine(5, 50, 5, 51); math.Abs(got-111195) > 1 {
		t.Errorf("one degree of latitude: got %.1f m, want 111195 m ± 1 m", got)
	}
}

func TestClusterByDistance(t *testing.T) {
	pos := map[string][2]float64{"J-1": {5, 50}, "J-2": {5.001, 50}, "J-3": {5.1, 50}}
	loc := func(id string) (float64, float64, bool) { p, ok := pos[id]; return p[0], p[1], ok }
	a := &Alert{Zone: "z", Kind: "leak", Candidates: []finding.Candidate{{ID: "J-1"}}}
	// 0.001° of longitude at 50° N is 111195·0.001·cos 50° = 71.5 m.
	near := finding.Finding{Zone: "z", Kind: "leak", Candidates: []finding.Candidate{{ID: "J-2"}}}
	far := finding.Finding{Zone: "z", Kind: "leak", Candidates: []finding.Candidate{{ID: "J-3"}}}
	if !sameEvent(a, near, 3, 100, loc) {
		t.Error("J-2 at 71.5 m with distance_m 100: want the same event")
	}
	if sameEvent(a, near, 3, 50, loc) {
		t.Error("J-2 at 71.5 m with distance_m 50: want another event")
	}
	if sameEvent(a, far, 3, 100, loc) {
		t.Error("J-3 at 7.1 km: want another event")
	}
	if sameEvent(a, near, 3, 100, nil) {
		t.Error("no locator: distance must not be used")
	}
}

// TestOnCallDaylightSaving: shifts follow the local wall clock across the
// change to summer time. In the CET zone of the IANA tz database, clocks
// go from 02:00 CET (UTC+1) to 03:00 CEST (UTC+2) on the last Sunday of
// March (29 March 2026), so the 07:00 handover that morning is at 05:00 UTC,
// not 06:00 UTC.
func TestOnCallDaylightSaving(t *testing.T) {
	cfg, err := ParseConfig([]byte(`
receivers: [{id: day}, {id: night}]
rotas:
  - id: r
    timezone: CET
    shifts:
      - {start: "07:00", end: "19:00", people: [day]}
      - {start: "19:00", end: "07:00", people: [night]}
`))
	if err != nil {
		t.Fatal(err)
	}
	r := &cfg.Rotas[0]
	for _, c := range []struct {
		utc, want string
	}{
		{"2026-03-28T05:59:00Z", "night"}, // Sat 06:59 CET
		{"2026-03-28T06:00:00Z", "day"},   // Sat 07:00 CET
		{"2026-03-28T17:59:00Z", "day"},   // Sat 18:59 CET
		{"2026-03-28T18:00:00Z", "night"}, // Sat 19:00 CET
		{"2026-03-29T04:59:00Z", "night"}, // Sun 06:59 CEST
		{"2026-03-29T05:00:00Z", "day"},   // Sun 07:00 CEST
		{"2026-03-29T16:59:00Z", "day"},   // Sun 18:59 CEST
		{"2026-03-29T17:00:00Z", "night"}, // Sun 19:00 CEST
	} {
		at, _ := time.Parse(time.RFC3339, c.utc)
		if got := r.OnCall(at); !slices.Equal(got, []string{c.want}) {
			t.Errorf("OnCall(%s) = %v, want [%s]", c.utc, got, c.want)
		}
	}
}
