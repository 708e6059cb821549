package main

import (
	"context"
	"errors"
	"fmt"
	"sync/atomic"
	"time"

	"github.com/rs/zerolog"

	"github.com/lockstep-project/lockstep/ingest"
	"github.com/lockstep-project/lockstep/stats"
	"github.com/lockstep-project/lockstep/store"
	"github.com/lockstep-project/lockstep/window"
)

// daemon is the apply loop of lockstep run. One goroutine owns it (and its
// windows): it fetches a batch of messages, skips those at or below the
// applied stream sequence, decodes and validates the rest, republishes the
// rejects, adds the accepted values to their windows and keeps them as raw
// values, commits by size and by time (the new characteristics, the full
// state of every bucket the batch touched, the raw values and the cursor, in
// one transaction, written while the loop goes on: see commit.go),
// acknowledges only after the commit, and evaluates each characteristic's
// window on its interval.
type daemon struct {
	log  zerolog.Logger
	cfg  *Config
	st   stateStore
	src  ingest.Source
	val  *ingest.Validator
	dead deadLetterSink // nil: rejects are only counted
	met  *metrics
	book *reportBook
	now  func() time.Time

	consumer     string // the store's cursor key: the durable consumer
	stampStored  bool   // times default to the JetStream stored time
	rejectPrefix string
	commitValues int
	commitEvery  time.Duration

	chars    map[string]*liveChar
	order    []*liveChar // in order of creation
	cursor   uint64      // highest stream sequence applied, committed or pending
	nextEval time.Time   // earliest next evaluation of any characteristic
	retainAt time.Time

	dropped    uint64    // source drops seen so far
	lastDropAt time.Time // when the last were seen

	dec  ingest.Decoder
	meas ingest.Measurement
	subj []byte
	pend pendingBatch

	inflight *commitJob      // the batch being committed, or nil
	spare    *commitJob      // a finished job, whose slices the next reuses
	done     chan *commitJob // where the committing goroutine returns it

	ready atomic.Bool
}

// newDaemon returns the loop for cfg on st, with its metrics and report
// book; the caller sets val, src and dead, then calls restore and run.
func newDaemon(cfg *Config, st stateStore, log zerolog.Logger) *daemon {
	d := &daemon{
		log: log, cfg: cfg, st: st, met: newMetrics(), book: newReportBook(), now: time.Now,
		stampStored:  cfg.Ingest.Time == "stored",
		rejectPrefix: cfg.NATS.RejectPrefix,
		commitValues: cfg.Store.CommitValues,
		commitEvery:  cfg.Store.CommitInterval.D,
		chars:        make(map[string]*liveChar),
		pend:         pendingBatch{touched: make(map[touchKey]struct{})},
		done:         make(chan *commitJob, 1),
	}
	if cfg.NATS.Source == "jetstream" {
		d.consumer = cfg.NATS.Consumer
	}
	return d
}

// stateStore is what the daemon needs of *store.Store (a seam for tests).
type stateStore interface {
	Commit(b *store.Batch) error
	Cursor(consumer string) (uint64, error)
	Characteristics() ([]store.Characteristic, error)
	Buckets(char string, from, to time.Time, fn func(store.BucketState) error) error
	Raw(char string, from, to time.Time, fn func(store.RawValue) error) error
	Retain(char string, rawBefore, bucketsBefore time.Time) (int, error)
	Path() string
}

var _ stateStore = (*store.Store)(nil)

// deadLetterSink takes the rejects to republish (ingest.DeadLetters).
type deadLetterSink interface {
	Publish(subject string, body []byte) bool
}

// liveChar is one characteristic's live state.
type liveChar struct {
	name     string
	set      charSettings
	unit     string // the configured unit, or the first value's own
	win      *window.Window
	ref      stats.Reference
	hash     uint64 // set.stateHash()
	stored   bool   // its record is in the store or in the pending batch
	nextEval time.Time
	inexact  int64
	dropAt   time.Time // when the source last dropped messages
	dropped  uint64    // messages dropped since the daemon started
}

// pendingBatch is what the next commit writes.
type pendingBatch struct {
	chars   []store.Characteristic
	raw     []store.RawValue
	touched map[touchKey]struct{}
	items   int       // values and rejects
	since   time.Time // when the batch got its first message
	seq     uint64    // stream sequence of the last message applied; 0 for none
	ack     uint64    // highest sequence to acknowledge after the commit
}

// touchKey is a bucket of a group that a batch added values to.
type touchKey struct {
	c     *liveChar
	start int64 // Unix nanoseconds
	group int
}

func (p *pendingBatch) empty() bool {
	return len(p.chars) == 0 && len(p.raw) == 0 && len(p.touched) == 0 && p.seq == 0 && p.ack == 0 && p.items == 0
}

// maxIdle bounds a fetch's wait, so that the loop looks at the clock now
// and then on a silent stream.
const maxIdle = time.Second

// run is the loop. It returns when ctx ends, after committing and
// acknowledging the batches in flight and in hand, or with the error that
// stops it (a failed commit, or a source that can deliver nothing more).
func (d *daemon) run(ctx context.Context) error {
	for {
		if err := d.pollCommit(); err != nil {
			return err
		}
		now := d.now()
		d.evaluateDue(now)
		if err := d.retainDue(now); err != nil {
			d.log.Error().Err(err).Msg("retention failed; retrying in an hour")
		}
		msgs, err := d.src.Fetch(ctx, d.commitValues, d.wait(d.now()))
		d.ready.Store(true)
		for i := range msgs {
			d.apply(&msgs[i])
		}
		d.checkDrops()
		switch {
		case err == nil:
		case ctx.Err() != nil:
			if cerr := d.flush(); cerr != nil {
				return cerr
			}
			d.log.Info().Uint64("cursor", d.cursor).Msg("stopped fetching; the batch in flight is committed")
			return nil
		case errors.Is(err, ingest.ErrSourceClosed):
			return errors.Join(fmt.Errorf("fetch measurements: %w", err), d.flush())
		default:
			d.log.Warn().Err(err).Msg("fetch failed; retrying")
			select {
			case <-ctx.Done():
			case <-time.After(100 * time.Millisecond):
			}
		}
		if err := d.commitDue(d.now()); err != nil {
			return err
		}
	}
}

// wait is how long the next fetch may wait: until the batch in hand is due
// for its commit, or the next evaluation, and at most maxIdle; while a
// commit is in flight, briefly, so that its messages are acknowledged soon
// after it ends.
func (d *daemon) wait(now time.Time) time.Duration {
	w := min(maxIdle, d.nextEval.Sub(now))
	if !d.pend.empty() {
		w = min(w, d.pend.since.Add(d.commitEvery).Sub(now))
	}
	if d.inflight != nil {
		w = min(w, 2*time.Millisecond)
	}
	return max(w, time.Millisecond)
}

// apply applies one message: skipped when its sequence was applied before,
// otherwise decoded, validated and added, each measurement on its own.
func (d *daemon) apply(msg *ingest.Msg) {
	if d.pend.since.IsZero() {
		d.pend.since = d.now()
	}
	if msg.Seq != 0 && msg.Seq <= d.cursor {
		d.met.skipped.Add(1)
		d.pend.ack = max(d.pend.ack, msg.Seq)
		return
	}
	d.met.applied.Add(1)
	now := msg.Arrived
	if d.stampStored && !msg.Stored.IsZero() {
		now = msg.Stored
	}
	d.subj = append(d.subj[:0], msg.Subject...)
	payloads, err := d.dec.Decode(msg.Data)
	if err != nil {
		r, rerr := d.val.Reject(d.subj, err)
		d.reject(r, rerr, msg)
	}
	for i := range payloads {
		p := &payloads[i]
		if r, rerr := d.precheck(p); r != ingest.ReasonNone {
			d.val.Counters().Add(r)
			d.reject(r, rerr, msg)
			continue
		}
		r, rerr := d.val.Check(now, d.subj, p, &d.meas)
		if r != ingest.ReasonNone {
			d.reject(r, rerr, msg)
			continue
		}
		d.accept(&d.meas, p.Unit)
	}
	if msg.Seq != 0 {
		d.cursor, d.pend.seq, d.pend.ack = msg.Seq, msg.Seq, msg.Seq
	}
}

// Limits of what the store and the windows keep, checked before
// Validator.Check so that a measurement beyond them is counted as a reject
// and never fails a commit.
const (
	maxValueText = 256 // store.RawValue.Text
	maxIDText    = 255 // store.RawValue.ID
	// maxEventNs bounds the event times a window accepts: ±2⁶² ns around
	// the Unix epoch.
	maxEventNs = 1 << 62
)

// precheck rejects a payload the store or the window could not keep.
func (d *daemon) precheck(p *ingest.Payload) (ingest.Reason, error) {
	var r ingest.Reason
	var msg string
	switch {
	case p.Err != nil:
		return ingest.ReasonNone, nil // Check gives its reason
	case len(p.Value) > maxValueText:
		r, msg = ingest.ReasonNotANumber, fmt.Sprintf("value text is %d bytes, more than the %d lockstep keeps; send the measurement with fewer digits", len(p.Value), maxValueText)
	case len(p.ID) > maxIDText:
		r, msg = ingest.ReasonNotParseable, fmt.Sprintf("id is %d bytes, more than the %d lockstep keeps; use a shorter id", len(p.ID), maxIDText)
	case p.HasTime && p.Time.Before(time.Unix(0, -maxEventNs)):
		r, msg = ingest.ReasonTooOld, "time "+p.Time.Format(time.RFC3339)+" is before 1823, which lockstep does not keep; check the publisher's clock and time unit"
	case p.HasTime && p.Time.After(time.Unix(0, maxEventNs)):
		r, msg = ingest.ReasonFromFuture, "time "+p.Time.Format(time.RFC3339)+" is after 2116, which lockstep does not keep; check the publisher's clock and time unit"
	default:
		return ingest.ReasonNone, nil
	}
	m, _ := d.val.Template().Match(d.subj)
	return r, &ingest.RejectError{Reason: r, Characteristic: string(m.Characteristic), Msg: msg}
}

// reject republishes a rejected measurement (or message) to its dead-letter
// subject. It was counted by the Validator; it reaches no sum.
func (d *daemon) reject(r ingest.Reason, err error, msg *ingest.Msg) {
	d.pend.items++
	char := ""
	var re *ingest.RejectError
	if errors.As(err, &re) {
		char = re.Characteristic
	}
	if e := d.log.Debug(); e.Enabled() {
		e.Str("reason", r.String()).Str("subject", msg.Subject).Uint64("seq", msg.Seq).Err(err).Msg("measurement rejected")
	}
	if d.dead != nil {
		d.dead.Publish(ingest.DeadLetterSubject(d.rejectPrefix, char), ingest.RejectMessage(r, err, msg.Subject, msg.Data, d.now()))
	}
}

// accept adds an accepted measurement to its window and to the batch; unit
// is the payload's.
func (d *daemon) accept(m *ingest.Measurement, unit []byte) {
	c, err := d.charFor(m, unit)
	if err != nil {
		d.met.winRejects.Add(1)
		d.log.Error().Err(err).Str("characteristic", m.Characteristic).Msg("measurement dropped")
		return
	}
	g := c.win.GroupBytes(m.Group)
	switch c.win.Add(g, m.Time, m.Value) {
	case window.Added:
		d.met.added.Add(1)
		if c.set.Window.Count == 0 {
			d.pend.touched[touchKey{c: c, start: c.win.BucketStart(m.Time).UnixNano(), group: g}] = struct{}{}
		}
	case window.Late:
		d.met.late.Add(1)
	case window.Expired:
		d.met.expired.Add(1)
	default: // precheck keeps such times out
		d.met.winRejects.Add(1)
		d.log.Warn().Str("characteristic", c.name).Time("time", m.Time).Msg("the window refused a measurement's time; it is not kept")
		return
	}
	d.pend.raw = append(d.pend.raw, store.RawValue{
		Characteristic: c.name, Group: c.win.Groups()[g], Time: m.Time, Text: string(m.Text), ID: string(m.ID),
	})
	d.pend.items++
	if !m.Exact {
		c.inexact++
	}
}

// charFor returns the live characteristic of m, creating it on its first
// value and putting its record, with the reference the Validator fixed,
// into the batch. A characteristic without a configured unit takes the unit
// its first value names, for display (it is not enforced).
func (d *daemon) charFor(m *ingest.Measurement, unit []byte) (*liveChar, error) {
	c := d.chars[m.Characteristic]
	if c == nil {
		var err error
		if c, err = d.newChar(m.Characteristic); err != nil {
			return nil, err
		}
	}
	if !c.stored {
		c.ref, c.stored = m.Reference, true
		if c.unit == "" {
			c.unit = string(unit)
		}
		d.pend.chars = append(d.pend.chars, store.Characteristic{
			Name: c.name, Unit: c.unit, Reference: m.Reference.Decimal(), SettingsHash: c.hash, Created: d.now(),
		})
		d.log.Info().Str("characteristic", c.name).Str("reference", m.Reference.Decimal().String()).Bool("configured", c.set.Configured).
			Msg("new characteristic")
	}
	return c, nil
}

// newChar creates the live state of a characteristic with its settings.
func (d *daemon) newChar(name string) (*liveChar, error) {
	set := d.cfg.settingsFor(name)
	win, err := window.New(set.Window)
	if err != nil {
		return nil, fmt.Errorf("create window of characteristic %q: %w", name, err)
	}
	c := &liveChar{name: name, set: set, unit: set.Unit, win: win, hash: set.stateHash(), dropAt: d.lastDropAt, dropped: d.dropped}
	if r := set.rules().Reference; r != nil {
		c.ref = *r
	}
	d.chars[name] = c
	d.order = append(d.order, c)
	d.nextEval = time.Time{}
	d.met.characteristics.Store(int64(len(d.order)))
	return c, nil
}

// checkDrops marks every window incomplete when the source dropped
// messages (core NATS, a subscriber that fell behind): which
// characteristics they were for is unknown.
func (d *daemon) checkDrops() {
	st := d.src.Stats()
	if st.Dropped <= d.dropped {
		return
	}
	n := st.Dropped - d.dropped
	d.dropped, d.lastDropAt = st.Dropped, d.now()
	d.log.Warn().Uint64("dropped", n).Uint64("dropped_total", st.Dropped).
		Msg("core NATS dropped messages because lockstep fell behind; the reports of the windows they fall in are marked incomplete")
	for _, c := range d.order {
		c.dropAt, c.dropped = d.lastDropAt, c.dropped+n
	}
}

// evaluateDue evaluates every characteristic whose interval has passed.
func (d *daemon) evaluateDue(now time.Time) {
	if now.Before(d.nextEval) {
		return
	}
	next := now.Add(time.Hour)
	for _, c := range d.order {
		if !now.Before(c.nextEval) {
			d.evaluate(c, now)
			c.nextEval = now.Add(c.set.EvaluateEvery)
		}
		if c.nextEval.Before(next) {
			next = c.nextEval
		}
	}
	d.nextEval = next
}

// evaluate analyses c's window up to now and keeps the report for the API.
func (d *daemon) evaluate(c *liveChar, now time.Time) {
	t0 := time.Now()
	ev := c.win.Evaluate(now, c.set.Stats, c.ref)
	note := ""
	if c.dropped > 0 && !c.dropAt.Before(ev.From) {
		note = fmt.Sprintf("incomplete: the core NATS subscription dropped %d messages since the daemon started, the last at %s, because lockstep fell behind; this window may miss values (use JetStream where no loss is acceptable)",
			c.dropped, c.dropAt.UTC().Format(time.RFC3339))
	}
	lr, err := buildLive(liveInput{Name: c.name, Unit: c.unit, Evaluated: now, Eval: ev, Inexact: c.inexact, Incomplete: note})
	d.met.evalSeconds.Observe(time.Since(t0).Seconds())
	if err != nil {
		d.log.Error().Err(err).Str("characteristic", c.name).Msg("report not encoded")
		return
	}
	d.book.put(lr)
}

// retainInterval is how often retention runs.
const retainInterval = time.Hour

// retainDue deletes raw values and bucket states past their retention.
func (d *daemon) retainDue(now time.Time) error {
	s := d.cfg.Store
	if (s.RetainRaw.D == 0 && s.RetainBuckets.D == 0) || now.Before(d.retainAt) {
		return nil
	}
	d.retainAt = now.Add(retainInterval)
	if err := d.flush(); err != nil { // every characteristic record is stored
		return err
	}
	var rawBefore, bucketsBefore time.Time
	if s.RetainRaw.D > 0 {
		rawBefore = now.Add(-s.RetainRaw.D)
	}
	if s.RetainBuckets.D > 0 {
		bucketsBefore = now.Add(-s.RetainBuckets.D)
	}
	var errs []error
	total := 0
	for _, c := range d.order {
		if !c.stored {
			continue
		}
		n, err := d.st.Retain(c.name, rawBefore, bucketsBefore)
		total += n
		if err != nil {
			errs = append(errs, fmt.Errorf("retain %q: %w", c.name, err))
		}
	}
	d.log.Info().Int("removed", total).Msg("retention ran")
	return errors.Join(errs...)
}
