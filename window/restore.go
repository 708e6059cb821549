package window

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"time"

	"github.com/lockstep-project/lockstep/stats"
)

// ErrRestore is wrapped by every error Restore returns.
var ErrRestore = errors.New("cannot restore bucket")

// Buckets calls fn for every group of every bucket the window holds that
// has values, closed and open, oldest bucket first and groups by index:
// what a store persists so that Restore can rebuild the window after a
// restart. acc is the group's accumulator in the bucket and sample its kept
// values; sample is the window's memory, valid only during the call.
//
// A count-based window holds values, not buckets: fn is called once per
// value, group by group and oldest first, with start the value's event
// time, a one-value accumulator and a one-value sample.
//
// Time-based, Buckets first re-forms the sliding aggregate: every closed
// bucket goes into the front stack, whose suffix aggregates are recomputed
// (O(groups × buckets), the order of the call itself). That is the form a
// restored window starts from, so the window and one restored from this
// output (with SetLatest(Latest())) evaluate bit for bit alike from here on;
// compared with not calling Buckets, later results of this window may differ
// in their last bits.
func (w *Window) Buckets(fn func(start time.Time, group int, acc stats.Accumulator, sample []float64)) {
	if w.restoring != nil {
		w.settle()
	}
	if w.count {
		var one [1]float64
		for g := range w.rings {
			r := &w.rings[g]
			for i := range r.n {
				ns, v := r.at(i)
				one[0] = v
				fn(nsTime(ns), g, stats.Accumulator{N: 1, Mean: v, Min: v, Max: v}, one[:])
			}
		}
		return
	}
	w.closed.flip(len(w.names))
	emit := func(b *bucket) {
		start := nsTime(b.idx * w.bucketNs)
		for g := range b.acc {
			if b.acc[g].N > 0 {
				fn(start, g, b.acc[g], b.sample(g, w.sample))
			}
		}
	}
	for _, b := range w.closed.q[w.closed.h:] {
		emit(b)
	}
	for _, b := range w.open {
		emit(b)
	}
}

// Restore loads one group's part of a stored bucket, as Buckets yielded it:
// the bucket starting at bucketStart, the group's accumulator and its kept
// values. Intern the group names first (Group, in the original's order:
// see Groups), restore every bucket, then call SetLatest with the original's
// Latest; Restore itself raises Latest only to bucketStart.
//
// Time-based, restoring the same bucket and group again replaces what was
// loaded, so a retried load is harmless, and the order of the calls does
// not matter. Buckets restored after the window has moved past them are
// dropped at the next Add or evaluation, like any other.
//
// Count-based: each call appends sample's values, all at event time
// bucketStart, to the group's last values (acc.N must equal len(sample));
// restore once, in the order Buckets yielded.
//
// The error wraps ErrRestore and says what does not fit: a group index
// not interned, a bucketStart outside the accepted range or not on a bucket
// boundary, an accumulator that is not consistent (negative count, values
// that are not finite, M2 < 0, Min > Max), or a sample that is not what this
// window would keep (min(acc.N, Sample) values between Min and Max): the
// sign of a damaged store or of a Sample setting changed since.
func (w *Window) Restore(bucketStart time.Time, group int, acc stats.Accumulator, sample []float64) error {
	fail := func(format string, args ...any) error {
		return fmt.Errorf("%w at %v for group %d: "+format,
			append([]any{ErrRestore, bucketStart, group}, args...)...)
	}
	if group < 0 || group >= len(w.names) {
		return fail("the window has %d groups", len(w.names))
	}
	ns, ok := timeNs(bucketStart)
	if !ok {
		return fail("time outside the accepted range")
	}
	if err := checkAcc(acc); err != nil {
		return fail("%v", err)
	}
	for i, x := range sample {
		if math.IsNaN(x) || math.IsInf(x, 0) || x < acc.Min || x > acc.Max {
			return fail("sample value %d (%v) is outside the accumulator's range [%v, %v]", i+1, x, acc.Min, acc.Max)
		}
	}
	if w.count {
		if int64(len(sample)) != acc.N {
			return fail("a count-based window restores values: sample has %d, accumulator counts %d", len(sample), acc.N)
		}
		for _, x := range sample {
			w.rings[group].push(ns, x)
		}
		if acc.N > 0 && (!w.hasLatest || ns > w.latest) {
			w.latest, w.hasLatest = ns, true
		}
		return nil
	}
	if ns%w.bucketNs != 0 {
		return fail("not a multiple of the bucket %v", w.cfg.Bucket)
	}
	if want := min(acc.N, int64(w.sample)); int64(len(sample)) != want {
		return fail("sample has %d values; with Sample %d and %d values a bucket keeps %d", len(sample), w.sample, acc.N, want)
	}
	idx := ns / w.bucketNs
	if w.restoring == nil {
		w.restoring = make(map[int64]*bucket)
		for _, b := range w.closed.q[w.closed.h:] {
			w.restoring[b.idx] = b
		}
		for _, b := range w.open {
			w.restoring[b.idx] = b
		}
	}
	b := w.restoring[idx]
	if b == nil && acc.N == 0 {
		return nil // nothing to load, nothing to replace
	}
	if b == nil {
		b = new(bucket)
		b.reset(idx, len(w.names), w.sample)
		w.restoring[idx] = b
	}
	b.grow(len(w.names), w.sample)
	b.acc[group] = acc
	copy(b.samp[group*w.sample:], sample)
	if acc.N > 0 {
		w.last[group] = max(w.last[group], idx)
		if !w.hasLatest || ns > w.latest {
			w.latest, w.hasLatest = ns, true
		}
	}
	return nil
}

// checkAcc reports an accumulator that no sequence of Adds could make.
func checkAcc(a stats.Accumulator) error {
	switch {
	case a.N < 0:
		return fmt.Errorf("negative count %d", a.N)
	case a.N == 0:
		if a != (stats.Accumulator{}) {
			return errors.New("an empty accumulator with non-zero sums")
		}
		return nil
	}
	for _, x := range [...]float64{a.Mean, a.M2, a.Min, a.Max} {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return fmt.Errorf("accumulator %+v holds a value that is not finite", a)
		}
	}
	switch {
	case a.M2 < 0:
		return fmt.Errorf("negative M2 %v", a.M2)
	case a.Min > a.Max:
		return fmt.Errorf("minimum %v above maximum %v", a.Min, a.Max)
	}
	return nil
}

// settle sorts the buckets held and restored into closed and open by the
// watermark, forms the sliding aggregate afresh (as Buckets does) and drops
// what is before the window.
func (w *Window) settle() {
	all := make([]*bucket, 0, len(w.restoring))
	for _, b := range w.restoring {
		all = append(all, b)
	}
	w.restoring = nil
	slices.SortFunc(all, func(a, b *bucket) int {
		switch {
		case a.idx < b.idx:
			return -1
		case a.idx > b.idx:
			return 1
		}
		return 0
	})
	clear(w.closed.q)
	w.closed.q, w.closed.h, w.closed.f = w.closed.q[:0], 0, 0
	clear(w.open)
	w.open = w.open[:0]
	w.cur = nil
	wm := w.latest - w.lateNs
	for _, b := range all {
		if w.hasLatest && (b.idx+1)*w.bucketNs <= wm {
			w.closed.q = append(w.closed.q, b)
		} else {
			w.open = append(w.open, b)
		}
	}
	w.closed.flip(len(w.names))
	w.advance()
}
