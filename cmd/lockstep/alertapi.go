package main

import (
	"crypto/subtle"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/http"
	"strings"

	"github.com/lockstep-project/lockstep/alert"
)

// The alert API:
//
//	GET  /api/v1/alerts              the open alerts; ?state=all adds the
//	                                 recently cleared ones → {"alerts": [...]}
//	GET  /api/v1/alerts/{id}         one alert
//	POST /api/v1/alerts/{id}/ack     acknowledge a raised alert, with
//	                                 {"by": "...", "note": "..."}
//
// Access (apiState.token, apiState.remote): on a loopback listener the
// reads are open, and the writes need "Authorization: Bearer TOKEN" when a
// token is configured; on any other listener every request needs the token
// (except /healthz and /readyz), and lockstep run refuses to start without
// one. A missing token gives 401, a wrong one 403.

// alertRoutes registers the alert API on mux.
func (s apiState) alertRoutes(mux *http.ServeMux) {
	mux.HandleFunc("GET /api/v1/alerts", s.alertList)
	mux.HandleFunc("GET /api/v1/alerts/{id}", s.alertOne)
	mux.HandleFunc("POST /api/v1/alerts/{id}/ack", s.alertAck)
}

// guard wraps the API with the token checks of a listener that is not on
// loopback: every request but the health probes needs the token.
func (s apiState) guard(h http.Handler) http.Handler {
	if !s.remote {
		return h
	}
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		if !openPath(r) && !s.authorized(w, r) {
			return
		}
		h.ServeHTTP(w, r)
	})
}

// openPath tells the requests that need no token even beyond loopback:
// the health checks, and the dashboard's page and assets, which hold no
// data (the data come from the API, which needs the token).
func openPath(r *http.Request) bool {
	switch {
	case r.URL.Path == "/healthz", r.URL.Path == "/readyz":
		return true
	case r.Method != http.MethodGet && r.Method != http.MethodHead:
		return false
	}
	return r.URL.Path == "/" || strings.HasPrefix(r.URL.Path, "/assets/")
}

// tokenCookie is the cookie in which the dashboard keeps the token for its
// reads: a browser's event stream cannot send an Authorization header.
// Only reads (GET, HEAD) accept it; a write needs the header, so that a page
// of another site cannot make the browser acknowledge an alert.
const tokenCookie = "lockstep_token"

// authorized checks the bearer token, writing 401 or 403 when it fails.
// With no token configured (allowed only on loopback) everything is
// authorized. Reads may carry the token in the tokenCookie instead.
func (s apiState) authorized(w http.ResponseWriter, r *http.Request) bool {
	if s.token == "" {
		if !s.remote {
			return true
		}
		writeError(w, http.StatusForbidden, "the API listens beyond loopback and no token is configured; set LOCKSTEP_HTTP_TOKEN")
		return false
	}
	got, ok := strings.CutPrefix(r.Header.Get("Authorization"), "Bearer ")
	if (!ok || got == "") && (r.Method == http.MethodGet || r.Method == http.MethodHead) {
		if c, err := r.Cookie(tokenCookie); err == nil && c.Value != "" {
			got, ok = c.Value, true
		}
	}
	if !ok || got == "" {
		w.Header().Set("WWW-Authenticate", `Bearer realm="lockstep"`)
		writeError(w, http.StatusUnauthorized, "this request needs the header Authorization: Bearer TOKEN, with the token of [http] token or LOCKSTEP_HTTP_TOKEN")
		return false
	}
	if subtle.ConstantTimeCompare([]byte(got), []byte(s.token)) != 1 {
		writeError(w, http.StatusForbidden, "the bearer token is not the daemon's")
		return false
	}
	return true
}

// alertsJSON is the body of GET /api/v1/alerts.
type alertsJSON struct {
	Alerts []alert.Alert `json:"alerts"`
}

func (s apiState) alertList(w http.ResponseWriter, r *http.Request) {
	if s.alerts == nil {
		writeError(w, http.StatusServiceUnavailable, "alerts are not available")
		return
	}
	all := false
	switch st := r.URL.Query().Get("state"); st {
	case "", "open":
	case "all":
		all = true
	default:
		writeError(w, http.StatusBadRequest, fmt.Sprintf("state %q: use open (the default) or all", st))
		return
	}
	list := s.alerts.list(all)
	if list == nil {
		list = []alert.Alert{}
	}
	writeJSON(w, http.StatusOK, alertsJSON{Alerts: list})
}

func (s apiState) alertOne(w http.ResponseWriter, r *http.Request) {
	if s.alerts == nil {
		writeError(w, http.StatusServiceUnavailable, "alerts are not available")
		return
	}
	id := r.PathValue("id")
	a, ok := s.alerts.get(id)
	if !ok {
		writeError(w, http.StatusNotFound, fmt.Sprintf("no alert %q among the open and recently cleared ones; see /api/v1/alerts?state=all", id))
		return
	}
	writeJSON(w, http.StatusOK, a)
}

// ackRequest is the body of POST /api/v1/alerts/{id}/ack.
type ackRequest struct {
	By   string `json:"by"`
	Note string `json:"note"`
}

// maxAckBody bounds the body of an acknowledgement.
const maxAckBody = 16 << 10

func (s apiState) alertAck(w http.ResponseWriter, r *http.Request) {
	if !s.authorized(w, r) {
		return
	}
	if s.alerts == nil {
		writeError(w, http.StatusServiceUnavailable, "alerts are not available")
		return
	}
	var req ackRequest
	dec := json.NewDecoder(io.LimitReader(r.Body, maxAckBody))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&req); err != nil {
		writeError(w, http.StatusBadRequest, fmt.Sprintf("read the acknowledgement: %v; send {\"by\": \"NAME\", \"note\": \"TEXT\"}", err))
		return
	}
	a, err := s.alerts.ack(r.PathValue("id"), req.By, req.Note)
	switch {
	case err == nil:
		writeJSON(w, http.StatusOK, a)
	case errors.Is(err, alert.ErrInvalid):
		writeError(w, http.StatusBadRequest, err.Error())
	case errors.Is(err, errNoAlert):
		writeError(w, http.StatusNotFound, err.Error())
	case errors.Is(err, errAlertState):
		writeError(w, http.StatusConflict, err.Error())
	default:
		writeError(w, http.StatusInternalServerError, err.Error())
	}
}

// checkHTTPToken refuses a listener beyond loopback without a token: the
// API would be open to the network.
func checkHTTPToken(cfg *Config) error {
	host, _, err := splitHostPort(cfg.HTTP.Listen)
	if err == nil && !isLoopback(host) && cfg.HTTP.Token == "" {
		return fmt.Errorf("check config: [http] listen %q is not a loopback address, so the API needs a token: set LOCKSTEP_HTTP_TOKEN (or [http] token), or listen on 127.0.0.1", cfg.HTTP.Listen)
	}
	return nil
}
