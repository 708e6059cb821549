package window

import (
	"fmt"
	"math"
	"slices"
	"time"
)

// Result says what Add did with a value.
type Result uint8

const (
	// Added: the value is in the live window.
	Added Result = iota
	// Late: the value's bucket is closed (it ended at or before the
	// watermark); in a count-based window, the value is older than the
	// watermark. It is not in the live window; the caller keeps it for
	// replay.
	Late
	// Expired: the value's bucket is not closed but lies before the window
	// already, which happens when a quiet stream let now run ahead of the
	// watermark, or when Lateness is within a bucket of Length. Treat it
	// as Late.
	Expired
	// Rejected: the value is not a finite number, or its time is outside
	// the range a window accepts (see Window.Add). It is in no sum.
	Rejected
)

func (r Result) String() string {
	switch r {
	case Added:
		return "added"
	case Late:
		return "late"
	case Expired:
		return "expired"
	case Rejected:
		return "rejected"
	}
	return fmt.Sprintf("Result(%d)", uint8(r))
}

// Totals counts Add calls by their result since the window was made.
type Totals struct {
	Added, Late, Expired, Rejected uint64
}

// Event times a window accepts: ±2⁶² ns around the Unix epoch (from
// 1823-11-12 to 2116-02-20), so that a time plus a duration of at most
// MaxDuration stays inside int64.
const (
	minTime = -1 << 62
	maxTime = 1<<62 - 1
)

// Window is the rolling window of one characteristic: its groups, their
// buckets (or, count-based, their last values), the watermark and the
// sliding aggregate. Use New.
//
// A Window is not safe for concurrent use: the daemon gives each window to
// one goroutine, or guards it with a lock.
//
// Memory: a time-based window holds each bucket in the window (and the
// open ones) with two accumulators and Sample values of room per group,
// about 614 bytes per group and bucket with the default Sample of 64
// (measured by TestMemoryPerGroupBucket). Buckets that fall out are kept
// for reuse, so the memory stays at its highest. A count-based window holds
// Count values and their times per group, 16 bytes each.
type Window struct {
	cfg      Config
	count    bool  // count-based
	bucketNs int64 // Bucket in ns
	span     int64 // buckets per window: Length/Bucket
	lateNs   int64 // allowed lateness in ns, ≥ 0
	silentNs int64 // SilentAfter in ns; < 0: only empty groups are silent
	sample   int   // values kept per group and bucket; 0: none

	names []string
	index map[string]int
	// last is the number of each group's newest bucket with a value, noLast
	// when there is none (time-based; a count-based window reads its rings).
	last []int64

	latest    int64 // largest event time seen, ns
	hasLatest bool
	clock     int64 // largest now seen by Evaluate or Sums, ns
	hasClock  bool

	// time-based
	closed queue
	open   []*bucket // open buckets, by bucket number
	free   []*bucket // evicted buckets, for reuse
	// retired are the buckets that left the window and are kept for
	// Config.Keep (keepN buckets), oldest first; only spans read them.
	retired []*bucket
	keepN   int64
	cur     *bucket // the bucket Add used last, if still open

	// restoring collects the buckets Restore loads until settle sorts them
	// into closed and open.
	restoring map[int64]*bucket

	// count-based
	rings []ring

	totals Totals
}

const noLast = math.MinInt64

// New returns an empty window for cfg, or an error wrapping ErrConfig.
func New(cfg Config) (*Window, error) {
	if err := cfg.Validate(); err != nil {
		return nil, err
	}
	cfg = cfg.withDefaults()
	w := &Window{
		cfg:      cfg,
		count:    cfg.Count > 0,
		bucketNs: int64(cfg.Bucket),
		span:     int64(cfg.Length / cfg.Bucket),
		lateNs:   max(int64(cfg.Lateness), 0),
		silentNs: int64(cfg.SilentAfter),
		sample:   max(cfg.Sample, 0),
		keepN:    int64(cfg.Keep / cfg.Bucket),
		index:    make(map[string]int),
	}
	return w, nil
}

// Config returns the window's configuration, defaults filled in.
func (w *Window) Config() Config { return w.cfg }

// Group returns the index of the group with this name, interning it on
// first use. Indices count from 0 in the order names were first seen; they
// are what Add, Restore, Buckets and Sums use.
func (w *Window) Group(name string) int {
	if i, ok := w.index[name]; ok {
		return i
	}
	i := len(w.names)
	w.names = append(w.names, name)
	w.index[name] = i
	w.last = append(w.last, noLast)
	if w.count {
		w.rings = append(w.rings, newRing(w.cfg.Count))
	}
	return i
}

// GroupBytes is Group for a name held in a byte slice, such as a subject
// token. It does not allocate when the name is known.
func (w *Window) GroupBytes(name []byte) int {
	if i, ok := w.index[string(name)]; ok {
		return i
	}
	return w.Group(string(name))
}

// Groups returns the group names by index. The slice is the window's own:
// do not modify its elements.
func (w *Window) Groups() []string { return slices.Clip(w.names) }

// Totals returns the counts of Add results so far.
func (w *Window) Totals() Totals { return w.totals }

// Latest returns the largest event time seen (by Add, Restore or
// SetLatest), or the zero Time if none. The watermark is Latest minus the
// allowed lateness.
func (w *Window) Latest() time.Time {
	if !w.hasLatest {
		return time.Time{}
	}
	return nsTime(w.latest)
}

// SetLatest raises the largest event time seen to t, never lowering it, and
// so moves the watermark: buckets it passes close. A store that persisted
// Latest along with Buckets' output calls it after Restore, so that the
// restored window closes the same buckets as the original. A t outside the
// accepted range (see Add) is ignored.
func (w *Window) SetLatest(t time.Time) {
	ns, ok := timeNs(t)
	if !ok || (w.hasLatest && ns <= w.latest) {
		return
	}
	w.latest, w.hasLatest = ns, true
	w.advance()
}

// Add adds value v (centred on the characteristic's reference) of the given
// group at event time t, and says whether it went into the live window.
//
// Time-based: the value goes into the bucket containing t,
// floor(t / Bucket). It is Late when that bucket ended at or before the
// watermark (largest event time seen − Lateness), Expired when the bucket is
// already before the window (see Expired), and otherwise Added; a value
// newer than every other moves the watermark, closing the buckets it
// passes, and drops the buckets that fall out of the window.
// Count-based: the value is Late when t is before the watermark, and
// otherwise Added to the group's last values, replacing the oldest when
// Count are held (arrival order, not time order).
//
// Rejected: v is NaN or infinite, or t is outside ±2⁶² ns around the Unix
// epoch (before 1823-11-12 or after 2116-02-20).
//
// Add does not allocate once the group and the value's bucket exist, nor
// when a new bucket can reuse the memory of one that fell out of the window;
// so in a steady stream it does not allocate at all. A value that closes
// buckets or evicts them costs O(groups) per bucket, amortised; the
// two-stacks flip behind eviction occasionally costs O(groups × buckets)
// in one call.
//
// Add panics if group is not an index Group returned.
func (w *Window) Add(group int, t time.Time, v float64) Result {
	if group < 0 || group >= len(w.names) {
		panic(fmt.Sprintf("window: Add for group %d, but the window has %d groups", group, len(w.names)))
	}
	ns, ok := timeNs(t)
	if !ok || math.IsNaN(v) || math.IsInf(v, 0) {
		w.totals.Rejected++
		return Rejected
	}
	if w.restoring != nil {
		w.settle()
	}
	if w.count {
		return w.addCount(group, ns, v)
	}
	idx := floorDiv(ns, w.bucketNs)
	if w.hasLatest && (idx+1)*w.bucketNs <= w.latest-w.lateNs {
		w.totals.Late++
		return Late
	}
	if idx < w.fromIdx(ns) {
		w.totals.Expired++
		return Expired
	}
	if !w.hasLatest || ns > w.latest {
		w.latest, w.hasLatest = ns, true
		w.advance()
	}
	b := w.cur
	if b == nil || b.idx != idx {
		b = w.openBucket(idx)
		w.cur = b
	}
	if group >= len(b.acc) {
		b.grow(len(w.names), w.sample)
	}
	b.add(group, v, w.sample)
	w.last[group] = max(w.last[group], idx)
	w.totals.Added++
	return Added
}

// effective returns the window's time: the largest of every now seen, the
// largest event time seen and ns. The window ends with the bucket holding
// it, so that data stamped ahead of now (a fast device clock) stay in.
func (w *Window) effective(ns int64) int64 {
	if w.hasClock {
		ns = max(ns, w.clock)
	}
	if w.hasLatest {
		ns = max(ns, w.latest)
	}
	return ns
}

// fromIdx returns the number of the oldest bucket in the window as of ns
// (see effective).
func (w *Window) fromIdx(ns int64) int64 {
	return floorDiv(w.effective(ns), w.bucketNs) + 1 - w.span
}

// advance closes the open buckets the watermark has passed and drops the
// buckets before the window.
func (w *Window) advance() {
	if w.count || w.restoring != nil {
		return
	}
	if w.hasLatest {
		wm := w.latest - w.lateNs
		n := 0
		for n < len(w.open) && (w.open[n].idx+1)*w.bucketNs <= wm {
			w.closed.push(w.open[n], len(w.names))
			n++
		}
		w.dropOpen(n, false)
	}
	if !w.hasLatest && !w.hasClock {
		return
	}
	from := w.fromIdx(minTime)
	for w.closed.len() > 0 && w.closed.oldest().idx < from {
		w.retire(w.closed.pop(len(w.names)))
	}
	n := 0
	for n < len(w.open) && w.open[n].idx < from {
		n++
	}
	for _, b := range w.open[:n] {
		w.retire(b)
	}
	w.dropOpen(n, false)
	k := 0
	for k < len(w.retired) && w.retired[k].idx < from-w.keepN {
		k++
	}
	if k > 0 {
		w.free = append(w.free, w.retired[:k]...)
		m := copy(w.retired, w.retired[k:])
		clear(w.retired[m:])
		w.retired = w.retired[:m]
	}
}

// retire keeps b, which left the window, for Config.Keep, or recycles it.
func (w *Window) retire(b *bucket) {
	if w.keepN == 0 {
		w.free = append(w.free, b)
		return
	}
	w.retired = append(w.retired, b)
}

// dropOpen removes the n oldest open buckets, recycling them if asked.
func (w *Window) dropOpen(n int, recycle bool) {
	if n == 0 {
		return
	}
	if recycle {
		w.free = append(w.free, w.open[:n]...)
	}
	k := copy(w.open, w.open[n:])
	clear(w.open[k:])
	w.open = w.open[:k]
	w.cur = nil
}

// openBucket returns the open bucket number idx, making it if need be
// (idx is neither late nor before the window).
func (w *Window) openBucket(idx int64) *bucket {
	i, found := slices.BinarySearchFunc(w.open, idx, func(b *bucket, idx int64) int {
		switch {
		case b.idx < idx:
			return -1
		case b.idx > idx:
			return 1
		}
		return 0
	})
	if found {
		return w.open[i]
	}
	var b *bucket
	if n := len(w.free); n > 0 {
		b = w.free[n-1]
		w.free[n-1] = nil
		w.free = w.free[:n-1]
	} else {
		b = new(bucket)
	}
	b.reset(idx, len(w.names), w.sample)
	w.open = slices.Insert(w.open, i, b)
	return b
}

// timeNs returns t as ns since the Unix epoch, and false when t is outside
// the accepted range.
func timeNs(t time.Time) (int64, bool) {
	// Compare in seconds first: UnixNano is undefined far outside int64.
	s := t.Unix()
	if s < minTime/1_000_000_000-1 || s > maxTime/1_000_000_000+1 {
		return 0, false
	}
	ns := t.UnixNano()
	return ns, ns >= minTime && ns <= maxTime
}

// nsTime returns the UTC time ns after the Unix epoch.
func nsTime(ns int64) time.Time { return time.Unix(0, ns).UTC() }

// floorDiv returns ⌊a/b⌋ for b > 0.
func floorDiv(a, b int64) int64 {
	q := a / b
	if a%b != 0 && a < 0 {
		q--
	}
	return q
}
