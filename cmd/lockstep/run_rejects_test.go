package main

import (
	"encoding/json"
	"path/filepath"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats.go"

	"github.com/lockstep-project/lockstep/ingest"
	"github.com/lockstep-project/lockstep/store"
)

// TestRunRejects publishes a corpus of bad messages, one for each reject
// reason, among good ones: each is counted under its reason in /metrics and
// republished to its dead-letter subject, and none reaches the sums or the
// store.
func TestRunRejects(t *testing.T) {
	ns := startNATS(t)
	nc := connectNATS(t, ns.url)
	var mu sync.Mutex
	dead := map[string][]string{} // reason → subjects
	sub, err := nc.Subscribe("lockstep.rejects.>", func(m *nats.Msg) {
		var body struct {
			Reason  string `json:"reason"`
			Subject string `json:"subject"`
			Payload string `json:"payload"`
		}
		if err := json.Unmarshal(m.Data, &body); err != nil {
			t.Errorf("dead letter %s: %v", m.Data, err)
			return
		}
		mu.Lock()
		dead[body.Reason] = append(dead[body.Reason], m.Subject)
		mu.Unlock()
	})
	if err != nil {
		t.Fatal(err)
	}
	defer sub.Unsubscribe()

	// The template has no <group>: the group is the payload's "group", so
	// that a payload without one is no_group.
	now := time.Now().UTC()
	good := []message{
		{"meas.fill", `{"value":"500.1","group":"L1","unit":"g","id":"a1"}`},
		{"meas.fill", `{"value":"500.3","group":"L1"}`},
		{"meas.fill", `{"value":"499.9","group":"L2"}`},
		{"meas.fill", `{"value":"500.0","group":"L2"}`},
	}
	bad := []struct {
		reason ingest.Reason
		msg    message
	}{
		{ingest.ReasonNotParseable, message{"meas.fill", `{"value": "500.1", "group": `}},
		{ingest.ReasonNotANumber, message{"meas.fill", `{"value":"500,1","group":"L1"}`}},
		{ingest.ReasonNotFinite, message{"meas.fill", `{"value":NaN,"group":"L1"}`}},
		{ingest.ReasonOutOfRange, message{"meas.fill", `{"value":"5001","group":"L1"}`}},
		{ingest.ReasonWrongUnit, message{"meas.fill", `{"value":"0.5","unit":"kg","group":"L1"}`}},
		{ingest.ReasonFromFuture, message{"meas.fill", `{"value":"500.2","group":"L1","time":"` + now.Add(24*time.Hour).Format(time.RFC3339) + `"}`}},
		{ingest.ReasonTooOld, message{"meas.fill", `{"value":"500.2","group":"L1","time":"` + now.Add(-30*24*time.Hour).Format(time.RFC3339) + `"}`}},
		{ingest.ReasonUnknownCharacteristic, message{"meas.colour", `{"value":"3","group":"L1"}`}},
		{ingest.ReasonDuplicateID, message{"meas.fill", `{"value":"500.1","group":"L1","unit":"g","id":"a1"}`}},
		{ingest.ReasonNoGroup, message{"meas.fill", `{"value":"500.2"}`}},
	}
	if n := len(bad); n != countReasons() {
		t.Fatalf("the corpus has %d bad messages; ingest has %d reasons: add the new one", n, countReasons())
	}
	msgs := append([]message{}, good[:1]...)
	for i, b := range bad {
		msgs = append(msgs, b.msg)
		if i+1 < len(good) {
			msgs = append(msgs, good[i+1])
		}
	}
	publishJS(t, nc, msgs)

	dir := t.TempDir()
	cfg := writeConfig(t, dir, `
[ingest]
template = "meas.<characteristic>"
unknown = "reject"

[store]
no_sync = true

[characteristics.fill]
unit = "g"
nominal = "500.00"
min = 400
max = 600
`)
	d := startDaemon(t, daemonArgs(ns.url, dir, "--config", cfg)...)
	d.waitMetric("lockstep_cursor_sequence", float64(len(msgs)), 10*time.Second)
	rep := d.freshReport("fill", 5*time.Second)
	if rep.total() != int64(len(good)) || rep.Reference != "500" {
		t.Errorf("report counts %d values centred on %s; want %d on 500", rep.total(), rep.Reference, len(good))
	}
	for _, b := range bad {
		sample := `lockstep_rejects_total{reason="` + b.reason.String() + `"}`
		if v, ok := d.metric(sample); !ok || v != 1 {
			t.Errorf("%s = %v (present %v); want 1", sample, v, ok)
		}
	}
	if v, _ := d.metric(`lockstep_measurements_total{result="accepted"}`); v != float64(len(good)) {
		t.Errorf("accepted = %v; want %d", v, len(good))
	}
	if v, _ := d.metric(`lockstep_measurements_total{result="rejected"}`); v != float64(len(bad)) {
		t.Errorf("rejected = %v; want %d", v, len(bad))
	}
	deadline := time.Now().Add(5 * time.Second)
	for {
		mu.Lock()
		n := len(dead)
		mu.Unlock()
		if n == len(bad) || time.Now().After(deadline) {
			break
		}
		time.Sleep(10 * time.Millisecond)
	}
	mu.Lock()
	for _, b := range bad {
		subj := "lockstep.rejects.fill"
		if b.reason == ingest.ReasonUnknownCharacteristic {
			subj = "lockstep.rejects.colour"
		}
		if got := dead[b.reason.String()]; len(got) != 1 || got[0] != subj {
			t.Errorf("dead letters for %s: %v; want one on %s", b.reason, got, subj)
		}
	}
	mu.Unlock()
	if err := d.stop(); err != nil {
		t.Fatal(err)
	}

	st, err := store.OpenReadOnly(filepath.Join(dir, "lockstep.db"), store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	var texts []string
	if err := st.Raw("fill", time.Time{}, time.Time{}, func(rv store.RawValue) error { texts = append(texts, rv.Text); return nil }); err != nil {
		t.Fatal(err)
	}
	if len(texts) != len(good) {
		t.Errorf("store holds %v; want the %d good values", texts, len(good))
	}
	chars, err := st.Characteristics()
	if err != nil || len(chars) != 1 || chars[0].Name != "fill" || chars[0].Unit != "g" {
		t.Errorf("stored characteristics %+v, %v; want fill only", chars, err)
	}
}

func countReasons() int {
	n := 0
	for range ingest.Reasons() {
		n++
	}
	return n
}
