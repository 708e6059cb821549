package main

import (
	"encoding/json"
	"fmt"
	stdlog "log"
	"net/http"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/promhttp"
	"github.com/rs/zerolog"
)

// apiState is what the HTTP API serves from: the latest reports, the
// metrics registry and whether the daemon is ready.
type apiState struct {
	book  *reportBook
	reg   *prometheus.Registry
	ready func() bool
	log   zerolog.Logger
	store backupSource // for GET /api/v1/backup; nil: 503

	// The alert API (alertapi.go): the runtime (nil: 503), the bearer
	// token, and whether the listener is beyond loopback.
	alerts *alerting
	token  string
	remote bool

	// The dashboard's server-sent events (sse.go; nil: 503).
	stream *streamHub
}

// newAPIHandler returns the HTTP API:
//
//	GET /api/v1/characteristics          every characteristic's state
//	GET /api/v1/characteristics/{name}   one characteristic's latest report
//	GET /api/v1/backup                   a consistent copy of the store (backup.go)
//	GET /api/v1/alerts[/{id}], POST /api/v1/alerts/{id}/ack   alerts (alertapi.go)
//	GET /api/v1/stream                   server-sent events (sse.go)
//	GET /, /assets/...                   the dashboard (dashboard.go)
//	GET /metrics                         Prometheus text format
//	GET /healthz                         200 while the process serves
//	GET /readyz                          200 once the state is restored and the first fetch returned
//
// Anything else is a 404 with a JSON error.
func newAPIHandler(s apiState) http.Handler {
	mux := http.NewServeMux()
	mux.HandleFunc("GET /api/v1/characteristics", s.list)
	mux.HandleFunc("GET /api/v1/characteristics/{name...}", s.one)
	mux.HandleFunc("GET /api/v1/backup", s.backup)
	s.alertRoutes(mux)
	s.dashboardRoutes(mux) // GET /, /assets/..., /api/v1/stream (dashboard.go)
	mux.Handle("GET /metrics", promhttp.HandlerFor(s.reg, promhttp.HandlerOpts{
		ErrorLog: promLog{s.log}, ErrorHandling: promhttp.ContinueOnError,
	}))
	mux.HandleFunc("GET /healthz", func(w http.ResponseWriter, _ *http.Request) {
		writeJSON(w, http.StatusOK, map[string]string{"status": "ok"})
	})
	mux.HandleFunc("GET /readyz", func(w http.ResponseWriter, _ *http.Request) {
		if s.ready == nil || !s.ready() {
			writeJSON(w, http.StatusServiceUnavailable, map[string]string{"status": "starting: restoring the state or waiting for the first fetch"})
			return
		}
		writeJSON(w, http.StatusOK, map[string]string{"status": "ready"})
	})
	mux.HandleFunc("/", func(w http.ResponseWriter, r *http.Request) {
		writeError(w, http.StatusNotFound, fmt.Sprintf("no such resource %s %s; see /api/v1/characteristics", r.Method, r.URL.Path))
	})
	return s.guard(mux)
}

func (s apiState) list(w http.ResponseWriter, _ *http.Request) {
	writeJSON(w, http.StatusOK, struct {
		Characteristics []jsonSummary `json:"characteristics"`
	}{s.book.summaries()})
}

func (s apiState) one(w http.ResponseWriter, r *http.Request) {
	name := r.PathValue("name")
	rep, ok := s.book.get(name)
	if !ok {
		writeError(w, http.StatusNotFound, fmt.Sprintf("no characteristic %q: none was configured or seen under that name; see /api/v1/characteristics", name))
		return
	}
	w.Header().Set("Content-Type", "application/json")
	w.Header().Set("Cache-Control", "no-store")
	_, _ = w.Write(rep.detail)
}

// writeJSON writes v as the JSON response.
func writeJSON(w http.ResponseWriter, status int, v any) {
	b, err := json.MarshalIndent(v, "", "  ")
	if err != nil {
		http.Error(w, "encode response: "+err.Error(), http.StatusInternalServerError)
		return
	}
	w.Header().Set("Content-Type", "application/json")
	w.Header().Set("Cache-Control", "no-store")
	w.WriteHeader(status)
	_, _ = w.Write(append(b, '\n'))
}

// writeError writes {"error": msg}.
func writeError(w http.ResponseWriter, status int, msg string) {
	writeJSON(w, status, map[string]string{"error": msg})
}

// newHTTPServer returns the API server with timeouts that keep a slow
// client from holding connections.
func newHTTPServer(h http.Handler, log zerolog.Logger) *http.Server {
	return &http.Server{
		Handler:           h,
		ReadHeaderTimeout: 5 * time.Second,
		ReadTimeout:       10 * time.Second,
		WriteTimeout:      30 * time.Second,
		IdleTimeout:       2 * time.Minute,
		ErrorLog:          stdlog.New(log, "", 0),
	}
}

// promLog passes promhttp's errors to the log.
type promLog struct{ log zerolog.Logger }

func (l promLog) Println(v ...any) { l.log.Error().Msg(fmt.Sprint(v...)) }
