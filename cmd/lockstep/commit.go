package main

import (
	"errors"
	"fmt"
	"slices"
	"time"

	"github.com/lockstep-project/lockstep/alert"
	"github.com/lockstep-project/lockstep/store"
)

// Commits are grouped. The loop hands a due batch to a goroutine that
// writes it (one bbolt transaction, one fsync) and goes on fetching and
// applying meanwhile. At most one batch is in flight: while it is, the
// batch in hand grows past commit_values instead of waiting (up to
// maxPendingFactor times), so that under load the batches grow with the
// commit latency and each fsync carries more values. The loop acknowledges
// a batch's messages only when its commit has returned, and in order, so
// that an AckAll never covers a message that is not stored; Ack stays on
// the loop's goroutine, Fetch on the ingest stage's (stage.go).

// maxPendingFactor bounds the batch in hand while another is in flight, in
// multiples of commit_values; past it the loop waits for the commit.
const maxPendingFactor = 16

// jsMaxAckPending is the JetStream consumer's MaxAckPending for a pull batch
// and commit_values: room for every message the daemon may hold without an
// acknowledgement (the pulls and the source's buffer, the ingest stage's
// batches, the batch in hand grown to its bound, the batch in flight), so
// that the server never pauses delivery while a slow commit is in flight.
func jsMaxAckPending(batch, commitValues int) int {
	return max(10*batch, 3*batch+(stageDepth+1)*commitValues+(maxPendingFactor+2)*commitValues)
}

// commitJob is one batch on its way to the store.
type commitJob struct {
	batch store.Batch
	items int    // values and rejects
	ack   uint64 // highest stream sequence to acknowledge after it
	took  time.Duration
	err   error
	// alerts are the alert events whose records the batch holds, sent to
	// the sinks once it has committed (alerting.go).
	alerts []alert.Event
}

// due reports whether the batch in hand is to be committed: it is full, or
// its first message is commitEvery old.
func (d *daemon) due(now time.Time) bool {
	if d.pend.empty() {
		return false
	}
	return d.pend.items >= d.commitValues || !now.Before(d.pend.since.Add(d.commitEvery))
}

// commitDue starts the commit of the batch in hand when it is due and none
// is in flight, or waits for the one in flight when the batch in hand has
// grown too large.
func (d *daemon) commitDue(now time.Time) error {
	if !d.due(now) {
		return nil
	}
	if d.inflight != nil {
		if d.pend.items < maxPendingFactor*d.commitValues {
			return nil
		}
		if err := d.waitCommit(); err != nil {
			return err
		}
	}
	d.startCommit()
	return nil
}

// flush commits everything: the batch in flight, then the one in hand, and
// acknowledges their messages.
func (d *daemon) flush() error {
	if err := d.waitCommit(); err != nil {
		return err
	}
	if d.pend.empty() {
		return nil
	}
	d.startCommit()
	return d.waitCommit()
}

// startCommit moves the batch in hand into a job and commits it in a
// goroutine of its own. There must be none in flight.
func (d *daemon) startCommit() {
	job := d.takeBatch()
	d.inflight = job
	go func() {
		b := &job.batch
		if len(b.Characteristics)+len(b.Buckets)+len(b.Raw)+len(b.Alerts)+len(b.MonitorStates) > 0 || b.Cursor > 0 {
			t0 := time.Now()
			job.err = d.st.Commit(b)
			job.took = time.Since(t0)
		}
		d.done <- job
	}()
}

// takeBatch builds the job of the batch in hand: its records and raw
// values, the full state of every bucket it touched (read from the windows
// now, on the loop's goroutine) and its cursor. The batch in hand starts
// again empty, on the slices of the last finished job.
func (d *daemon) takeBatch() *commitJob {
	p := &d.pend
	job := d.spare
	d.spare = nil
	if job == nil {
		job = &commitJob{}
	}
	chars, raw, states := job.batch.Characteristics, job.batch.Raw, job.batch.Buckets
	clear(chars)
	clear(raw)
	clear(states)
	job.batch = store.Batch{Characteristics: p.chars, Raw: p.raw, Buckets: states[:0]}
	if p.seq > 0 {
		job.batch.Consumer, job.batch.Cursor = d.consumer, p.seq
	}
	job.batch.Alerts, job.batch.MonitorStates, job.alerts = d.alerts.take()
	p.alerts = false
	for k := range p.touched {
		start := time.Unix(0, k.start)
		acc, sample, ok := k.c.win.Bucket(start, k.group)
		if !ok {
			continue // evicted from the window within the batch
		}
		job.batch.Buckets = append(job.batch.Buckets, store.BucketState{
			Characteristic: k.c.name, Start: start, Group: k.c.win.Groups()[k.group], Acc: acc, Sample: slices.Clone(sample),
		})
	}
	job.items, job.ack, job.took, job.err = p.items, p.ack, 0, nil
	p.chars, p.raw = chars[:0], raw[:0]
	clear(p.touched)
	p.items, p.since, p.seq, p.ack = 0, time.Time{}, 0, 0
	return job
}

// pollCommit finishes the commit in flight if it has returned.
func (d *daemon) pollCommit() error {
	if d.inflight == nil {
		return nil
	}
	select {
	case job := <-d.done:
		return d.finishCommit(job)
	default:
		return nil
	}
}

// waitCommit waits for the commit in flight, if any, and finishes it.
func (d *daemon) waitCommit() error {
	if d.inflight == nil {
		return nil
	}
	return d.finishCommit(<-d.done)
}

// finishCommit acknowledges the messages of a committed job. A failed
// commit stops the daemon: its values are in the windows but not in the
// store, and only a restart (from the store, with the messages redelivered)
// makes the two agree again.
func (d *daemon) finishCommit(job *commitJob) error {
	d.inflight = nil
	b := &job.batch
	switch {
	case errors.Is(job.err, store.ErrApplied):
		d.log.Warn().Uint64("cursor", b.Cursor).Msg("batch was applied before; acknowledging it")
	case job.err != nil:
		return fmt.Errorf("commit %d values up to stream sequence %d to %s: %w; the messages are not acknowledged and come again after a restart",
			len(b.Raw), b.Cursor, d.st.Path(), job.err)
	}
	if job.took > 0 {
		d.met.commitSeconds.Observe(job.took.Seconds())
		d.met.commitValues.Observe(float64(job.items))
	}
	if b.Cursor > 0 {
		d.met.cursor.Store(b.Cursor)
	}
	if job.ack > 0 {
		if err := d.src.Ack(job.ack); err != nil {
			d.log.Warn().Err(err).Uint64("seq", job.ack).Msg("ack failed; the messages come again and are skipped")
		}
	}
	d.alerts.dispatch(job.alerts)
	job.alerts = nil
	d.spare = job
	return nil
}
