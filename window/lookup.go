package window

import (
	"time"

	"github.com/lockstep-project/lockstep/stats"
)

// Bucket returns the current state of one group in the bucket starting at
// start (a bucket boundary), for writing it to a store after the values of a
// batch went in: the accumulator and the kept sample (valid until the next
// call on the window; copy it to keep it). ok is false when the window holds
// no such bucket, or the group has no value in it. Unlike Buckets it does not
// touch the sliding aggregate, so calling it never changes a later result.
//
// Cost: the open buckets, then the closed ones from the newest, are
// searched; the buckets a batch touches are almost always open or newly
// closed, so this is a few comparisons. A count-based window has no buckets:
// ok is false.
func (w *Window) Bucket(start time.Time, group int) (acc stats.Accumulator, sample []float64, ok bool) {
	if w.count || group < 0 {
		return stats.Accumulator{}, nil, false
	}
	ns, ok := timeNs(start)
	if !ok {
		return stats.Accumulator{}, nil, false
	}
	idx := floorDiv(ns, w.bucketNs)
	var b *bucket
	for _, o := range w.open {
		if o.idx == idx {
			b = o
			break
		}
	}
	for i := len(w.closed.q) - 1; b == nil && i >= w.closed.h; i-- {
		if c := w.closed.q[i]; c.idx == idx {
			b = c
		} else if c.idx < idx {
			break
		}
	}
	if b == nil || group >= len(b.acc) || b.acc[group].N == 0 {
		return stats.Accumulator{}, nil, false
	}
	return b.acc[group], b.sample(group, w.sample), true
}

// BucketStart returns the start of the bucket that holds event time t.
func (w *Window) BucketStart(t time.Time) time.Time {
	ns, ok := timeNs(t)
	if !ok || w.count {
		return t
	}
	return nsTime(floorDiv(ns, w.bucketNs) * w.bucketNs)
}
