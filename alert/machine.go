package alert

import (
	"cmp"
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"
	"sync"
	"time"
)

// Errors of Machine.Ack. Test with errors.Is; the messages say more.
var (
	// ErrNotFound: no open alert has that id.
	ErrNotFound = errors.New("alert not found")
	// ErrState: the alert is not in a state that allows the operation
	// (only a raised alert can be acknowledged).
	ErrState = errors.New("alert not in that state")
	// ErrInvalid: a required argument is missing or too long.
	ErrInvalid = errors.New("invalid argument")
)

// MachineOptions configure a Machine.
type MachineOptions struct {
	// Characteristic is the name of the characteristic the machine is for;
	// required.
	Characteristic string
	// Unit is the characteristic's unit, copied into every alert; may be
	// empty.
	Unit string
	// ClearAbsent clears a raised or acknowledged alert that the monitor
	// has not reported for this many consecutive Steps: the monitor
	// reports a raised condition at every evaluation until it clears it,
	// so a long absence means it lost the condition (a monitor whose state
	// could not be restored). 0 means never: such an alert stays until it
	// is cleared by a condition.
	ClearAbsent int
}

// Machine is the life cycle of the alerts of one characteristic. It turns
// the monitor's Conditions into alerts, one open alert per (kind, key):
//
//	condition phase   no open alert        watch            raised / acknowledged
//	watch             open as watch        update figures   update figures (stays)
//	raise             open as raised       raise            update figures (stays)
//	clear             ignored              clear            clear
//	absent            -                    clear ("did not confirm")  after ClearAbsent Steps: clear
//
// An acknowledged alert stays acknowledged while its condition lasts, and a
// raised alert restored after a restart is updated, not raised again, by a
// condition the monitor reports again. Its methods may be called from
// several goroutines.
type Machine struct {
	opt MachineOptions

	mu   sync.Mutex
	open map[openKey]*entry
	ids  map[string]*entry
}

type openKey struct {
	kind Kind
	key  string
}

type entry struct {
	a      Alert
	absent int // consecutive Steps without a condition
}

// NewMachine returns the machine of a characteristic with no open alerts.
func NewMachine(opt MachineOptions) (*Machine, error) {
	if opt.Characteristic == "" {
		return nil, fmt.Errorf("create alert machine: %w: no characteristic", ErrInvalid)
	}
	if opt.ClearAbsent < 0 {
		return nil, fmt.Errorf("create alert machine of %q: %w: clear_absent %d is negative", opt.Characteristic, ErrInvalid, opt.ClearAbsent)
	}
	return &Machine{opt: opt, open: map[openKey]*entry{}, ids: map[string]*entry{}}, nil
}

// Step applies the conditions of one evaluation at now and returns the
// events it caused, in the order of conditions and then of the alerts that
// ended without one. An open alert whose figures a condition changed gives a
// TransitionUpdated event (persist it; sinks may skip it). Conditions of
// KindNone or of an unknown phase are ignored.
func (m *Machine) Step(now time.Time, conds []Condition) []Event {
	m.mu.Lock()
	defer m.mu.Unlock()
	var out []Event
	seen := map[*entry]bool{}
	for i := range conds {
		c := &conds[i]
		if c.Kind == KindNone || c.Phase < PhaseWatch || c.Phase > PhaseClear {
			continue
		}
		k := openKey{c.Kind, c.Key}
		e := m.open[k]
		if e != nil {
			if seen[e] {
				continue // a second condition with the same kind and key
			}
			seen[e] = true
			e.absent = 0
		}
		switch {
		case e == nil && c.Phase == PhaseClear:
			// Nothing open to clear (cleared before a restart, say).
		case e == nil:
			e = m.openAlert(now, c)
			seen[e] = true
			out = append(out, m.event(e, now, transitionOf(e.a.State), StateNone))
		case c.Phase == PhaseClear:
			prev := e.a.State
			setFigures(&e.a, c)
			out = append(out, m.close(e, now, prev))
		case c.Phase == PhaseRaise && e.a.State == StateWatch:
			setFigures(&e.a, c)
			e.a.State, e.a.Raised, e.a.Updated = StateRaised, now, now
			out = append(out, m.event(e, now, TransitionRaised, StateWatch))
		default: // watch or raise of an alert that is open
			if setFigures(&e.a, c) {
				e.a.Updated = now
				out = append(out, m.event(e, now, TransitionUpdated, e.a.State))
			}
		}
	}
	var ended []*entry
	for _, e := range m.open {
		if seen[e] {
			continue
		}
		e.absent++
		if e.a.State == StateWatch || (m.opt.ClearAbsent > 0 && e.absent >= m.opt.ClearAbsent) {
			ended = append(ended, e)
		}
	}
	slices.SortFunc(ended, func(a, b *entry) int { return cmp.Compare(a.a.ID, b.a.ID) })
	for _, e := range ended {
		prev := e.a.State
		if prev == StateWatch {
			e.a.Reason = "did not confirm: " + e.a.Reason
		} else {
			e.a.Reason = fmt.Sprintf("no longer reported by the monitor for %d evaluations (last: %s)", e.absent, e.a.Reason)
		}
		out = append(out, m.close(e, now, prev))
	}
	return out
}

func transitionOf(s State) Transition {
	if s == StateRaised {
		return TransitionRaised
	}
	return TransitionWatch
}

// openAlert opens a new alert for c.
func (m *Machine) openAlert(now time.Time, c *Condition) *entry {
	a := Alert{
		ID:             AlertID(m.opt.Characteristic, c.Kind, c.Key, now),
		Characteristic: m.opt.Characteristic, Kind: c.Kind, Key: c.Key, Unit: m.opt.Unit,
		State: StateWatch, Opened: now, Updated: now,
	}
	if c.Phase == PhaseRaise {
		a.State, a.Raised = StateRaised, now
	}
	setFigures(&a, c)
	e := &entry{a: a}
	m.open[openKey{c.Kind, c.Key}] = e
	m.ids[a.ID] = e
	return e
}

// close clears e at now.
func (m *Machine) close(e *entry, now time.Time, prev State) Event {
	e.a.State, e.a.Cleared, e.a.Updated = StateCleared, now, now
	delete(m.open, openKey{e.a.Kind, e.a.Key})
	delete(m.ids, e.a.ID)
	return m.event(e, now, TransitionCleared, prev)
}

func (m *Machine) event(e *entry, now time.Time, t Transition, prev State) Event {
	return Event{ID: eventID(e.a.ID, t, now), Time: now, Transition: t, Previous: prev, Alert: e.a.clone()}
}

// setFigures copies the figures of c into a and reports whether any
// changed.
func setFigures(a *Alert, c *Condition) bool {
	old := a.clone()
	a.Groups = append(a.Groups[:0:0], c.Groups...)
	a.Direction = c.Direction
	a.Shift, a.Lower, a.Upper = c.Shift, c.Lower, c.Upper
	a.Test, a.F, a.P, a.Effect = c.Test, c.F, c.P, c.Effect
	a.Ratio, a.RejectRate = c.Ratio, c.RejectRate
	a.Detector, a.From, a.To, a.Reason = c.Detector, c.From, c.To, c.Reason
	return !sameFigures(&old, a)
}

func sameFigures(x, y *Alert) bool {
	eq := func(a, b float64) bool { return a == b || (math.IsNaN(a) && math.IsNaN(b)) } // NaN equals NaN here
	return slices.Equal(x.Groups, y.Groups) && x.Direction == y.Direction &&
		eq(x.Shift, y.Shift) && eq(x.Lower, y.Lower) && eq(x.Upper, y.Upper) &&
		x.Test == y.Test && eq(x.F, y.F) && eq(x.P, y.P) && eq(x.Effect, y.Effect) &&
		eq(x.Ratio, y.Ratio) && eq(x.RejectRate, y.RejectRate) &&
		x.Detector == y.Detector && x.From.Equal(y.From) && x.To.Equal(y.To) && x.Reason == y.Reason
}

// Limits of an acknowledgement.
const (
	maxBy   = 200
	maxNote = 2000
)

// Ack acknowledges the raised alert id at now, by whom and with a note.
// Only a raised alert can be acknowledged: an alert in watch or already
// acknowledged gives ErrState, an id that is not open here ErrNotFound, an
// empty by (or one or a note that is too long) ErrInvalid.
func (m *Machine) Ack(id, by, note string, now time.Time) (Event, error) {
	by = strings.TrimSpace(by)
	switch {
	case by == "":
		return Event{}, fmt.Errorf("acknowledge alert %s: %w: say who acknowledges it", id, ErrInvalid)
	case len(by) > maxBy:
		return Event{}, fmt.Errorf("acknowledge alert %s: %w: the name is %d bytes, more than %d", id, ErrInvalid, len(by), maxBy)
	case len(note) > maxNote:
		return Event{}, fmt.Errorf("acknowledge alert %s: %w: the note is %d bytes, more than %d", id, ErrInvalid, len(note), maxNote)
	}
	m.mu.Lock()
	defer m.mu.Unlock()
	e := m.ids[id]
	if e == nil {
		return Event{}, fmt.Errorf("acknowledge alert %s: %w among the open alerts of %q", id, ErrNotFound, m.opt.Characteristic)
	}
	if e.a.State != StateRaised {
		return Event{}, fmt.Errorf("acknowledge alert %s: %w: it is %s, and only a raised alert can be acknowledged", id, ErrState, e.a.State)
	}
	e.a.State, e.a.Acknowledged, e.a.AcknowledgedBy, e.a.Note, e.a.Updated = StateAcknowledged, now, by, note, now
	return m.event(e, now, TransitionAcknowledged, StateRaised), nil
}

// Get returns the open alert id, and false when there is none.
func (m *Machine) Get(id string) (Alert, bool) {
	m.mu.Lock()
	defer m.mu.Unlock()
	if e := m.ids[id]; e != nil {
		return e.a.clone(), true
	}
	return Alert{}, false
}

// Alerts returns the open alerts (watch, raised, acknowledged), oldest
// first.
func (m *Machine) Alerts() []Alert {
	m.mu.Lock()
	defer m.mu.Unlock()
	out := make([]Alert, 0, len(m.open))
	for _, e := range m.open {
		out = append(out, e.a.clone())
	}
	SortAlerts(out)
	return out
}

// Restore puts back the open alerts among records (the persisted records of
// this characteristic, after a restart), replacing what the machine holds.
// Closed records and records of other characteristics are skipped; of two
// open records with the same kind and key, the one opened later is kept.
// A raised or acknowledged alert stays so: the monitor reporting its
// condition again updates it.
func (m *Machine) Restore(records []Alert) {
	m.mu.Lock()
	defer m.mu.Unlock()
	m.open, m.ids = map[openKey]*entry{}, map[string]*entry{}
	for _, r := range records {
		if !r.State.Open() || r.Characteristic != m.opt.Characteristic || r.ID == "" {
			continue
		}
		k := openKey{r.Kind, r.Key}
		if old := m.open[k]; old != nil {
			if !r.Opened.After(old.a.Opened) {
				continue
			}
			delete(m.ids, old.a.ID)
		}
		e := &entry{a: r.clone()}
		m.open[k] = e
		m.ids[r.ID] = e
	}
}

// SortAlerts sorts alerts by the time they opened, then by id.
func SortAlerts(as []Alert) {
	slices.SortFunc(as, func(a, b Alert) int {
		if c := a.Opened.Compare(b.Opened); c != 0 {
			return c
		}
		return cmp.Compare(a.ID, b.ID)
	})
}
