package main

import (
	"context"
	"encoding/json"
	"io"
	"net/http"
	"net/http/httptest"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/rs/zerolog"

	"github.com/lockstep-project/lockstep/alert"
	"github.com/lockstep-project/lockstep/cmd/lockstep/internal/plant"
	"github.com/lockstep-project/lockstep/ingest"
	"github.com/lockstep-project/lockstep/store"
)

// simClock is the daemon's clock in these tests: it moves only when the
// test says so, so that an hour of plant runs in a second.
type simClock struct {
	mu sync.Mutex
	t  time.Time
}

func (c *simClock) now() time.Time  { c.mu.Lock(); defer c.mu.Unlock(); return c.t }
func (c *simClock) set(t time.Time) { c.mu.Lock(); c.t = t; c.mu.Unlock() }

// pubBox records what the NATS alert sink publishes.
type pubBox struct {
	mu     sync.Mutex
	subj   []string
	events []alert.Event
}

func (p *pubBox) Publish(subject string, data []byte) error {
	var ev alert.Event
	if err := json.Unmarshal(data, &ev); err != nil {
		return err
	}
	p.mu.Lock()
	p.subj = append(p.subj, subject)
	p.events = append(p.events, ev)
	p.mu.Unlock()
	return nil
}

func (p *pubBox) transitions() []string {
	p.mu.Lock()
	defer p.mu.Unlock()
	var out []string
	for _, ev := range p.events {
		out = append(out, ev.Transition.String())
	}
	return out
}

// newAlertLoop is newLoopDaemon on the simulated clock, restoring at the
// clock's time, with pub as the NATS alert sink.
func newAlertLoop(t *testing.T, dir, text string, clock *simClock, pub alert.Publisher) *loopDaemon {
	t.Helper()
	cfg := DefaultConfig()
	cfg.NATS.URL = "nats://127.0.0.1:1"
	cfg.Store.CommitInterval = setDuration(5 * time.Millisecond)
	if err := ParseConfig(strings.NewReader(text), cfg); err != nil {
		t.Fatal(err)
	}
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	st, err := store.Open(filepath.Join(dir, "lockstep.db"), store.Options{NoSync: true})
	if err != nil {
		t.Fatal(err)
	}
	d := newDaemon(cfg, st, zerolog.Nop())
	d.now, d.alerts.now = clock.now, clock.now
	src := &fakeSource{t: t, st: st}
	d.src, d.dead = src, &deadBox{}
	if d.val, err = ingest.NewValidator(validatorConfig(cfg)); err != nil {
		t.Fatal(err)
	}
	d.met.watch(d.val.Counters(), src, nil)
	if err := d.restore(clock.now()); err != nil {
		t.Fatal(err)
	}
	if err := d.alerts.startSinks(pub); err != nil {
		t.Fatal(err)
	}
	ld := &loopDaemon{daemon: d, store: st, src: src}
	t.Cleanup(func() {
		ld.stop(t)
		_ = st.Close()
		ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
		defer cancel()
		_ = d.alerts.close(ctx)
	})
	return ld
}

// plantFeed hands out a plant's messages minute by minute as JetStream
// messages with increasing sequences.
type plantFeed struct {
	gen  *plant.Generator
	next *plant.Message
	seq  uint64
	n    uint64 // good values handed out
}

func (f *plantFeed) until(t *testing.T, end time.Time) []ingest.Msg {
	t.Helper()
	var out []ingest.Msg
	for {
		if f.next == nil {
			m, ok := f.gen.Next()
			if !ok {
				return out
			}
			f.next = &m
		}
		if !f.next.Time.Before(end) {
			return out
		}
		f.seq++
		m := f.next
		out = append(out, ingest.Msg{Subject: m.Subject, Data: m.Payload, Seq: f.seq, Stored: m.Time, Arrived: m.Time})
		if m.Bad == "" {
			f.n++
		}
		f.next = nil
	}
}

// minute feeds the plant's values up to end, waits until the loop added
// them, moves the clock to end and waits for the evaluation at end.
func (f *plantFeed) minute(t *testing.T, ld *loopDaemon, clock *simClock, end time.Time, base uint64) {
	t.Helper()
	ld.src.push(f.until(t, end)...)
	waitUntil(t, "the values applied", func() bool { return ld.met.added.Load()+ld.met.late.Load() == f.n-base })
	clock.set(end)
	waitUntil(t, "the evaluation at "+end.Format(time.TimeOnly), func() bool {
		r, ok := ld.book.get("fill-weight")
		return ok && r.summary.Evaluated.Equal(end)
	})
}

// TestAlertLifeCycleOnPlant: a daemon fed a simulated plant in which line
// L3 moves up by 1.5 within-group SD at minute 15 and back at minute 30
// raises a means alert naming L3, high; after a restart in the raised state
// it does not raise it again; it is acknowledged over HTTP; it clears after
// the shift is removed. The NATS alert subject sees one "raised".
func TestAlertLifeCycleOnPlant(t *testing.T) {
	start := time.Date(2026, 12, 1, 6, 0, 0, 0, time.UTC)
	sc := plant.Scenario{
		Name: "alert test", Seed: 11, Start: start, Duration: 60 * time.Minute,
		Characteristics: []plant.Characteristic{{
			Name: "fill-weight", Unit: "g", Nominal: "500.00", Resolution: 2, SD: 1, Rate: 1, Arrivals: plant.Regular,
			Groups: []string{"L1", "L2", "L3", "L4"},
			Events: []plant.Event{
				{Kind: plant.Shift, Group: "L3", At: 15 * time.Minute, By: 1.5},
				{Kind: plant.Shift, Group: "L3", At: 30 * time.Minute, By: -1.5},
			},
		}},
	}
	gen, err := plant.New(sc)
	if err != nil {
		t.Fatal(err)
	}
	// Window F detectors at 1 and 5 minutes only, so that clearing takes
	// minutes (the CUSUMs and the 30-minute window would take longer, and
	// are tested in package alert).
	hook := &hookBox{}
	hookSrv := httptest.NewServer(hook)
	defer hookSrv.Close()
	cfgText := `
[alerts.webhook]
url = "` + hookSrv.URL + `"
backoff = "1ms"

[defaults]
evaluate_every = "1m"
window = "10m"

[characteristics.fill-weight]
unit = "g"

[characteristics.fill-weight.alert]
windows = [{length = "1m", share = 0.5}, {length = "5m", share = 0.5}]
cusums = []
clear_after = 3
`
	dir := t.TempDir()
	clock := &simClock{t: start}
	pub := &pubBox{}
	ld := newAlertLoop(t, dir, cfgText, clock, pub)
	ld.start()
	feed := &plantFeed{gen: gen}
	var raisedAt time.Time
	for m := 1; m <= 25 && raisedAt.IsZero(); m++ {
		end := start.Add(time.Duration(m) * time.Minute)
		feed.minute(t, ld, clock, end, 0)
		for _, a := range ld.alerts.list(false) {
			if a.Kind == alert.KindMeansDiverge && a.State == alert.StateRaised {
				raisedAt = end
				if m <= 15 {
					t.Errorf("raised at minute %d, before the shift at 15: %+v", m, a)
				}
				if len(a.Groups) != 1 || a.Groups[0] != "L3" || a.Direction != 1 || a.Shift < 0.5 || a.Lower <= 0 {
					t.Errorf("raised alert %+v: want L3, high, its interval above 0", a)
				}
				if a.Unit != "g" || a.Test == "" || !(a.P < 1e-5) {
					t.Errorf("raised alert figures %+v", a)
				}
			}
		}
	}
	if raisedAt.IsZero() {
		t.Fatalf("no means alert raised within 10 minutes of a 1.5 SD shift; alerts %+v", ld.alerts.list(true))
	}
	if d := raisedAt.Sub(start.Add(15 * time.Minute)); d > 3*time.Minute {
		t.Errorf("raised %v after the shift, want within 3 minutes (1-minute F at n = 60 per group)", d)
	}
	open := ld.alerts.list(false)
	id := open[0].ID

	// Restart in the raised state, the shift still on.
	ld.close(t)
	if err := ld.alerts.close(context.Background()); err != nil { // the webhook delivered what it had
		t.Fatal(err)
	}
	base := feed.n
	ld = newAlertLoop(t, dir, cfgText, clock, pub)
	if got, ok := ld.alerts.get(id); !ok || got.State != alert.StateRaised {
		t.Fatalf("after the restart: %+v, %v; want %s raised", got, ok, id)
	}
	ld.start()
	now := raisedAt
	for range 3 {
		now = now.Add(time.Minute)
		feed.minute(t, ld, clock, now, base)
	}
	if got, _ := ld.alerts.get(id); got.State != alert.StateRaised {
		t.Fatalf("after the restart and three evaluations: %+v", got)
	}

	// Acknowledge over HTTP.
	srv := httptest.NewServer(newAPIHandler(apiState{book: ld.book, reg: ld.met.reg, log: zerolog.Nop(), alerts: ld.alerts, token: "tok"}))
	defer srv.Close()
	if code, m := do(t, "POST", srv.URL+"/api/v1/alerts/"+id+"/ack", "tok", `{"by":"Ana","note":"L3 filler checked"}`); code != 200 || m["state"] != "acknowledged" {
		t.Fatalf("ack over HTTP: %d %v", code, m)
	}

	// The shift ends at minute 30: the alert clears, once.
	var clearedAt time.Time
	for now.Before(start.Add(55*time.Minute)) && clearedAt.IsZero() {
		now = now.Add(time.Minute)
		feed.minute(t, ld, clock, now, base)
		if got, _ := ld.alerts.get(id); got.State == alert.StateCleared {
			clearedAt = now
		}
	}
	if clearedAt.IsZero() {
		t.Fatalf("not cleared by minute 55: %+v", ld.alerts.list(true))
	}
	if clearedAt.Before(start.Add(30 * time.Minute)) {
		t.Errorf("cleared at %v, before the shift ended", clearedAt)
	}
	// 5-minute window clean after 35, then 3 quiet evaluations.
	if d := clearedAt.Sub(start.Add(30 * time.Minute)); d > 12*time.Minute {
		t.Errorf("cleared %v after the shift ended, want within 12 minutes", d)
	}
	t.Logf("raised at +%v, cleared at +%v", raisedAt.Sub(start), clearedAt.Sub(start))
	// The events go out once their commit has returned; the commit is due
	// when the clock has moved past the commit interval.
	clock.set(now.Add(time.Second))
	waitUntil(t, "the cleared event on NATS", func() bool {
		tr := pub.transitions()
		return len(tr) > 0 && tr[len(tr)-1] == "cleared"
	})
	got := pub.transitions()
	want := []string{"raised", "acknowledged", "cleared"}
	means := []string{}
	pub.mu.Lock()
	for i, ev := range pub.events {
		if ev.Alert.ID == id {
			means = append(means, got[i])
		}
		if pub.subj[i] != "lockstep.alerts.fill-weight" {
			t.Errorf("subject %q", pub.subj[i])
		}
	}
	pub.mu.Unlock()
	if strings.Join(means, " ") != strings.Join(want, " ") {
		t.Errorf("NATS events of the alert: %v, want %v (one raised, across the restart)", means, want)
	}
	// The webhook got the same events, and /metrics counts them.
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	if err := ld.alerts.close(ctx); err != nil {
		t.Fatal(err)
	}
	if got := hook.transitions(id); strings.Join(got, " ") != strings.Join(want, " ") {
		t.Errorf("webhook events of the alert: %v, want %v", got, want)
	}
	for sample, want := range map[string]float64{
		`lockstep_alert_events_total{kind="means-diverge",transition="cleared"}`:      1,
		`lockstep_alert_events_total{kind="means-diverge",transition="acknowledged"}`: 1,
		`lockstep_alerts_open{kind="means-diverge",state="raised"}`:                   0,
		`lockstep_alert_webhook_events_total{result="dropped"}`:                       0,
	} {
		if got, ok := gathered(t, ld.met.reg, sample); !ok || got != want {
			t.Errorf("%s = %v (%v), want %v", sample, got, ok, want)
		}
	}
	if got, _ := gathered(t, ld.met.reg, `lockstep_alert_webhook_events_total{result="sent"}`); got < 2 {
		t.Errorf("webhook sent %v events after the restart, want at least the acknowledged and the cleared", got)
	}
	// The records are in the store: the cleared alert is there after the
	// loop stops.
	ld.close(t)
	st, err := store.OpenReadOnly(filepath.Join(dir, "lockstep.db"), store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	found := false
	if err := st.Alerts(func(r store.AlertRecord) error {
		a, err := alert.DecodeRecord(r.Data)
		if err == nil && a.ID == id {
			found = a.State == alert.StateCleared && a.AcknowledgedBy == "Ana" && !r.Closed.IsZero()
		}
		return err
	}); err != nil {
		t.Fatal(err)
	}
	if !found {
		t.Error("the stored record of the alert is not cleared and acknowledged by Ana")
	}
}

func TestMonitorEnvelope(t *testing.T) {
	mon, err := alert.NewMonitor(alert.DefaultRule())
	if err != nil {
		t.Fatal(err)
	}
	state, err := mon.State()
	if err != nil {
		t.Fatal(err)
	}
	prev := time.Date(2026, 12, 1, 6, 0, 0, 0, time.UTC)
	got, err := restoreMonitor(mon, monitorEnvelope(prev, state))
	if err != nil || !got.Equal(prev) {
		t.Fatalf("round trip: %v, %v", got, err)
	}
	if got, err := restoreMonitor(mon, monitorEnvelope(time.Time{}, state)); err != nil || !got.IsZero() {
		t.Fatalf("zero time: %v, %v", got, err)
	}
	for _, b := range [][]byte{nil, {1}, {2, 0, 0, 0, 0, 0, 0, 0, 0}} {
		if _, err := restoreMonitor(mon, b); err == nil {
			t.Errorf("%v accepted", b)
		}
	}
}

func FuzzRestoreMonitor(f *testing.F) {
	mon, err := alert.NewMonitor(alert.DefaultRule())
	if err != nil {
		f.Fatal(err)
	}
	state, _ := mon.State()
	f.Add(monitorEnvelope(time.Unix(1e9, 0), state))
	f.Add([]byte{1, 0, 0, 0, 0, 0, 0, 0, 0})
	f.Fuzz(func(t *testing.T, b []byte) {
		m, err := alert.NewMonitor(alert.DefaultRule())
		if err != nil {
			t.Fatal(err)
		}
		_, _ = restoreMonitor(m, b) // must not panic
	})
}

// hookBox is a webhook endpoint that records the events it gets.
type hookBox struct {
	mu     sync.Mutex
	events []alert.Event
}

func (h *hookBox) ServeHTTP(w http.ResponseWriter, r *http.Request) {
	b, _ := io.ReadAll(r.Body)
	var ev alert.Event
	if err := json.Unmarshal(b, &ev); err != nil {
		http.Error(w, err.Error(), http.StatusBadRequest)
		return
	}
	h.mu.Lock()
	h.events = append(h.events, ev)
	h.mu.Unlock()
	w.WriteHeader(http.StatusNoContent)
}

func (h *hookBox) transitions(id string) []string {
	h.mu.Lock()
	defer h.mu.Unlock()
	var out []string
	for _, ev := range h.events {
		if ev.Alert.ID == id {
			out = append(out, ev.Transition.String())
		}
	}
	return out
}

// gathered returns the value of one sample, written as in the text format
// (name{label="value",...}, labels in the order of the metric), from reg.
func gathered(t *testing.T, reg *prometheus.Registry, sample string) (float64, bool) {
	t.Helper()
	mfs, err := reg.Gather()
	if err != nil {
		t.Fatal(err)
	}
	for _, mf := range mfs {
		for _, m := range mf.GetMetric() {
			var labels []string
			for _, l := range m.GetLabel() {
				labels = append(labels, l.GetName()+`="`+l.GetValue()+`"`)
			}
			name := mf.GetName()
			if len(labels) > 0 {
				name += "{" + strings.Join(labels, ",") + "}"
			}
			if name != sample {
				continue
			}
			switch {
			case m.Counter != nil:
				return m.Counter.GetValue(), true
			case m.Gauge != nil:
				return m.Gauge.GetValue(), true
			}
		}
	}
	return 0, false
}
