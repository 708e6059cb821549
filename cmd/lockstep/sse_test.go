package main

import (
	"bufio"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"net/http"
	"net/http/httptest"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/rs/zerolog"

	"github.com/lockstep-project/lockstep/stats"
	"github.com/lockstep-project/lockstep/window"
)

// sseEvent is one parsed server-sent event (or a comment, name ":").
type sseEvent struct {
	id, name, data string
}

// sseReader reads events from a stream response.
type sseReader struct {
	t    *testing.T
	resp *http.Response
	sc   *bufio.Scanner
	// retry is the last "retry:" field seen.
	retry string
}

// openStream connects to srv's stream, with Last-Event-ID when last != "".
func openStream(t *testing.T, ctx context.Context, url, last string) *sseReader {
	t.Helper()
	req, err := http.NewRequestWithContext(ctx, http.MethodGet, url+"/api/v1/stream", nil)
	if err != nil {
		t.Fatal(err)
	}
	if last != "" {
		req.Header.Set("Last-Event-ID", last)
	}
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { resp.Body.Close() })
	if resp.StatusCode != http.StatusOK || !strings.HasPrefix(resp.Header.Get("Content-Type"), "text/event-stream") {
		t.Fatalf("stream: status %d, %s", resp.StatusCode, resp.Header.Get("Content-Type"))
	}
	return &sseReader{t: t, resp: resp, sc: bufio.NewScanner(resp.Body)}
}

// next returns the next event or comment block; ok false at the end of the
// stream.
func (r *sseReader) next() (sseEvent, bool) {
	var ev sseEvent
	seen := false
	for r.sc.Scan() {
		line := r.sc.Text()
		if line == "" {
			if seen {
				return ev, true
			}
			continue
		}
		seen = true
		field, value, _ := strings.Cut(line, ":")
		value = strings.TrimPrefix(value, " ")
		switch field {
		case "":
			if ev.name == "" {
				ev.name = ":"
				ev.data = value
			}
		case "id":
			ev.id = value
		case "event":
			ev.name = value
		case "data":
			ev.data = value
		case "retry":
			r.retry = value
		}
	}
	return ev, false
}

// nextEvent skips comments and returns the next named event.
func (r *sseReader) nextEvent() sseEvent {
	r.t.Helper()
	for {
		ev, ok := r.next()
		if !ok {
			r.t.Fatalf("stream ended, waiting for an event: %v", r.sc.Err())
		}
		if ev.name != ":" && ev.name != "" {
			return ev
		}
	}
}

// streamServer serves the API with a hub and a book wired as lockstep run
// wires them.
func streamServer(t *testing.T, opt streamOptions) (*httptest.Server, *streamHub, *reportBook) {
	t.Helper()
	reg := prometheus.NewRegistry()
	hub := newStreamHub(opt, reg)
	book := newReportBook()
	book.onPut = hub.summary
	srv := httptest.NewUnstartedServer(newAPIHandler(apiState{book: book, reg: reg, log: zerolog.Nop(), stream: hub}))
	srv.Config.RegisterOnShutdown(hub.close)
	srv.Start()
	t.Cleanup(func() { hub.close(); srv.Close() })
	return srv, hub, book
}

func TestStreamSummaryAndAlert(t *testing.T) {
	srv, hub, book := streamServer(t, streamOptions{Epoch: "e1"})
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	r := openStream(t, ctx, srv.URL, "")
	if ev, ok := r.next(); !ok || ev.name != ":" || r.retry != "3000" {
		t.Fatalf("first block %+v, retry %q: want a comment and retry: 3000", ev, r.retry)
	}
	waitClients(t, hub, 1)
	lr := testLive(t)
	book.put(lr)
	ev := r.nextEvent()
	if ev.name != "summary" || ev.id != "e1-1" {
		t.Fatalf("got %+v, want summary e1-1", ev)
	}
	var s jsonSummary
	if err := json.Unmarshal([]byte(ev.data), &s); err != nil {
		t.Fatal(err)
	}
	if s.Name != "fill-weight" || s.Unit != "g" || len(s.Groups) != 3 {
		t.Fatalf("summary %+v", s)
	}
	alertEv := `{"event":"x1","transition":"raised","alert":{"id":"a1","state":"raised"}}`
	hub.alert([]byte(alertEv))
	ev = r.nextEvent()
	if ev.name != "alert" || ev.id != "e1-2" || ev.data != alertEv {
		t.Fatalf("got %+v, want the alert event e1-2", ev)
	}
}

func TestStreamHeartbeat(t *testing.T) {
	srv, _, _ := streamServer(t, streamOptions{Heartbeat: 20 * time.Millisecond})
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	r := openStream(t, ctx, srv.URL, "")
	r.next() // the opening comment
	ev, ok := r.next()
	if !ok || ev.name != ":" || ev.data != "heartbeat" {
		t.Fatalf("got %+v, want a heartbeat comment", ev)
	}
}

// TestStreamReconnect: a client that comes back with the id of the last
// event it got receives what it missed, in order; one whose id the hub can
// no longer serve (another run, or older than what it keeps) is told to
// resync first.
func TestStreamReconnect(t *testing.T) {
	srv, hub, _ := streamServer(t, streamOptions{Epoch: "run7", Recent: 4})
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	publish := func(from, to int) {
		for i := from; i <= to; i++ {
			hub.publish("summary", []byte(fmt.Sprintf(`{"n":%d}`, i)))
		}
	}
	r := openStream(t, ctx, srv.URL, "")
	waitClients(t, hub, 1)
	publish(1, 2)
	if ev := r.nextEvent(); ev.id != "run7-1" {
		t.Fatalf("got %+v", ev)
	}
	last := r.nextEvent().id
	r.resp.Body.Close()
	waitClients(t, hub, 0)
	publish(3, 5) // missed while away

	r2 := openStream(t, ctx, srv.URL, last)
	for i := 3; i <= 5; i++ {
		ev := r2.nextEvent()
		if want := fmt.Sprintf("run7-%d", i); ev.id != want || ev.data != fmt.Sprintf(`{"n":%d}`, i) {
			t.Fatalf("replay: got %+v, want id %s", ev, want)
		}
	}
	publish(6, 6) // and then live again
	if ev := r2.nextEvent(); ev.id != "run7-6" {
		t.Fatalf("live after replay: got %+v", ev)
	}

	for _, tc := range []struct{ name, last string }{
		{"another run", "run6-3"},
		{"too old", "run7-1"}, // the hub keeps 3..6 of 6
		{"ahead", "run7-99"},
		{"garbage", "not an id"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			r := openStream(t, ctx, srv.URL, tc.last)
			if ev := r.nextEvent(); ev.name != "resync" || ev.id != "" {
				t.Fatalf("got %+v, want resync", ev)
			}
		})
	}
	// Up to date: nothing to replay, no resync; the next event is live.
	r3 := openStream(t, ctx, srv.URL, "run7-6") // subscribed once the headers are in
	publish(7, 7)
	if ev := r3.nextEvent(); ev.id != "run7-7" {
		t.Fatalf("up to date: got %+v", ev)
	}
}

// blockingWriter is a ResponseWriter whose writes wait until released: a
// browser that does not read.
type blockingWriter struct {
	mu      sync.Mutex
	h       http.Header
	body    strings.Builder
	release chan struct{}
	once    sync.Once
	started chan struct{}
}

func (w *blockingWriter) Header() http.Header { return w.h }
func (w *blockingWriter) WriteHeader(int)     {}
func (w *blockingWriter) Write(b []byte) (int, error) {
	w.once.Do(func() { close(w.started) })
	<-w.release
	w.mu.Lock()
	defer w.mu.Unlock()
	return w.body.Write(b)
}
func (w *blockingWriter) Flush() {}

// TestStreamSlowClient: a client that does not keep up never blocks
// publish; it is dropped and told to resync after what it had buffered.
func TestStreamSlowClient(t *testing.T) {
	reg := prometheus.NewRegistry()
	hub := newStreamHub(streamOptions{Buffer: 2, Epoch: "s"}, reg)
	defer hub.close()
	w := &blockingWriter{h: http.Header{}, release: make(chan struct{}), started: make(chan struct{})}
	req := httptest.NewRequest(http.MethodGet, "/api/v1/stream", nil)
	done := make(chan struct{})
	go func() { hub.serveHTTP(w, req); close(done) }()
	<-w.started // the handler is stuck in its first write
	for i := range 10 {
		hub.publish("summary", []byte(fmt.Sprint(i))) // must not block
	}
	if got := testCounter(t, hub.overflows); got != 1 {
		t.Fatalf("overflows %v, want 1", got)
	}
	close(w.release)
	select {
	case <-done:
	case <-time.After(5 * time.Second):
		t.Fatal("the dropped client's handler did not end")
	}
	body := w.body.String()
	// The two buffered events (s-1 and s-2), then resync; nothing after.
	i1, i2, ir := strings.Index(body, "id: s-1\n"), strings.Index(body, "id: s-2\n"), strings.Index(body, "event: resync")
	if i1 < 0 || i2 < i1 || ir < i2 || strings.Contains(body, "id: s-3\n") {
		t.Fatalf("body:\n%s", body)
	}
}

// TestStreamShutdown: closing the hub (as http.Server.Shutdown does
// through RegisterOnShutdown) ends open streams, so that Shutdown
// returns at once.
func TestStreamShutdown(t *testing.T) {
	srv, hub, _ := streamServer(t, streamOptions{})
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	r := openStream(t, ctx, srv.URL, "")
	waitClients(t, hub, 1)
	sctx, scancel := context.WithTimeout(context.Background(), 3*time.Second)
	defer scancel()
	if err := srv.Config.Shutdown(sctx); err != nil {
		t.Fatalf("shutdown with an open stream: %v", err)
	}
	for {
		if _, ok := r.next(); !ok {
			break
		}
	}
	// A stopping hub refuses new streams.
	rec := httptest.NewRecorder()
	hub.serveHTTP(rec, httptest.NewRequest(http.MethodGet, "/api/v1/stream", nil))
	if rec.Code != http.StatusServiceUnavailable {
		t.Fatalf("stream after close: %d", rec.Code)
	}
	hub.publish("summary", []byte("{}")) // dropped, no panic
}

func TestStreamNotWired(t *testing.T) {
	srv := httptest.NewServer(newAPIHandler(apiState{book: newReportBook(), reg: prometheus.NewRegistry(), log: zerolog.Nop()}))
	defer srv.Close()
	status, _, body := httpGet(t, srv.URL+"/api/v1/stream")
	if status != http.StatusServiceUnavailable || !strings.Contains(body, "not available") {
		t.Fatalf("%d %s", status, body)
	}
}

func TestDashboardRoutes(t *testing.T) {
	srv := httptest.NewServer(newAPIHandler(apiState{book: newReportBook(), reg: prometheus.NewRegistry(), log: zerolog.Nop()}))
	defer srv.Close()
	for _, tc := range []struct {
		path, ctype, has string
		status           int
	}{
		{"/", "text/html", "Caution.", 200},
		{"/assets/app.js", "javascript", "EventSource", 200},
		{"/assets/style.css", "text/css", "--raised", 200},
		{"/assets/nothing.js", "", "", 404},
		{"/api/v1/nothing", "application/json", "no such resource", 404},
	} {
		resp, err := http.Get(srv.URL + tc.path)
		if err != nil {
			t.Fatal(err)
		}
		b, _ := io.ReadAll(resp.Body)
		resp.Body.Close()
		if resp.StatusCode != tc.status || !strings.Contains(resp.Header.Get("Content-Type"), tc.ctype) || !strings.Contains(string(b), tc.has) {
			t.Errorf("%s: %d %s, want %d %s containing %q", tc.path, resp.StatusCode, resp.Header.Get("Content-Type"), tc.status, tc.ctype, tc.has)
		}
		if tc.status == 200 && !strings.Contains(resp.Header.Get("Content-Security-Policy"), "script-src 'self'") {
			t.Errorf("%s: no Content-Security-Policy", tc.path)
		}
	}
}

// FuzzStreamID: any Last-Event-ID is read without panic, and the ids the
// hub writes read back as themselves.
func FuzzStreamID(f *testing.F) {
	h := newStreamHub(streamOptions{Epoch: "abc"}, nil)
	for _, s := range []string{"abc-1", "abc-", "-1", "abc-18446744073709551615", "abc-18446744073709551616", "x-1", "", " abc-2 "} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		seq, ok := h.parseID(s)
		if ok {
			if again, ok2 := h.parseID(h.id(seq)); !ok2 || again != seq {
				t.Fatalf("%q: %d does not round-trip", s, seq)
			}
		}
		if c, _, _, ok := h.subscribe(s); ok { // any id: replay, resync or nothing, no panic
			h.unsubscribe(c)
		}
	})
}

// testLive returns the live report of a small window of fill-weight with
// three groups.
func testLive(t *testing.T) *liveReport {
	t.Helper()
	w, err := window.New(window.Config{})
	if err != nil {
		t.Fatal(err)
	}
	t0 := time.Date(2026, 3, 1, 8, 0, 0, 0, time.UTC)
	for i := range 30 {
		g := w.Group([]string{"L1", "L2", "L3"}[i%3])
		w.Add(g, t0.Add(time.Duration(i)*time.Second), float64(i%7)*0.01+float64(i%3)*0.02)
	}
	ref := stats.NewReference(mustDecimal(t, "500.00"))
	ev := w.Evaluate(t0.Add(time.Minute), stats.DefaultOptions(), ref)
	lr, err := buildLive(liveInput{Name: "fill-weight", Unit: "g", Evaluated: t0.Add(time.Minute), Eval: ev, Win: w, Ref: ref})
	if err != nil {
		t.Fatal(err)
	}
	return lr
}

// waitClients waits until hub has n clients.
func waitClients(t *testing.T, hub *streamHub, n int) {
	t.Helper()
	deadline := time.Now().Add(5 * time.Second)
	for {
		hub.mu.Lock()
		got := len(hub.clients)
		hub.mu.Unlock()
		if got == n {
			return
		}
		if time.Now().After(deadline) {
			t.Fatalf("%d stream clients, want %d", got, n)
		}
		time.Sleep(5 * time.Millisecond)
	}
}

// testCounter reads a counter's value.
func testCounter(t *testing.T, c prometheus.Counter) float64 {
	t.Helper()
	reg := prometheus.NewRegistry()
	reg.MustRegister(c)
	mfs, err := reg.Gather()
	if err != nil || len(mfs) != 1 {
		t.Fatalf("gather: %v", err)
	}
	return mfs[0].GetMetric()[0].GetCounter().GetValue()
}
