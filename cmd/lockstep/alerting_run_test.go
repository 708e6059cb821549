package main

import (
	"encoding/json"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats.go"

	"github.com/lockstep-project/lockstep/alert"
	"github.com/lockstep-project/lockstep/cmd/lockstep/internal/plant"
)

// natsAlerts collects the alert events published on lockstep.alerts.>.
type natsAlerts struct {
	mu     sync.Mutex
	subj   []string
	events []alert.Event
}

func subscribeAlerts(t *testing.T, nc *nats.Conn) *natsAlerts {
	t.Helper()
	box := &natsAlerts{}
	sub, err := nc.Subscribe("lockstep.alerts.>", func(m *nats.Msg) {
		var ev alert.Event
		if err := json.Unmarshal(m.Data, &ev); err != nil {
			t.Errorf("alert event %q: %v", m.Data, err)
			return
		}
		box.mu.Lock()
		box.subj = append(box.subj, m.Subject)
		box.events = append(box.events, ev)
		box.mu.Unlock()
	})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = sub.Unsubscribe() })
	if err := nc.Flush(); err != nil {
		t.Fatal(err)
	}
	return box
}

func (b *natsAlerts) count(transition alert.Transition) int {
	b.mu.Lock()
	defer b.mu.Unlock()
	n := 0
	for _, ev := range b.events {
		if ev.Transition == transition {
			n++
		}
	}
	return n
}

// TestAlertsThroughRun: lockstep run on a NATS server, fed ten minutes of
// a plant whose line L3 runs 2 SD high, publishes one "raised" on
// lockstep.alerts.fill-weight naming L3, serves it on /api/v1/alerts, keeps
// it raised across a restart without raising it again, and takes an
// acknowledgement over HTTP with the token.
func TestAlertsThroughRun(t *testing.T) {
	n := startNATS(t)
	nc := connectNATS(t, n.url)
	box := subscribeAlerts(t, nc)
	now := time.Now().UTC()
	sc := plant.Scenario{
		Name: "run alert test", Seed: 5, Start: now.Add(-10 * time.Minute), Duration: 10 * time.Minute,
		Characteristics: []plant.Characteristic{{
			Name: "fill-weight", Unit: "g", Nominal: "500.00", Resolution: 2, SD: 1, Rate: 1, Arrivals: plant.Regular,
			Groups: []string{"L1", "L2", "L3", "L4"},
			Events: []plant.Event{{Kind: plant.Shift, Group: "L3", By: 2}},
		}},
	}
	gen, err := plant.New(sc)
	if err != nil {
		t.Fatal(err)
	}
	var msgs []message
	for m := range gen.All() {
		msgs = append(msgs, message{subject: m.Subject, data: string(m.Payload)})
	}
	publishJS(t, nc, msgs)

	dir := t.TempDir()
	cfg := writeConfig(t, dir, `
[http]
token = "tok"

[characteristics.fill-weight]
unit = "g"

[characteristics.fill-weight.alert]
windows = [{length = "10m", share = 1.0}]
cusums = []
spread = {off = true}
reject = {off = true}
silent_after = "0s"
`)
	args := daemonArgs(n.url, dir, "--config", cfg)
	d := startDaemon(t, args...)
	waitUntil(t, "a raised alert on NATS", func() bool { return box.count(alert.TransitionRaised) > 0 })
	var list struct {
		Alerts []alert.Alert `json:"alerts"`
	}
	if code := d.get("/api/v1/alerts", &list); code != 200 || len(list.Alerts) != 1 {
		t.Fatalf("GET /api/v1/alerts on loopback without a token: %d, %+v", code, list)
	}
	a := list.Alerts[0]
	if a.State != alert.StateRaised || a.Kind != alert.KindMeansDiverge || len(a.Groups) != 1 || a.Groups[0] != "L3" || a.Direction != 1 {
		t.Fatalf("alert %+v: want means-diverge, raised, L3 high", a)
	}
	if !(a.Shift > 1 && a.Lower > 0) || a.Unit != "g" {
		t.Errorf("shift %v [%v, %v] %s: want about +2 g", a.Shift, a.Lower, a.Upper, a.Unit)
	}
	if err := d.stop(); err != nil {
		t.Fatal(err)
	}

	// Restart: the alert is back, raised, and is not raised again.
	d = startDaemon(t, args...)
	var one alert.Alert
	if code := d.get("/api/v1/alerts/"+a.ID, &one); code != 200 || one.State != alert.StateRaised {
		t.Fatalf("after the restart: %d %+v", code, one)
	}
	evals := func() float64 { v, _ := d.metric("lockstep_evaluation_duration_seconds_count"); return v }
	waitUntil(t, "evaluations after the restart", func() bool { return evals() >= 20 })
	if code, m := do(t, "POST", d.url("/api/v1/alerts/"+a.ID+"/ack"), "", `{"by":"Ana"}`); code != 401 {
		t.Errorf("ack without the token: %d %v, want 401", code, m)
	}
	if code, m := do(t, "POST", d.url("/api/v1/alerts/"+a.ID+"/ack"), "tok", `{"by":"Ana","note":"L3 checked"}`); code != 200 || m["state"] != "acknowledged" {
		t.Fatalf("ack: %d %v", code, m)
	}
	waitUntil(t, "the acknowledgement on NATS", func() bool { return box.count(alert.TransitionAcknowledged) == 1 })
	if got := box.count(alert.TransitionRaised); got != 1 {
		t.Errorf("%d raised events on NATS across the restart, want 1", got)
	}
	box.mu.Lock()
	for i, ev := range box.events {
		if box.subj[i] != "lockstep.alerts.fill-weight" || ev.Alert.ID != a.ID {
			t.Errorf("event %d on %s for %s, want lockstep.alerts.fill-weight for %s", i, box.subj[i], ev.Alert.ID, a.ID)
		}
	}
	box.mu.Unlock()
	if v, ok := d.metric(`lockstep_alerts_open{kind="means-diverge",state="acknowledged"}`); !ok || v != 1 {
		t.Errorf("open acknowledged alerts metric %v (%v), want 1", v, ok)
	}
}
