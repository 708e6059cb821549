package alert

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"net/http"
	"net/http/httptest"
	"sync"
	"testing"
	"time"
)

// flakyServer is a webhook endpoint that fails the first fails requests
// with 503, then stalls every request until release is closed, then
// accepts. It records the event ids it accepted.
type flakyServer struct {
	mu       sync.Mutex
	fails    int
	stall    chan struct{}
	accepted []string
	requests int
}

func (s *flakyServer) ServeHTTP(w http.ResponseWriter, r *http.Request) {
	b, _ := io.ReadAll(r.Body)
	s.mu.Lock()
	s.requests++
	fail := s.fails > 0
	if fail {
		s.fails--
	}
	stall := s.stall
	s.mu.Unlock()
	if fail {
		http.Error(w, "down", http.StatusServiceUnavailable)
		return
	}
	if stall != nil {
		select {
		case <-stall:
		case <-r.Context().Done():
			return
		}
	}
	var ev Event
	if err := json.Unmarshal(b, &ev); err != nil || r.Header.Get("Content-Type") != "application/json" {
		http.Error(w, "bad event", http.StatusBadRequest)
		return
	}
	s.mu.Lock()
	s.accepted = append(s.accepted, ev.ID)
	s.mu.Unlock()
	w.WriteHeader(http.StatusNoContent)
}

func (s *flakyServer) ids() []string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return append([]string(nil), s.accepted...)
}

func waitFor(t *testing.T, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(10 * time.Second)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("timed out waiting for %s", what)
		}
		time.Sleep(5 * time.Millisecond)
	}
}

// raisedEvents returns n events of distinct alerts, as a machine makes them.
func raisedEvents(t *testing.T, n int) []Event {
	m := newTestMachine(t, 0)
	var out []Event
	for i := range n {
		c := cond(KindGroupSilent, PhaseRaise, "L"+string(rune('A'+i%26))+string(rune('a'+i/26)), 0)
		out = append(out, m.Step(at(i), []Condition{c})...)
	}
	return out
}

func TestWebhookFailsStallsRecovers(t *testing.T) {
	srv := &flakyServer{fails: 3, stall: make(chan struct{})}
	ts := httptest.NewServer(srv)
	defer ts.Close()
	w, err := NewWebhook(WebhookOptions{URL: ts.URL, Timeout: 30 * time.Second, Queue: 64, Attempts: 20,
		Backoff: time.Millisecond, MaxBackoff: 10 * time.Millisecond})
	if err != nil {
		t.Fatal(err)
	}
	// While the endpoint fails and then stalls, the caller is not held up:
	// every evaluation's Step and the Send of its events return while the
	// endpoint still stalls (it stalls until released, and a POST waits up
	// to 30 s), so a Send that waited for it would never get through the
	// 50 here before the deadline.
	m := newTestMachine(t, 0)
	var evs []Event
	var slowest time.Duration
	done := make(chan struct{})
	go func() {
		defer close(done)
		for i := range 50 {
			t0 := time.Now()
			c := cond(KindGroupSilent, PhaseRaise, fmt.Sprintf("L%d", i), 0)
			step := m.Step(at(i), []Condition{c})
			for _, ev := range step {
				w.Send(ev)
			}
			slowest = max(slowest, time.Since(t0))
			evs = append(evs, step...)
		}
	}()
	select {
	case <-done:
	case <-time.After(5 * time.Second):
		t.Fatal("Step and Send are held up by a stalled webhook")
	}
	t.Logf("slowest Step+Send while the webhook stalled: %v", slowest)
	waitFor(t, "the failing attempts", func() bool { return w.Stats().Retried >= 3 })
	time.Sleep(50 * time.Millisecond) // the endpoint stalls a while
	if st := w.Stats(); st.Sent != 0 || st.Queued != int64(len(evs)) {
		t.Fatalf("while stalled: %+v, want nothing sent and all %d queued", st, len(evs))
	}
	close(srv.stall) // recovers
	waitFor(t, "the deliveries", func() bool { return w.Stats().Sent == uint64(len(evs)) })
	st := w.Stats()
	if st.Failed != 0 || st.Dropped != 0 || st.Queued != 0 || st.Retried < 3 {
		t.Errorf("stats %+v: want nothing failed, dropped or queued, and the retries counted", st)
	}
	got := srv.ids()
	if len(got) != len(evs) {
		t.Fatalf("endpoint accepted %d events, want %d", len(got), len(evs))
	}
	for i, ev := range evs {
		if got[i] != ev.ID {
			t.Fatalf("event %d: got %s, want %s (in order, none lost)", i, got[i], ev.ID)
		}
	}
	if err := w.Close(context.Background()); err != nil {
		t.Fatal(err)
	}
}

func TestWebhookQueueOverflow(t *testing.T) {
	srv := &flakyServer{stall: make(chan struct{})}
	ts := httptest.NewServer(srv)
	defer ts.Close()
	w, err := NewWebhook(WebhookOptions{URL: ts.URL, Queue: 5, Backoff: time.Millisecond})
	if err != nil {
		t.Fatal(err)
	}
	evs := raisedEvents(t, 20)
	w.Send(evs[0])
	waitFor(t, "the first request", func() bool { srv.mu.Lock(); defer srv.mu.Unlock(); return srv.requests == 1 })
	for _, ev := range evs[1:] {
		w.Send(ev)
	}
	// One in delivery, five queued, fourteen dropped.
	if st := w.Stats(); st.Dropped != 14 || st.Queued != 6 {
		t.Fatalf("stats %+v, want 14 dropped and 6 queued", st)
	}
	close(srv.stall)
	waitFor(t, "the deliveries", func() bool { return w.Stats().Sent == 6 })
	got := srv.ids()
	for i := range 6 {
		if got[i] != evs[i].ID {
			t.Errorf("delivered %d: %s, want %s", i, got[i], evs[i].ID)
		}
	}
	if err := w.Close(context.Background()); err != nil {
		t.Fatal(err)
	}
	w.Send(evs[0]) // after Close: dropped, no panic
	if st := w.Stats(); st.Dropped != 15 {
		t.Errorf("dropped %d after a Send past Close, want 15", st.Dropped)
	}
}

func TestWebhookGivesUp(t *testing.T) {
	// A dead endpoint: every attempt fails, the event is given up after
	// Attempts; a 400 is not retried.
	var mu sync.Mutex
	status := http.StatusBadGateway
	n := 0
	ts := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, _ *http.Request) {
		mu.Lock()
		n++
		s := status
		mu.Unlock()
		w.WriteHeader(s)
	}))
	defer ts.Close()
	w, err := NewWebhook(WebhookOptions{URL: ts.URL, Attempts: 4, Backoff: time.Millisecond})
	if err != nil {
		t.Fatal(err)
	}
	evs := raisedEvents(t, 2)
	w.Send(evs[0])
	waitFor(t, "giving up", func() bool { return w.Stats().Failed == 1 })
	mu.Lock()
	if n != 4 {
		t.Errorf("%d attempts, want 4", n)
	}
	status, n = http.StatusBadRequest, 0
	mu.Unlock()
	w.Send(evs[1])
	waitFor(t, "giving up", func() bool { return w.Stats().Failed == 2 })
	mu.Lock()
	if n != 1 {
		t.Errorf("%d attempts for a 400, want 1", n)
	}
	mu.Unlock()
	_ = w.Close(context.Background())
}

func TestWebhookCloseWithStalledEndpoint(t *testing.T) {
	stall := make(chan struct{})
	ts := httptest.NewServer(http.HandlerFunc(func(_ http.ResponseWriter, r *http.Request) {
		select {
		case <-stall:
		case <-r.Context().Done():
		}
	}))
	defer ts.Close()
	defer close(stall)
	w, err := NewWebhook(WebhookOptions{URL: ts.URL})
	if err != nil {
		t.Fatal(err)
	}
	for _, ev := range raisedEvents(t, 3) {
		w.Send(ev)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 50*time.Millisecond)
	defer cancel()
	if err := w.Close(ctx); err == nil {
		t.Error("Close with a stalled endpoint and a short deadline returned nil")
	}
	if st := w.Stats(); st.Failed != 3 || st.Queued != 0 {
		t.Errorf("stats %+v, want the 3 undelivered counted as failed", st)
	}
}

func TestWebhookOptionsChecked(t *testing.T) {
	for _, o := range []WebhookOptions{{}, {URL: "ftp://x"}, {URL: "http://"}, {URL: "http://x", Queue: -1}} {
		if _, err := NewWebhook(o); err == nil {
			t.Errorf("%+v accepted", o)
		}
	}
}
