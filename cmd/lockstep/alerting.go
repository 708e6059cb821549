package main

import (
	"cmp"
	"context"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"slices"
	"sync"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/rs/zerolog"

	"github.com/lockstep-project/lockstep/alert"
	"github.com/lockstep-project/lockstep/store"
	"github.com/lockstep-project/lockstep/window"
)

// alerting is the daemon's alert runtime: per characteristic an
// alert.Monitor (conditions, confirmation, hysteresis) and an alert.Machine
// (the life cycle), the sinks the events go to, the records and monitor
// states waiting for the next commit, and the recently cleared alerts for
// the API.
//
// step runs on the daemon loop's goroutine; ack, list and get run on the
// HTTP server's. The records an evaluation or an acknowledgement produces
// are committed with the next batch (take, in takeBatch): an
// acknowledgement is durable within one evaluation interval and one commit.
// The events of an evaluation go to the sinks only once the commit holding
// their records has returned (finishCommit), so a crash cannot publish a
// transition that a restart then makes again; an acknowledgement's event
// goes out at once, as the API answers.
type alerting struct {
	log zerolog.Logger
	cfg *Config
	met *alertMetrics
	now func() time.Time

	sinkMu sync.RWMutex
	sinks  []alert.Sink // the log; NATS and the webhook once started
	hook   *alert.Webhook

	// alertHook, when set (before the daemon starts), is called with the JSON of every event (updates
	// included, which the NATS subject and the webhook do not get), on the
	// goroutine that made it: the loop's for evaluations, an HTTP
	// handler's for acknowledgements. It must return quickly and must not
	// keep the slice. The dashboard sets it for its server-sent events.
	alertHook func(eventJSON []byte)

	mu       sync.Mutex
	chars    map[string]*alertChar
	restored map[string][]alert.Alert // open records of characteristics not yet created
	recent   []alert.Alert            // cleared alerts, oldest first, at most maxRecent
	pending  map[string]store.AlertRecord
	states   map[string][]byte
	held     []alert.Event // events of the pending records, for after the commit
	retainAt time.Time
}

// alertChar is one characteristic's monitor and machine.
type alertChar struct {
	name string
	rule alert.Rule
	mon  *alert.Monitor
	mach *alert.Machine
	prev time.Time // the previous evaluation's time; persisted with the monitor state
}

// maxRecent bounds the cleared alerts kept for GET /api/v1/alerts?state=all.
const maxRecent = 500

// newAlerting returns the runtime with the log sink, registering its
// metrics in reg.
func newAlerting(cfg *Config, log zerolog.Logger, reg *prometheus.Registry) *alerting {
	a := &alerting{
		log: log, cfg: cfg, now: time.Now,
		sinks:    []alert.Sink{alert.NewLogSink(log)},
		chars:    map[string]*alertChar{},
		restored: map[string][]alert.Alert{},
		pending:  map[string]store.AlertRecord{},
		states:   map[string][]byte{},
	}
	a.met = newAlertMetrics(a)
	reg.MustRegister(a.met)
	return a
}

// startSinks adds the NATS sink (pub may be nil: none) and, when a URL is
// configured, the webhook.
func (a *alerting) startSinks(pub alert.Publisher) error {
	a.sinkMu.Lock()
	defer a.sinkMu.Unlock()
	if pub != nil {
		a.sinks = append(a.sinks, alert.NewNATSSink(pub, a.cfg.Alerts.SubjectPrefix, a.log))
	}
	if a.cfg.Alerts.Webhook.URL != "" {
		opt := a.cfg.Alerts.Webhook.options()
		opt.Log = a.log.With().Str("sink", "webhook").Logger()
		w, err := alert.NewWebhook(opt)
		if err != nil {
			return fmt.Errorf("start alert sinks: %w", err)
		}
		a.hook = w
		a.sinks = append(a.sinks, w)
	}
	return nil
}

// close delivers what the webhook still holds, until ctx ends.
func (a *alerting) close(ctx context.Context) error {
	w := a.webhook()
	if w == nil {
		return nil
	}
	return w.Close(ctx)
}

// webhook returns the webhook sink, or nil.
func (a *alerting) webhook() *alert.Webhook {
	a.sinkMu.RLock()
	defer a.sinkMu.RUnlock()
	return a.hook
}

// alertStore is what alerting reads of the store at start.
type alertStore interface {
	Alerts(fn func(store.AlertRecord) error) error
	MonitorState(char string) ([]byte, error)
}

// restore reads the persisted alert records: the open ones go back into
// their machines when their characteristic is created, the cleared ones
// into the recent list. A record that does not decode is logged and
// skipped.
func (a *alerting) restore(st alertStore) error {
	a.mu.Lock()
	defer a.mu.Unlock()
	var cleared []alert.Alert
	n := 0
	err := st.Alerts(func(r store.AlertRecord) error {
		al, err := alert.DecodeRecord(r.Data)
		if err != nil {
			a.log.Warn().Err(err).Str("alert", r.ID).Msg("stored alert record skipped")
			return nil
		}
		n++
		if al.State.Open() {
			a.restored[al.Characteristic] = append(a.restored[al.Characteristic], al)
		} else {
			cleared = append(cleared, al)
		}
		return nil
	})
	if err != nil {
		return fmt.Errorf("restore alerts: %w", err)
	}
	slices.SortFunc(cleared, func(x, y alert.Alert) int { return x.Cleared.Compare(y.Cleared) })
	if len(cleared) > maxRecent {
		cleared = cleared[len(cleared)-maxRecent:]
	}
	a.recent = cleared
	a.log.Info().Int("alerts", n).Int("cleared", len(cleared)).Msg("alerts restored")
	return nil
}

// char returns the runtime of characteristic name, creating it on first use
// with its rule, its restored open alerts and its stored monitor state. A
// monitor state that does not restore is logged: the monitor starts afresh,
// the open alerts stay, and a condition it reports again updates them.
func (a *alerting) char(name, unit string, st alertStore) (*alertChar, error) {
	a.mu.Lock()
	c := a.chars[name]
	a.mu.Unlock()
	if c != nil {
		return c, nil
	}
	rule, err := a.cfg.alertRule(name)
	if err != nil {
		return nil, err
	}
	mon, err := alert.NewMonitor(rule)
	if err != nil {
		return nil, fmt.Errorf("create alert monitor of %q: %w", name, err)
	}
	mach, err := alert.NewMachine(alert.MachineOptions{Characteristic: name, Unit: unit, ClearAbsent: a.cfg.Alerts.clearAbsent()})
	if err != nil {
		return nil, err
	}
	c = &alertChar{name: name, rule: rule, mon: mon, mach: mach}
	if st != nil {
		b, err := st.MonitorState(name)
		if err == nil && b != nil {
			c.prev, err = restoreMonitor(mon, b)
		}
		if err != nil {
			a.log.Warn().Err(err).Str("characteristic", name).Msg("alert monitor state not restored; the monitor starts afresh and open alerts stay")
		}
	}
	// The maps change only on the loop's goroutine, under the lock, as the
	// API reads them on its own.
	a.mu.Lock()
	mach.Restore(a.restored[name])
	delete(a.restored, name)
	a.chars[name] = c
	a.mu.Unlock()
	return c, nil
}

// The monitor state envelope stored for each characteristic: a version
// byte (1), the previous evaluation's time (int64 big-endian Unix
// nanoseconds, 0 for none), then alert.Monitor's own State.
const monitorEnvelopeVersion = 1

func monitorEnvelope(prev time.Time, state []byte) []byte {
	var ns int64
	if !prev.IsZero() {
		ns = prev.UnixNano()
	}
	b := make([]byte, 0, 9+len(state))
	b = append(b, monitorEnvelopeVersion)
	b = binary.BigEndian.AppendUint64(b, uint64(ns))
	return append(b, state...)
}

// restoreMonitor reads an envelope into mon and returns the previous
// evaluation's time.
func restoreMonitor(mon *alert.Monitor, b []byte) (time.Time, error) {
	if len(b) < 9 || b[0] != monitorEnvelopeVersion {
		return time.Time{}, fmt.Errorf("restore monitor state: %d bytes of an unknown layout", len(b))
	}
	var prev time.Time
	if ns := int64(binary.BigEndian.Uint64(b[1:9])); ns != 0 {
		prev = time.Unix(0, ns).UTC()
	}
	if err := mon.Restore(b[9:]); err != nil {
		return time.Time{}, fmt.Errorf("restore monitor state: %w", err)
	}
	return prev, nil
}

// step runs one evaluation of a characteristic through its monitor and
// machine: the events, their records and the monitor's state go into the
// next commit, and the events to the sinks and the hook after it.
func (a *alerting) step(c *alertChar, in alert.Input) {
	conds := c.mon.Step(in)
	evs := c.mach.Step(in.Time, conds)
	c.prev = in.Time
	state, err := c.mon.State()
	a.mu.Lock()
	if err != nil {
		a.log.Error().Err(err).Str("characteristic", c.name).Msg("alert monitor state not encoded; it is not persisted")
	} else {
		a.states[c.name] = monitorEnvelope(c.prev, state)
	}
	a.recordLocked(evs)
	a.held = append(a.held, evs...)
	a.mu.Unlock()
}

// recordLocked puts the records of evs into the next commit and the
// cleared ones into the recent list. a.mu is held.
func (a *alerting) recordLocked(evs []alert.Event) {
	for i := range evs {
		al := &evs[i].Alert
		a.pending[al.ID] = store.AlertRecord{ID: al.ID, Closed: al.Cleared, Data: alert.EncodeRecord(nil, al)}
		if al.State == alert.StateCleared {
			a.recent = append(a.recent, *al)
			if len(a.recent) > maxRecent {
				a.recent = slices.Delete(a.recent, 0, len(a.recent)-maxRecent)
			}
		}
	}
}

// dispatch sends evs to the sinks (not the updates) and to the hook, and
// counts them.
func (a *alerting) dispatch(evs []alert.Event) {
	a.sinkMu.RLock()
	sinks := a.sinks
	a.sinkMu.RUnlock()
	for _, ev := range evs {
		a.met.count(ev)
		if ev.Transition != alert.TransitionUpdated {
			for _, s := range sinks {
				s.Send(ev)
			}
		}
		if a.alertHook != nil {
			b, err := json.Marshal(ev)
			if err == nil {
				a.alertHook(b)
			}
		}
	}
}

// pendingWrites reports whether records or monitor states wait for a
// commit.
func (a *alerting) pendingWrites() bool {
	a.mu.Lock()
	defer a.mu.Unlock()
	return len(a.pending) > 0 || len(a.states) > 0
}

// take hands the waiting records and monitor states to a commit, in a
// stable order, with the events to dispatch once it has committed.
func (a *alerting) take() ([]store.AlertRecord, []store.MonitorState, []alert.Event) {
	a.mu.Lock()
	defer a.mu.Unlock()
	if len(a.pending) == 0 && len(a.states) == 0 {
		return nil, nil, nil
	}
	recs := make([]store.AlertRecord, 0, len(a.pending))
	for _, r := range a.pending {
		recs = append(recs, r)
	}
	slices.SortFunc(recs, func(x, y store.AlertRecord) int { return cmp.Compare(x.ID, y.ID) })
	states := make([]store.MonitorState, 0, len(a.states))
	for name, b := range a.states {
		states = append(states, store.MonitorState{Characteristic: name, State: b})
	}
	slices.SortFunc(states, func(x, y store.MonitorState) int { return cmp.Compare(x.Characteristic, y.Characteristic) })
	clear(a.pending)
	clear(a.states)
	evs := a.held
	a.held = nil
	return recs, states, evs
}

// errNoAlert and errAlertState are what the API maps to 404 and 409;
// alert.ErrInvalid maps to 400.
var (
	errNoAlert    = alert.ErrNotFound
	errAlertState = alert.ErrState
)

// ack acknowledges the raised alert id.
func (a *alerting) ack(id, by, note string) (alert.Alert, error) {
	a.mu.Lock()
	var m *alert.Machine
	for _, c := range a.chars {
		if _, ok := c.mach.Get(id); ok {
			m = c.mach
			break
		}
	}
	a.mu.Unlock()
	if m == nil {
		if _, ok := a.get(id); ok {
			return alert.Alert{}, fmt.Errorf("acknowledge alert %s: %w: it is cleared", id, errAlertState)
		}
		return alert.Alert{}, fmt.Errorf("acknowledge alert %s: %w: no open or recently cleared alert has this id", id, errNoAlert)
	}
	ev, err := m.Ack(id, by, note, a.now())
	if err != nil {
		return alert.Alert{}, err
	}
	a.mu.Lock()
	a.recordLocked([]alert.Event{ev})
	a.mu.Unlock()
	a.dispatch([]alert.Event{ev})
	return ev.Alert, nil
}

// list returns the open alerts, and with all the recently cleared ones
// too, oldest first.
func (a *alerting) list(all bool) []alert.Alert {
	a.mu.Lock()
	defer a.mu.Unlock()
	var out []alert.Alert
	for _, c := range a.chars {
		out = append(out, c.mach.Alerts()...)
	}
	for _, rs := range a.restored {
		out = append(out, rs...)
	}
	if all {
		out = append(out, a.recent...)
	}
	alert.SortAlerts(out)
	return out
}

// get returns the open or recently cleared alert id.
func (a *alerting) get(id string) (alert.Alert, bool) {
	for _, al := range a.list(true) {
		if al.ID == id {
			return al, true
		}
	}
	return alert.Alert{}, false
}

// alertRetainInterval is how often cleared alerts past [alerts] retain are
// deleted.
const alertRetainInterval = time.Hour

// alertRetainer deletes old cleared alert records.
type alertRetainer interface {
	RetainAlerts(before time.Time) (int, error)
}

// retainDue deletes the cleared alerts past their retention, once an hour.
func (a *alerting) retainDue(st alertRetainer, now time.Time) {
	keep := a.cfg.Alerts.Retain.D
	if keep <= 0 || now.Before(a.retainAt) {
		return
	}
	a.retainAt = now.Add(alertRetainInterval)
	n, err := st.RetainAlerts(now.Add(-keep))
	if err != nil {
		a.log.Error().Err(err).Msg("alert retention failed; retrying in an hour")
		return
	}
	if n > 0 {
		a.log.Info().Int("removed", n).Msg("cleared alerts past their retention removed")
	}
}

// openCounts returns the open alerts by kind and state, for the metrics.
func (a *alerting) openCounts() map[[2]string]int {
	out := map[[2]string]int{}
	for _, al := range a.list(false) {
		out[[2]string{al.Kind.String(), al.State.String()}]++
	}
	return out
}

// evaluateAlerts runs the evaluation ev of c at now through its alert
// monitor and machine, and marks the batch in hand for the records and
// the monitor state they leave.
func (d *daemon) evaluateAlerts(c *liveChar, ev window.Evaluation, now time.Time) {
	ac, err := d.alerts.char(c.name, c.unit, d.st)
	if err != nil { // the config was validated: this is a bug, said once per evaluation
		d.log.Error().Err(err).Str("characteristic", c.name).Msg("no alert monitor")
		return
	}
	in := buildAlertInput(c.win, ev, now, ac.rule, ac.prev, c.accepted, c.rejected, c.unit, c.ref)
	c.accepted, c.rejected = 0, 0
	d.alerts.step(ac, in)
	d.alerts.retainDue(d.st, now)
	if d.alerts.pendingWrites() {
		d.pend.alerts = true
		if d.pend.since.IsZero() {
			d.pend.since = now
		}
	}
}
