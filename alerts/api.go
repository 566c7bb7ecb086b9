package alerts

import (
	"crypto/sha256"
	"crypto/subtle"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/http"
	"strings"
	"time"
)

// maxBody bounds operator request bodies.
const maxBody = 64 << 10

// API is the operator HTTP API, an http.Handler with paths relative to
// where it is mounted (the daemon mounts it with
// http.StripPrefix("/api/alerts", api) under "/api/alerts/"):
//
//	GET  /                list open alerts (?all=1: every stored alert)
//	GET  /{id}            one alert with its audit records
//	POST /{id}/ack        {"by": "...", "comment": "..."}
//	POST /{id}/shelve     {"by": "...", "duration": "2h", "reason": "..."}
//	POST /{id}/clear      {"by": "...", "reason": "..."}
//
// Every request needs "Authorization: Bearer TOKEN" (compared in
// constant time). Answers are JSON; errors are {"error": "..."} with 400
// (bad request), 401, 404 (no such alert) or 409 (not allowed in the
// alert's state). Every change is recorded in the audit log with its time
// and actor (the "by" field).
type API struct {
	m     *Manager
	token [32]byte
	mux   *http.ServeMux
}

// NewAPI returns the API over m, protected by token (non-empty).
func NewAPI(m *Manager, token []byte) (*API, error) {
	if len(token) == 0 {
		return nil, errors.New("alerts: api: empty token")
	}
	a := &API{m: m, token: sha256.Sum256(token), mux: http.NewServeMux()}
	a.mux.HandleFunc("GET /{$}", a.list)
	a.mux.HandleFunc("GET /{id}", a.get)
	a.mux.HandleFunc("POST /{id}/ack", a.ack)
	a.mux.HandleFunc("POST /{id}/shelve", a.shelve)
	a.mux.HandleFunc("POST /{id}/clear", a.clear)
	a.mux.HandleFunc("/", func(w http.ResponseWriter, r *http.Request) {
		writeJSON(w, http.StatusNotFound, map[string]string{"error": "no such endpoint: " + r.Method + " " + r.URL.Path})
	})
	return a, nil
}

// ServeHTTP checks the token, then serves the request.
func (a *API) ServeHTTP(w http.ResponseWriter, r *http.Request) {
	got, ok := strings.CutPrefix(r.Header.Get("Authorization"), "Bearer ")
	// Hash both sides so the comparison is constant-time whatever the lengths.
	sum := sha256.Sum256([]byte(got))
	if !ok || subtle.ConstantTimeCompare(sum[:], a.token[:]) != 1 {
		w.Header().Set("WWW-Authenticate", `Bearer realm="plumbline alerts"`)
		writeJSON(w, http.StatusUnauthorized, map[string]string{"error": "missing or wrong bearer token"})
		return
	}
	a.mux.ServeHTTP(w, r)
}

func writeJSON(w http.ResponseWriter, code int, v any) {
	w.Header().Set("Content-Type", "application/json")
	w.WriteHeader(code)
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	enc.Encode(v)
}

func writeErr(w http.ResponseWriter, err error) {
	code := http.StatusInternalServerError
	switch {
	case errors.Is(err, ErrNotFound):
		code = http.StatusNotFound
	case errors.Is(err, ErrTransition):
		code = http.StatusConflict
	case errors.Is(err, ErrInvalid):
		code = http.StatusBadRequest
	}
	writeJSON(w, code, map[string]string{"error": err.Error()})
}

func (a *API) list(w http.ResponseWriter, r *http.Request) {
	all := r.URL.Query().Get("all") != ""
	alerts, err := a.m.Alerts(all)
	if err != nil {
		writeErr(w, err)
		return
	}
	writeJSON(w, http.StatusOK, map[string]any{"alerts": alerts})
}

func (a *API) get(w http.ResponseWriter, r *http.Request) {
	al, audit, err := a.m.Get(r.PathValue("id"))
	if err != nil {
		writeErr(w, err)
		return
	}
	writeJSON(w, http.StatusOK, map[string]any{"alert": al, "audit": audit})
}

// actionBody is the JSON body of every operator action.
type actionBody struct {
	By       string `json:"by"`
	Comment  string `json:"comment"`
	Duration string `json:"duration"`
	Reason   string `json:"reason"`
}

func decodeBody(r *http.Request) (actionBody, error) {
	var b actionBody
	dec := json.NewDecoder(io.LimitReader(r.Body, maxBody))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&b); err != nil {
		return b, fmt.Errorf("%w: body: %v", ErrInvalid, err)
	}
	b.By = strings.TrimSpace(b.By)
	return b, nil
}

func (a *API) ack(w http.ResponseWriter, r *http.Request) {
	b, err := decodeBody(r)
	if err == nil {
		var al Alert
		al, err = a.m.Acknowledge(r.Context(), r.PathValue("id"), b.By, b.Comment)
		if err == nil {
			writeJSON(w, http.StatusOK, map[string]any{"alert": al})
			return
		}
	}
	writeErr(w, err)
}

func (a *API) shelve(w http.ResponseWriter, r *http.Request) {
	b, err := decodeBody(r)
	if err == nil {
		var d time.Duration
		d, err = time.ParseDuration(b.Duration)
		if err != nil {
			err = fmt.Errorf("%w: duration %q: %v", ErrInvalid, b.Duration, err)
		} else {
			var al Alert
			al, err = a.m.Shelve(r.Context(), r.PathValue("id"), b.By, d, b.Reason)
			if err == nil {
				writeJSON(w, http.StatusOK, map[string]any{"alert": al})
				return
			}
		}
	}
	writeErr(w, err)
}

func (a *API) clear(w http.ResponseWriter, r *http.Request) {
	b, err := decodeBody(r)
	if err == nil {
		var al Alert
		al, err = a.m.Clear(r.Context(), r.PathValue("id"), b.By, b.Reason)
		if err == nil {
			writeJSON(w, http.StatusOK, map[string]any{"alert": al})
			return
		}
	}
	writeErr(w, err)
}
