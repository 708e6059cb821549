package window

import (
	"time"

	"github.com/lockstep-project/lockstep/stats"
)

// SpanSums returns each group's accumulator, by index, over the last
// length/Bucket whole buckets that ended at or before now, appended to
// dst[:0]: buckets [⌊now/Bucket⌋ − length/Bucket, ⌊now/Bucket⌋). The bucket
// holding now is left out (unlike Sums), so that a short span always covers
// the same stretch of time whatever the phase of the evaluation within its
// bucket: a 1-minute span evaluated 10 s into a minute is the whole previous
// minute, not 10 s of values. A length shorter than a bucket counts as one
// bucket; one longer than the window is cut to the buckets the window keeps
// (its own and, with Config.Keep, those that left it within Keep).
//
// It merges the buckets one by one, O(groups × buckets in the span), which
// is fine for spans of a few dozen buckets; for the whole window use Sums.
// Unlike Sums it does not move the window's clock. Count-based windows have
// no buckets: SpanSums returns Sums(now, dst) for them.
func (w *Window) SpanSums(now time.Time, length time.Duration, dst []stats.Accumulator) []stats.Accumulator {
	if w.count {
		return w.Sums(now, dst)
	}
	if w.restoring != nil {
		w.settle()
	}
	ng := len(w.names)
	dst = growAcc(dst[:0], ng)
	clear(dst)
	ns, ok := timeNs(now)
	if !ok {
		return dst
	}
	n := int64(length / w.cfg.Bucket)
	if n < 1 {
		n = 1
	}
	end := floorDiv(ns, w.bucketNs)
	w.mergeRange(dst, end-n, end)
	return dst
}

// EndedSums returns each group's accumulator, by index, over the buckets
// whose end lies in (after, now], appended to dst[:0]. Called at every
// evaluation with after the previous evaluation's now, it hands each bucket
// to the caller once, when it has ended: the increments a sequential
// detector such as a CUSUM consumes. Values that arrive in a bucket after
// it ended (within the allowed lateness) are in the window's sums but not
// in any EndedSums result. A zero after means "from the oldest bucket kept".
// Count-based windows have no buckets: every accumulator is empty.
func (w *Window) EndedSums(after, now time.Time, dst []stats.Accumulator) []stats.Accumulator {
	ng := len(w.names)
	dst = growAcc(dst[:0], ng)
	clear(dst)
	if w.count {
		return dst
	}
	if w.restoring != nil {
		w.settle()
	}
	ns, ok := timeNs(now)
	if !ok {
		return dst
	}
	// A bucket idx ends at (idx+1)·Bucket; it is taken when
	// after < (idx+1)·Bucket ≤ now.
	end := floorDiv(ns, w.bucketNs) // buckets < end have ended by now
	from := int64(minTime / w.bucketNs)
	if !after.IsZero() {
		a, ok := timeNs(after)
		if !ok {
			return dst
		}
		from = floorDiv(a, w.bucketNs) // bucket from ends after a
	}
	if from < end {
		w.mergeRange(dst, from, end)
	}
	return dst
}

// mergeRange merges into dst every bucket kept (retired, closed or open)
// whose number is in [from, to).
func (w *Window) mergeRange(dst []stats.Accumulator, from, to int64) {
	for _, b := range w.retired {
		if b.idx >= from && b.idx < to {
			mergeInto(dst, b.acc)
		}
	}
	for i := w.closed.h; i < len(w.closed.q); i++ {
		b := w.closed.q[i]
		if b.idx >= from && b.idx < to {
			mergeInto(dst, b.acc)
		}
	}
	for _, b := range w.open {
		if b.idx >= from && b.idx < to {
			mergeInto(dst, b.acc)
		}
	}
}
