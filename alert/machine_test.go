package alert

import (
	"errors"
	"strings"
	"testing"
	"time"
)

var t0 = time.Date(2026, 12, 1, 6, 0, 0, 0, time.UTC)

// at is the time of evaluation i, a minute apart.
func at(i int) time.Time { return t0.Add(time.Duration(i) * time.Minute) }

func cond(k Kind, p Phase, key string, shift float64) Condition {
	return Condition{Kind: k, Phase: p, Key: key, Detector: "F 5m", Groups: []string{"L3"}, Direction: 1,
		Shift: shift, Lower: shift - 0.1, Upper: shift + 0.1, Test: "F", F: 12, P: 1e-6, Effect: 0.2,
		From: at(0), To: at(5), Reason: "L3 is high"}
}

func newTestMachine(t *testing.T, clearAbsent int) *Machine {
	t.Helper()
	m, err := NewMachine(MachineOptions{Characteristic: "fill-weight", Unit: "g", ClearAbsent: clearAbsent})
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// step is one evaluation of a table test: the conditions the monitor
// reports (or an acknowledgement, or a restart), and the transitions and
// the state of the one alert after it.
type step struct {
	conds   []Condition
	ack     bool   // acknowledge the open alert instead of stepping
	ackErr  error  // the error the acknowledgement must give
	restart bool   // persist the records, make a fresh machine, restore
	want    string // transitions, "previous>transition" joined by " "
	state   State  // state of the open alert after it; StateNone: none open
}

func TestMachineTransitions(t *testing.T) {
	w := func(s float64) []Condition { return []Condition{cond(KindMeansDiverge, PhaseWatch, "", s)} }
	r := func(s float64) []Condition { return []Condition{cond(KindMeansDiverge, PhaseRaise, "", s)} }
	c := []Condition{cond(KindMeansDiverge, PhaseClear, "", 0.01)}
	tests := []struct {
		name  string
		steps []step
	}{
		{"watch then raise", []step{
			{conds: w(0.5), want: ">watch", state: StateWatch},
			{conds: r(0.5), want: "watch>raised", state: StateRaised},
		}},
		{"watch that does not confirm clears", []step{
			{conds: w(0.5), want: ">watch", state: StateWatch},
			{conds: nil, want: "watch>cleared", state: StateNone},
		}},
		{"watch cleared by the monitor", []step{
			{conds: w(0.5), want: ">watch", state: StateWatch},
			{conds: c, want: "watch>cleared", state: StateNone},
		}},
		{"raise at once (confirm 1)", []step{
			{conds: r(0.5), want: ">raised", state: StateRaised},
		}},
		{"figures update while raised", []step{
			{conds: r(0.5), want: ">raised", state: StateRaised},
			{conds: r(0.5), want: "", state: StateRaised},
			{conds: r(0.7), want: "raised>updated", state: StateRaised},
			{conds: w(0.6), want: "raised>updated", state: StateRaised},
		}},
		{"figures update while watched", []step{
			{conds: w(0.5), want: ">watch", state: StateWatch},
			{conds: w(0.6), want: "watch>updated", state: StateWatch},
		}},
		{"raised, acknowledged, cleared", []step{
			{conds: r(0.5), want: ">raised", state: StateRaised},
			{ack: true, want: "raised>acknowledged", state: StateAcknowledged},
			{conds: r(0.5), want: "", state: StateAcknowledged},
			{conds: r(0.8), want: "acknowledged>updated", state: StateAcknowledged},
			{conds: c, want: "acknowledged>cleared", state: StateNone},
		}},
		{"raised, cleared", []step{
			{conds: r(0.5), want: ">raised", state: StateRaised},
			{conds: c, want: "raised>cleared", state: StateNone},
		}},
		{"clear of nothing is ignored", []step{
			{conds: c, want: "", state: StateNone},
		}},
		{"acknowledge a watch: refused", []step{
			{conds: w(0.5), want: ">watch", state: StateWatch},
			{ack: true, ackErr: ErrState, state: StateWatch},
		}},
		{"acknowledge twice: refused", []step{
			{conds: r(0.5), want: ">raised", state: StateRaised},
			{ack: true, want: "raised>acknowledged", state: StateAcknowledged},
			{ack: true, ackErr: ErrState, state: StateAcknowledged},
		}},
		{"after a clear, a new alert", []step{
			{conds: r(0.5), want: ">raised", state: StateRaised},
			{conds: c, want: "raised>cleared", state: StateNone},
			{conds: r(0.5), want: ">raised", state: StateRaised},
		}},
		{"restart in watch, confirmed after", []step{
			{conds: w(0.5), want: ">watch", state: StateWatch},
			{restart: true, state: StateWatch},
			{conds: r(0.5), want: "watch>raised", state: StateRaised},
		}},
		{"restart in watch, not confirmed after", []step{
			{conds: w(0.5), want: ">watch", state: StateWatch},
			{restart: true, state: StateWatch},
			{conds: nil, want: "watch>cleared", state: StateNone},
		}},
		{"restart raised, reported raised again: not raised again", []step{
			{conds: r(0.5), want: ">raised", state: StateRaised},
			{restart: true, state: StateRaised},
			{conds: r(0.5), want: "", state: StateRaised},
		}},
		{"restart raised, fresh monitor reports watch: stays raised", []step{
			{conds: r(0.5), want: ">raised", state: StateRaised},
			{restart: true, state: StateRaised},
			{conds: w(0.5), want: "", state: StateRaised},
			{conds: r(0.5), want: "", state: StateRaised},
		}},
		{"restart raised, then cleared", []step{
			{conds: r(0.5), want: ">raised", state: StateRaised},
			{restart: true, state: StateRaised},
			{conds: c, want: "raised>cleared", state: StateNone},
		}},
		{"restart raised, then acknowledged", []step{
			{conds: r(0.5), want: ">raised", state: StateRaised},
			{restart: true, state: StateRaised},
			{ack: true, want: "raised>acknowledged", state: StateAcknowledged},
		}},
		{"restart acknowledged: stays acknowledged", []step{
			{conds: r(0.5), want: ">raised", state: StateRaised},
			{ack: true, want: "raised>acknowledged", state: StateAcknowledged},
			{restart: true, state: StateAcknowledged},
			{conds: r(0.5), want: "", state: StateAcknowledged},
			{conds: c, want: "acknowledged>cleared", state: StateNone},
		}},
		{"restart cleared: nothing open, a new condition opens a new alert", []step{
			{conds: r(0.5), want: ">raised", state: StateRaised},
			{conds: c, want: "raised>cleared", state: StateNone},
			{restart: true, state: StateNone},
			{conds: c, want: "", state: StateNone},
			{conds: r(0.5), want: ">raised", state: StateRaised},
		}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			m := newTestMachine(t, 0)
			records := map[string]Alert{} // what the store would hold
			for i, s := range tt.steps {
				now := at(i + 1)
				var evs []Event
				switch {
				case s.restart:
					var recs []Alert
					for _, a := range records {
						// Through the codec, as the daemon persists them.
						b := EncodeRecord(nil, &a)
						got, err := DecodeRecord(b)
						if err != nil {
							t.Fatalf("step %d: decode record: %v", i, err)
						}
						recs = append(recs, got)
					}
					m = newTestMachine(t, 0)
					m.Restore(recs)
				case s.ack:
					open := m.Alerts()
					if len(open) != 1 {
						t.Fatalf("step %d: %d open alerts to acknowledge, want 1", i, len(open))
					}
					ev, err := m.Ack(open[0].ID, "Ana", "checked the scale", now)
					if !errors.Is(err, s.ackErr) {
						t.Fatalf("step %d: Ack error %v, want %v", i, err, s.ackErr)
					}
					if err == nil {
						evs = []Event{ev}
					}
				default:
					evs = m.Step(now, s.conds)
				}
				var got []string
				for _, e := range evs {
					got = append(got, e.Previous.String()+">"+e.Transition.String())
					records[e.Alert.ID] = e.Alert
					if e.Time != now || !e.Alert.Updated.Equal(now) {
						t.Errorf("step %d: event time %v, alert updated %v, want %v", i, e.Time, e.Alert.Updated, now)
					}
					if e.Alert.Characteristic != "fill-weight" || e.Alert.Unit != "g" || e.Alert.Kind != KindMeansDiverge {
						t.Errorf("step %d: alert %+v lacks its characteristic, unit or kind", i, e.Alert)
					}
					if e.ID == "" || e.Alert.ID == "" {
						t.Errorf("step %d: empty id", i)
					}
				}
				if g := strings.Join(got, " "); g != s.want {
					t.Errorf("step %d: transitions %q, want %q", i, g, s.want)
				}
				open := m.Alerts()
				switch {
				case s.state == StateNone && len(open) != 0:
					t.Errorf("step %d: open alerts %v, want none", i, open)
				case s.state != StateNone && (len(open) != 1 || open[0].State != s.state):
					t.Errorf("step %d: open alerts %+v, want one %s", i, open, s.state)
				}
			}
		})
	}
}

func TestMachineRecordsFiguresAndTimes(t *testing.T) {
	m := newTestMachine(t, 0)
	m.Step(at(1), []Condition{cond(KindMeansDiverge, PhaseWatch, "", 0.5)})
	m.Step(at(2), []Condition{cond(KindMeansDiverge, PhaseRaise, "", 0.6)})
	ack, err := m.Ack(m.Alerts()[0].ID, " Ana ", "line 3 scale recalibrated", at(3))
	if err != nil {
		t.Fatal(err)
	}
	evs := m.Step(at(4), []Condition{cond(KindMeansDiverge, PhaseClear, "", 0.02)})
	if len(evs) != 1 {
		t.Fatalf("%d events, want 1", len(evs))
	}
	a := evs[0].Alert
	if a.Opened != at(1) || a.Raised != at(2) || a.Acknowledged != at(3) || a.Cleared != at(4) || a.Updated != at(4) {
		t.Errorf("times opened %v raised %v acknowledged %v cleared %v updated %v", a.Opened, a.Raised, a.Acknowledged, a.Cleared, a.Updated)
	}
	if a.AcknowledgedBy != "Ana" || a.Note != "line 3 scale recalibrated" || ack.Alert.AcknowledgedBy != "Ana" {
		t.Errorf("acknowledged by %q note %q", a.AcknowledgedBy, a.Note)
	}
	if a.Shift != 0.02 || a.Groups[0] != "L3" || a.Direction != 1 || a.Detector != "F 5m" || a.To != at(5) {
		t.Errorf("figures not the last condition's: %+v", a)
	}
	if a.ID != AlertID("fill-weight", KindMeansDiverge, "", at(1)) {
		t.Errorf("id %s is not derived from characteristic, kind, key and opening time", a.ID)
	}
}

func TestMachineDedupAndKeys(t *testing.T) {
	m := newTestMachine(t, 0)
	s1 := cond(KindGroupSilent, PhaseRaise, "L1", 0)
	s2 := cond(KindGroupSilent, PhaseRaise, "L2", 0)
	mean := cond(KindMeansDiverge, PhaseRaise, "", 0.5)
	evs := m.Step(at(1), []Condition{s1, s2, mean, s1})
	if len(evs) != 3 {
		t.Fatalf("%d events for three distinct conditions (one repeated), want 3", len(evs))
	}
	ids := map[string]bool{}
	for _, e := range evs {
		ids[e.Alert.ID] = true
	}
	if len(ids) != 3 {
		t.Errorf("ids not distinct: %v", ids)
	}
	if evs := m.Step(at(2), []Condition{s1, s2, mean}); len(evs) != 0 {
		t.Errorf("the same conditions again gave %d events, want none", len(evs))
	}
	if n := len(m.Alerts()); n != 3 {
		t.Errorf("%d open alerts, want 3", n)
	}
	// Only the silent L2 clears.
	c := s2
	c.Phase = PhaseClear
	evs = m.Step(at(3), []Condition{s1, c, mean})
	if len(evs) != 1 || evs[0].Alert.Key != "L2" || evs[0].Transition != TransitionCleared {
		t.Errorf("events %+v, want L2 cleared", evs)
	}
}

func TestMachineClearAbsent(t *testing.T) {
	m := newTestMachine(t, 3)
	m.Step(at(1), []Condition{cond(KindSpreadDiverge, PhaseRaise, "", 0)})
	for i := 2; i <= 3; i++ {
		if evs := m.Step(at(i), nil); len(evs) != 0 {
			t.Fatalf("evaluation %d: %d events before ClearAbsent was reached", i, len(evs))
		}
	}
	evs := m.Step(at(4), nil)
	if len(evs) != 1 || evs[0].Transition != TransitionCleared || !strings.Contains(evs[0].Alert.Reason, "no longer reported") {
		t.Fatalf("events %+v, want one cleared as no longer reported", evs)
	}
	// ClearAbsent 0: a raised alert stays.
	m = newTestMachine(t, 0)
	m.Step(at(1), []Condition{cond(KindSpreadDiverge, PhaseRaise, "", 0)})
	for i := 2; i < 100; i++ {
		if evs := m.Step(at(i), nil); len(evs) != 0 {
			t.Fatalf("evaluation %d: %d events with ClearAbsent 0", i, len(evs))
		}
	}
}

func TestMachineAckErrors(t *testing.T) {
	m := newTestMachine(t, 0)
	m.Step(at(1), []Condition{cond(KindMeansDiverge, PhaseRaise, "", 0.5)})
	id := m.Alerts()[0].ID
	for _, tt := range []struct {
		id, by, note string
		want         error
	}{
		{"nope", "Ana", "", ErrNotFound},
		{id, "", "x", ErrInvalid},
		{id, "  ", "x", ErrInvalid},
		{id, strings.Repeat("a", 201), "", ErrInvalid},
		{id, "Ana", strings.Repeat("n", 2001), ErrInvalid},
	} {
		if _, err := m.Ack(tt.id, tt.by, tt.note, at(2)); !errors.Is(err, tt.want) {
			t.Errorf("Ack(%q, %q): %v, want %v", tt.id, tt.by, err, tt.want)
		}
	}
	if _, err := NewMachine(MachineOptions{}); !errors.Is(err, ErrInvalid) {
		t.Errorf("NewMachine without characteristic: %v", err)
	}
}

func TestMachineRestoreKeepsNewest(t *testing.T) {
	old := Alert{ID: "a", Characteristic: "fill-weight", Kind: KindMeansDiverge, State: StateRaised, Opened: at(1)}
	newer := Alert{ID: "b", Characteristic: "fill-weight", Kind: KindMeansDiverge, State: StateAcknowledged, Opened: at(2)}
	closed := Alert{ID: "c", Characteristic: "fill-weight", Kind: KindSpreadDiverge, State: StateCleared, Opened: at(1)}
	other := Alert{ID: "d", Characteristic: "seal-temp", Kind: KindSpreadDiverge, State: StateRaised, Opened: at(1)}
	m := newTestMachine(t, 0)
	m.Restore([]Alert{newer, old, closed, other})
	got := m.Alerts()
	if len(got) != 1 || got[0].ID != "b" {
		t.Fatalf("restored %+v, want only b", got)
	}
	if _, ok := m.Get("a"); ok {
		t.Error("the older duplicate is still reachable by id")
	}
}

func TestAlertIDStable(t *testing.T) {
	a := AlertID("fill-weight", KindMeansDiverge, "", at(1))
	if a != AlertID("fill-weight", KindMeansDiverge, "", at(1)) || len(a) != 32 {
		t.Errorf("id %q not stable or not 32 hex digits", a)
	}
	for _, b := range []string{
		AlertID("fill-weigh", KindMeansDiverge, "t", at(1)),
		AlertID("fill-weight", KindSpreadDiverge, "", at(1)),
		AlertID("fill-weight", KindMeansDiverge, "", at(2)),
	} {
		if a == b {
			t.Errorf("different alerts share the id %s", a)
		}
	}
}
