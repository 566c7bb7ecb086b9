package web

import (
	"encoding/json"
	"net/http"
	"net/http/httptest"
	"testing"

	"github.com/rs/zerolog"
)

// BenchmarkViewJSON is the cost of one /api/view answer for the demo town
// (the page asks every 5 s per open tab).
func BenchmarkViewJSON(b *testing.B) {
	d := loadDemo(b)
	h := NewHandler(d.cfg.Network, &demoProvider{d: d, ready: true}, nil, zerolog.Nop())
	req := httptest.NewRequest(http.MethodGet, "/api/view", nil)
	b.ReportAllocs()
	for b.Loop() {
		w := httptest.NewRecorder()
		h.ServeHTTP(w, req)
		if w.Code != 200 {
			b.Fatalf("status %d", w.Code)
		}
	}
}

// BenchmarkBuildMap is the one-time cost of the map data at start.
func BenchmarkBuildMap(b *testing.B) {
	d := loadDemo(b)
	b.ReportAllocs()
	for b.Loop() {
		if _, err := json.Marshal(BuildMap(d.cfg.Network)); err != nil {
			b.Fatal(err)
		}
	}
}
