package alert

import (
	"bytes"
	"encoding/json"
	"errors"
	"strings"
	"testing"

	"github.com/rs/zerolog"
)

type recordPub struct {
	subjects []string
	bodies   [][]byte
	err      error
}

func (p *recordPub) Publish(subject string, data []byte) error {
	p.subjects = append(p.subjects, subject)
	p.bodies = append(p.bodies, data)
	return p.err
}

func TestNATSSink(t *testing.T) {
	pub := &recordPub{}
	var logBuf bytes.Buffer
	s := NewNATSSink(pub, "plant", zerolog.New(&logBuf))
	ev := raisedEvents(t, 1)[0]
	s.Send(ev)
	if len(pub.subjects) != 1 || pub.subjects[0] != "plant.alerts.fill-weight" {
		t.Fatalf("subjects %v", pub.subjects)
	}
	var back Event
	if err := json.Unmarshal(pub.bodies[0], &back); err != nil || back.ID != ev.ID || back.Transition != TransitionRaised {
		t.Fatalf("body %s: %v", pub.bodies[0], err)
	}
	pub.err = errors.New("connection closed")
	s.Send(ev)
	if !strings.Contains(logBuf.String(), "not published") {
		t.Errorf("a failed publish is not logged: %q", logBuf.String())
	}
	if got := Subject("lockstep", "seal temp.zone>1"); got != "lockstep.alerts.seal_temp_zone_1" {
		t.Errorf("subject %q", got)
	}
}

func TestLogSink(t *testing.T) {
	var buf bytes.Buffer
	s := NewLogSink(zerolog.New(&buf).Level(zerolog.InfoLevel))
	m := newTestMachine(t, 0)
	for _, ev := range m.Step(at(1), []Condition{cond(KindMeansDiverge, PhaseRaise, "", 0.5)}) {
		s.Send(ev)
	}
	for _, ev := range m.Step(at(2), []Condition{cond(KindMeansDiverge, PhaseRaise, "", 0.6)}) {
		s.Send(ev) // an update: debug, not written at info
	}
	lines := strings.Split(strings.TrimSpace(buf.String()), "\n")
	if len(lines) != 1 {
		t.Fatalf("%d lines, want 1: %q", len(lines), buf.String())
	}
	var rec map[string]any
	if err := json.Unmarshal([]byte(lines[0]), &rec); err != nil {
		t.Fatal(err)
	}
	if rec["level"] != "warn" || rec["transition"] != "raised" || rec["characteristic"] != "fill-weight" ||
		rec["kind"] != "means-diverge" || rec["shift"] != 0.5 || rec["unit"] != "g" || rec["message"] != "alert raised" {
		t.Errorf("log line %s", lines[0])
	}
}
