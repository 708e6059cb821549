package main

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"sync/atomic"
	"time"

	"github.com/rs/zerolog"

	"github.com/lockstep-project/lockstep/ingest"
	"github.com/lockstep-project/lockstep/stats"
	"github.com/lockstep-project/lockstep/store"
	"github.com/lockstep-project/lockstep/window"
)

// daemon is the apply loop of lockstep run. One goroutine owns it (and its
// windows): it takes the batches of the ingest stage (stage.go: fetched,
// skipped at or below the applied stream sequence, decoded and validated,
// rejects republished, on a goroutine of its own), adds the accepted values
// to their windows and keeps them as raw values, commits by size and by
// time (the new characteristics, the full state of every bucket the batch
// touched, the raw values and the cursor, in one transaction, written while
// the loop goes on: see commit.go),
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

	pend     pendingBatch
	lastChar *liveChar // the characteristic of the last value applied

	inflight *commitJob      // the batch being committed, or nil
	spare    *commitJob      // a finished job, whose slices the next reuses
	done     chan *commitJob // where the committing goroutine returns it

	ready atomic.Bool

	alerts *alerting // the alert monitors, machines and sinks (alerting.go)
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
	d.alerts = newAlerting(cfg, log.With().Str("part", "alerts").Logger(), d.met.reg)
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
	// The alert records and monitor states (alerting.go).
	Alerts(fn func(store.AlertRecord) error) error
	MonitorState(char string) ([]byte, error)
	RetainAlerts(before time.Time) (int, error)
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
	// accepted and rejected count its measurements since the last
	// evaluation, for the alert monitor.
	accepted, rejected uint64
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
	alerts  bool      // alert records or monitor states wait (alerting.take)
}

// touchKey is a bucket of a group that a batch added values to.
type touchKey struct {
	c     *liveChar
	start int64 // Unix nanoseconds
	group int
}

func (p *pendingBatch) empty() bool {
	return len(p.chars) == 0 && len(p.raw) == 0 && len(p.touched) == 0 && p.seq == 0 && p.ack == 0 && p.items == 0 && !p.alerts
}

// maxIdle bounds a fetch's wait, so that the stage looks at the clock now
// and then on a silent stream.
const maxIdle = time.Second

// run is the loop. It returns when ctx ends, after committing and
// acknowledging the batches in flight and in hand, or with the error that
// stops it (a failed commit, or a source that can deliver nothing more).
func (d *daemon) run(ctx context.Context) error {
	st := d.newStage()
	sctx, cancel := context.WithCancel(ctx)
	quit := make(chan struct{})
	defer func() { close(quit); cancel() }()
	go st.run(sctx, quit)
	timer := time.NewTimer(maxIdle)
	defer timer.Stop()
	for {
		if err := d.pollCommit(); err != nil {
			return err
		}
		now := d.now()
		d.evaluateDue(now)
		if err := d.retainDue(now); err != nil {
			d.log.Error().Err(err).Msg("retention failed; retrying in an hour")
		}
		timer.Reset(d.wait(d.now()))
		var b *stageBatch
		select {
		case b = <-st.out:
		case job := <-d.done: // only while a commit is in flight
			if err := d.finishCommit(job); err != nil {
				return err
			}
		case <-timer.C:
		}
		d.ready.Store(true)
		var err error
		if b != nil {
			d.applyBatch(b)
			err = b.err
			st.recycle(b)
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
		default: // the source closed
			return errors.Join(fmt.Errorf("fetch measurements: %w", err), d.flush())
		}
		if err := d.commitDue(d.now()); err != nil {
			return err
		}
	}
}

// wait is how long the loop may wait for the next batch: until the batch in
// hand is due for its commit, or the next evaluation, and at most maxIdle.
func (d *daemon) wait(now time.Time) time.Duration {
	w := min(maxIdle, d.nextEval.Sub(now))
	if !d.pend.empty() {
		w = min(w, d.pend.since.Add(d.commitEvery).Sub(now))
	}
	return max(w, time.Millisecond)
}

// applyBatch applies a batch of the stage, item by item in message order.
func (d *daemon) applyBatch(b *stageBatch) {
	if len(b.items) > 0 && d.pend.since.IsZero() {
		d.pend.since = d.now()
	}
	for i := range b.items {
		it := &b.items[i]
		switch it.kind {
		case itemAccept:
			d.accept(b, it)
		case itemReject:
			d.pend.items++
			if c := d.chars[it.char]; c != nil {
				c.rejected++
			}
		case itemSkip:
			d.met.skipped.Add(1)
			d.pend.ack = max(d.pend.ack, it.seq)
		case itemEnd:
			d.met.applied.Add(1)
			if it.seq != 0 {
				d.cursor, d.pend.seq, d.pend.ack = it.seq, it.seq, it.seq
			}
		}
	}
}

// accept adds an accepted measurement of batch b to its window and to the
// batch in hand.
func (d *daemon) accept(b *stageBatch, m *stageItem) {
	c, err := d.charFor(b, m)
	if err != nil {
		d.met.winRejects.Add(1)
		d.log.Error().Err(err).Str("characteristic", m.char).Msg("measurement dropped")
		return
	}
	g := c.win.GroupBytes(b.bytes(m.group))
	switch c.win.Add(g, m.t, m.value) {
	case window.Added:
		d.met.added.Add(1)
		if c.set.Window.Count == 0 {
			d.pend.touched[touchKey{c: c, start: c.win.BucketStart(m.t).UnixNano(), group: g}] = struct{}{}
		}
	case window.Late:
		d.met.late.Add(1)
	case window.Expired:
		d.met.expired.Add(1)
	default: // Validator.Check keeps such times out
		d.met.winRejects.Add(1)
		d.log.Warn().Str("characteristic", c.name).Time("time", m.t).Msg("the window refused a measurement's time; it is not kept")
		return
	}
	d.pend.raw = append(d.pend.raw, store.RawValue{
		Characteristic: c.name, Group: c.win.Groups()[g], Time: m.t, Text: b.string(m.text), ID: b.string(m.id),
	})
	d.pend.items++
	c.accepted++
	if !m.exact {
		c.inexact++
	}
}

// charFor returns the live characteristic of m, creating it on its first
// value and putting its record, with the reference the Validator fixed,
// into the batch. A characteristic without a configured unit takes the unit
// its first value names, for display (it is not enforced).
func (d *daemon) charFor(b *stageBatch, m *stageItem) (*liveChar, error) {
	c := d.lastChar
	if c == nil || c.name != m.char {
		if c = d.chars[m.char]; c == nil {
			var err error
			if c, err = d.newChar(m.char); err != nil {
				return nil, err
			}
		}
		d.lastChar = c
	}
	if !c.stored {
		c.ref, c.stored = m.ref, true
		if c.unit == "" {
			c.unit = strings.Clone(b.string(m.unit)) // not the whole batch's text
		}
		d.pend.chars = append(d.pend.chars, store.Characteristic{
			Name: c.name, Unit: c.unit, Reference: m.ref.Decimal(), SettingsHash: c.hash, Created: d.now(),
		})
		d.log.Info().Str("characteristic", c.name).Str("reference", m.ref.Decimal().String()).Bool("configured", c.set.Configured).
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
	lr, err := buildLive(liveInput{Name: c.name, Unit: c.unit, Evaluated: now, Eval: ev, Inexact: c.inexact, Incomplete: note, Win: c.win, Ref: c.ref})
	d.met.evalSeconds.Observe(time.Since(t0).Seconds())
	d.evaluateAlerts(c, ev, now)
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
