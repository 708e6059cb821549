package main

import (
	"encoding/json"
	"fmt"
	"net/http"
	"strconv"
	"strings"
	"sync"
	"time"

	"github.com/prometheus/client_golang/prometheus"
)

// GET /api/v1/stream: server-sent events (the WHATWG HTML standard,
// section "Server-sent events") for the dashboard.
//
//	event: summary   data: a characteristic's jsonSummary, after each evaluation
//	event: alert     data: an alert event, {"event", "time", "transition", "previous", "alert"}
//	event: resync    data: {"reason": "..."}: events were lost; fetch
//	                 /api/v1/characteristics and /api/v1/alerts again
//
// Every summary and alert event has an id, EPOCH-SEQ: EPOCH names this run
// of the hub, SEQ counts its events from 1. A client that reconnects with
// the header Last-Event-ID (browsers send it by themselves) gets the events
// it missed when the hub still holds them (the last streamRecent), and
// otherwise a resync event first. A comment line is sent every heartbeat so
// that proxies and browsers see the connection alive, and "retry:" tells
// the browser how long to wait before reconnecting.
//
// A slow client never slows the daemon: each client has a bounded buffer,
// and when an event does not fit, the hub drops the client; its handler
// sends resync and ends the response, and the browser reconnects.

// Defaults of the stream.
const (
	streamBuffer    = 256              // events buffered per client
	streamRecent    = 1024             // events kept for Last-Event-ID
	streamHeartbeat = 15 * time.Second // comment line interval
	streamRetry     = 3 * time.Second  // the browser's reconnection delay
	streamWriteWait = 10 * time.Second // longest wait for one write to a client
)

// streamOptions configure a hub; zero fields take the defaults above.
type streamOptions struct {
	Buffer    int
	Recent    int
	Heartbeat time.Duration
	Retry     time.Duration
	// Epoch names this run of the hub in event ids; default the Unix
	// nanoseconds of Now at creation, in base 36.
	Epoch string
	Now   func() time.Time // default time.Now; only for Epoch
}

// streamEvent is one event as sent: its id, name and data on one line.
type streamEvent struct {
	seq  uint64
	name string
	data []byte
}

// streamClient is one connected browser.
type streamClient struct {
	ch   chan streamEvent
	gone chan struct{} // closed when the hub dropped the client
}

// streamHub fans events out to the connected clients. publish is safe from
// any goroutine and never blocks on a client.
type streamHub struct {
	opt streamOptions

	mu      sync.Mutex
	seq     uint64
	recent  []streamEvent // ring of the last opt.Recent events
	head    int           // index of the oldest in recent once full
	clients map[*streamClient]struct{}
	closed  bool
	done    chan struct{} // closed by close

	clientsGauge prometheus.GaugeFunc
	sent         prometheus.Counter
	overflows    prometheus.Counter
}

// newStreamHub returns a hub whose metrics go to reg (nil: none).
func newStreamHub(opt streamOptions, reg prometheus.Registerer) *streamHub {
	if opt.Buffer <= 0 {
		opt.Buffer = streamBuffer
	}
	if opt.Recent <= 0 {
		opt.Recent = streamRecent
	}
	if opt.Heartbeat <= 0 {
		opt.Heartbeat = streamHeartbeat
	}
	if opt.Retry <= 0 {
		opt.Retry = streamRetry
	}
	if opt.Now == nil {
		opt.Now = time.Now
	}
	if opt.Epoch == "" {
		opt.Epoch = strconv.FormatInt(opt.Now().UnixNano(), 36)
	}
	h := &streamHub{opt: opt, clients: map[*streamClient]struct{}{}, done: make(chan struct{})}
	h.clientsGauge = prometheus.NewGaugeFunc(prometheus.GaugeOpts{
		Name: "lockstep_stream_clients", Help: "Clients connected to the server-sent events of /api/v1/stream.",
	}, func() float64 {
		h.mu.Lock()
		defer h.mu.Unlock()
		return float64(len(h.clients))
	})
	h.sent = prometheus.NewCounter(prometheus.CounterOpts{
		Name: "lockstep_stream_events_total", Help: "Events published to the server-sent events stream.",
	})
	h.overflows = prometheus.NewCounter(prometheus.CounterOpts{
		Name: "lockstep_stream_overflows_total", Help: "Stream clients dropped because they did not keep up (they are told to resync).",
	})
	if reg != nil {
		reg.MustRegister(h.clientsGauge, h.sent, h.overflows)
	}
	return h
}

// summary publishes a characteristic's summary (reportBook.onPut).
func (h *streamHub) summary(s jsonSummary) {
	b, err := json.Marshal(s)
	if err != nil {
		return // a summary holds no value JSON cannot encode
	}
	h.publish("summary", b)
}

// alert publishes an alert event (alerting.alertHook); b is copied.
func (h *streamHub) alert(b []byte) {
	h.publish("alert", append([]byte(nil), b...))
}

// publish sends an event to every client whose buffer has room and drops
// the others. data must be one line (compact JSON is).
func (h *streamHub) publish(name string, data []byte) {
	h.mu.Lock()
	defer h.mu.Unlock()
	if h.closed {
		return
	}
	h.seq++
	ev := streamEvent{seq: h.seq, name: name, data: data}
	if len(h.recent) < h.opt.Recent {
		h.recent = append(h.recent, ev)
	} else {
		h.recent[h.head] = ev
		h.head = (h.head + 1) % len(h.recent)
	}
	h.sent.Inc()
	for c := range h.clients {
		select {
		case c.ch <- ev:
		default:
			h.drop(c)
			h.overflows.Inc()
		}
	}
}

// drop removes c; its handler tells the browser to resync. h.mu is held.
func (h *streamHub) drop(c *streamClient) {
	delete(h.clients, c)
	close(c.gone)
}

// subscribe adds a client. It returns the events after lastID that the hub
// still holds, and whether the client must resync first: lastID is of
// another run, unknown, or older than what the hub holds. lastID "" is a
// new client: nothing to replay, no resync.
func (h *streamHub) subscribe(lastID string) (c *streamClient, replay []streamEvent, resync bool, ok bool) {
	h.mu.Lock()
	defer h.mu.Unlock()
	if h.closed {
		return nil, nil, false, false
	}
	c = &streamClient{ch: make(chan streamEvent, h.opt.Buffer), gone: make(chan struct{})}
	h.clients[c] = struct{}{}
	if lastID == "" {
		return c, nil, false, true
	}
	seq, known := h.parseID(lastID)
	if !known || seq > h.seq {
		return c, nil, true, true
	}
	if seq == h.seq {
		return c, nil, false, true
	}
	ordered := append(append([]streamEvent(nil), h.recent[h.head:]...), h.recent[:h.head]...)
	if len(ordered) == 0 || ordered[0].seq > seq+1 {
		return c, nil, true, true // the events after seq are no longer all held
	}
	for _, ev := range ordered {
		if ev.seq > seq {
			replay = append(replay, ev)
		}
	}
	return c, replay, false, true
}

// unsubscribe removes c if the hub still has it.
func (h *streamHub) unsubscribe(c *streamClient) {
	h.mu.Lock()
	defer h.mu.Unlock()
	delete(h.clients, c)
}

// close ends every stream (http.Server.Shutdown waits for idle
// connections, which a stream never is); later publishes are dropped.
func (h *streamHub) close() {
	h.mu.Lock()
	defer h.mu.Unlock()
	if h.closed {
		return
	}
	h.closed = true
	close(h.done)
}

// id returns the event id of seq.
func (h *streamHub) id(seq uint64) string { return h.opt.Epoch + "-" + strconv.FormatUint(seq, 10) }

// parseID reads EPOCH-SEQ; known is false for another epoch or bad text.
func (h *streamHub) parseID(s string) (uint64, bool) {
	epoch, seqText, ok := strings.Cut(strings.TrimSpace(s), "-")
	if !ok || epoch != h.opt.Epoch {
		return 0, false
	}
	seq, err := strconv.ParseUint(seqText, 10, 64)
	if err != nil {
		return 0, false
	}
	return seq, true
}

// serveHTTP streams events to one client until it goes, the hub drops it or
// closes.
func (h *streamHub) serveHTTP(w http.ResponseWriter, r *http.Request) {
	rc := http.NewResponseController(w)
	c, replay, resync, ok := h.subscribe(r.Header.Get("Last-Event-ID"))
	if !ok {
		writeError(w, http.StatusServiceUnavailable, "the daemon is stopping; reconnect to the next one")
		return
	}
	defer h.unsubscribe(c)
	hd := w.Header()
	hd.Set("Content-Type", "text/event-stream; charset=utf-8")
	hd.Set("Cache-Control", "no-store")
	hd.Set("X-Accel-Buffering", "no")
	w.WriteHeader(http.StatusOK)

	write := func(format string, args ...any) bool {
		// The server's WriteTimeout would end the stream; each write gets
		// its own deadline instead, so a stuck client goes after
		// streamWriteWait.
		_ = rc.SetWriteDeadline(time.Now().Add(streamWriteWait)) // wall time: an I/O deadline
		if _, err := fmt.Fprintf(w, format, args...); err != nil {
			return false
		}
		return rc.Flush() == nil
	}
	send := func(ev streamEvent) bool {
		return write("id: %s\nevent: %s\ndata: %s\n\n", h.id(ev.seq), ev.name, ev.data)
	}
	if !write("retry: %d\n: lockstep stream %s\n\n", h.opt.Retry.Milliseconds(), h.opt.Epoch) {
		return
	}
	if resync && !write("event: resync\ndata: {\"reason\":\"the events since the last one received are no longer held\"}\n\n") {
		return
	}
	for _, ev := range replay {
		if !send(ev) {
			return
		}
	}
	beat := time.NewTicker(h.opt.Heartbeat)
	defer beat.Stop()
	for {
		select {
		case ev := <-c.ch:
			if !send(ev) {
				return
			}
		case <-c.gone:
			// What is still buffered goes first: the resync then covers
			// only what was lost after it.
		drain:
			for {
				select {
				case ev := <-c.ch:
					if !send(ev) {
						return
					}
				default:
					break drain
				}
			}
			write("event: resync\ndata: {\"reason\":\"this client fell behind and events were dropped\"}\n\n")
			return
		case <-beat.C:
			if !write(": heartbeat\n\n") {
				return
			}
		case <-h.done:
			return
		case <-r.Context().Done():
			return
		}
	}
}
