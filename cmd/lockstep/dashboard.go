package main

import (
	"embed"
	"io/fs"
	"net/http"
)

// The shift dashboard: plain HTML, CSS and JavaScript in web/, embedded in
// the binary (no build step, nothing fetched from elsewhere), served by the
// daemon at / and /assets/, live through GET /api/v1/stream (sse.go).
//
// Every name from the data (characteristics, groups, who acknowledged) is
// put into the page as text (textContent, createElement), never as markup;
// the Content-Security-Policy below allows scripts and styles only from
// /assets/ besides, so that even a mistake there could not run a script
// that came with the data.

//go:embed web
var webFiles embed.FS

// dashboardCSP is the Content-Security-Policy of the dashboard's pages.
const dashboardCSP = "default-src 'none'; script-src 'self'; style-src 'self'; img-src 'self'; connect-src 'self'; " +
	"base-uri 'none'; form-action 'none'; frame-ancestors 'none'"

// dashboardRoutes registers the dashboard and its event stream on mux.
func (s apiState) dashboardRoutes(mux *http.ServeMux) {
	assets, err := fs.Sub(webFiles, "web")
	if err != nil {
		panic(err) // the embedded tree always has web/
	}
	files := http.StripPrefix("/assets/", http.FileServerFS(assets))
	mux.HandleFunc("GET /{$}", func(w http.ResponseWriter, r *http.Request) {
		secureHeaders(w)
		w.Header().Set("Cache-Control", "no-cache")
		http.ServeFileFS(w, r, assets, "index.html")
	})
	mux.Handle("GET /assets/", http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		secureHeaders(w)
		w.Header().Set("Cache-Control", "no-cache")
		files.ServeHTTP(w, r)
	}))
	mux.HandleFunc("GET /api/v1/stream", func(w http.ResponseWriter, r *http.Request) {
		if s.stream == nil {
			writeError(w, http.StatusServiceUnavailable, "the event stream is not available in this server")
			return
		}
		s.stream.serveHTTP(w, r)
	})
}

// secureHeaders sets the headers of every dashboard response.
func secureHeaders(w http.ResponseWriter) {
	h := w.Header()
	h.Set("Content-Security-Policy", dashboardCSP)
	h.Set("X-Content-Type-Options", "nosniff")
	h.Set("Referrer-Policy", "no-referrer")
}
