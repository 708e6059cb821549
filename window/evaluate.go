package window

import (
	"time"

	"github.com/lockstep-project/lockstep/stats"
)

// GroupCount is one group's share of an evaluated window.
type GroupCount struct {
	Name string
	N    int64 // values in the window (for a silent group too)
	// Silent: the group is left out of the report (see Config.SilentAfter).
	Silent bool
	// Last bounds the group's newest value in the window from above: the
	// end of its newest bucket (time-based) or the value's own event time
	// (count-based). Zero when the window holds no value of the group.
	Last time.Time
}

// Evaluation is one analysis of a window.
type Evaluation struct {
	// From and To bound the window. Time-based: [From, To) is the
	// Length/Bucket buckets ending with the bucket that holds now (or the
	// newest event time, if later). Count-based: From is the event time of
	// the oldest value in the report and To the window's time (the later of
	// now and the newest event time); both To when the report is empty.
	From, To time.Time
	// Buckets is the number of buckets in the window that hold values, the
	// open ones included; 0 for a count-based window.
	Buckets int
	Counts  []GroupCount // every group, by index
	Silent  []string     // names of the silent groups, by index
	// Report analyses the groups that are not silent, in index order.
	Report stats.Report
}

// observe takes now into the window's time: the window ends with the
// bucket holding the latest now seen (or event time, if later). A now
// earlier than one seen before, or outside the accepted range, changes
// nothing.
func (w *Window) observe(now time.Time) {
	if w.restoring != nil {
		w.settle()
	}
	ns, ok := timeNs(now)
	if !ok || (w.hasClock && ns <= w.clock) {
		return
	}
	w.clock, w.hasClock = ns, true
	w.advance()
}

// Sums returns the window's accumulator of each group, by index, for the
// window ending at now, appended to dst[:0]. Buckets that fall out of the
// window are dropped, as in Evaluate.
//
// Time-based, it costs O(groups × (2 + open buckets)) besides the amortised
// eviction, whatever the window length: the two-stacks aggregate of the
// closed buckets merged with each open bucket, in time order. It does not
// allocate when dst has room for every group. Count-based, it rebuilds each
// group's accumulator from its values, O(groups × Count).
func (w *Window) Sums(now time.Time, dst []stats.Accumulator) []stats.Accumulator {
	w.observe(now)
	ng := len(w.names)
	dst = growAcc(dst[:0], ng)
	if w.count {
		for g := range w.rings {
			dst[g] = w.rings[g].acc()
		}
		return dst
	}
	w.closed.aggregate(dst)
	for _, b := range w.open {
		mergeInto(dst, b.acc)
		w.closed.merges++
	}
	return dst
}

// Evaluate analyses the window ending at now with stats.Analyse: the
// groups that are not silent, each with the merged accumulator of its
// values in the window and the concatenated samples of its buckets (the
// values themselves, count-based), centred on ref. The open buckets are
// included, so a quiet stream's latest values are always in the report.
//
// now should not go backwards: buckets dropped for an earlier evaluation do
// not come back. The sums cost what Sums costs; building the values costs
// O(values kept), at most Sample × Length/Bucket per group, and the
// value-based tests of the analysis sort them.
func (w *Window) Evaluate(now time.Time, opt stats.Options, ref stats.Reference) Evaluation {
	var accs []stats.Accumulator
	if w.count {
		w.observe(now) // countGroups sums the rings as it copies them
	} else {
		accs = w.Sums(now, nil)
	}
	var ev Evaluation
	ev.Counts = make([]GroupCount, len(w.names))
	if !w.hasClock && !w.hasLatest {
		// now is out of range and nothing was added: an empty window.
		for g, name := range w.names {
			ev.Counts[g] = GroupCount{Name: name, Silent: true}
			ev.Silent = append(ev.Silent, name)
		}
		ev.Report = stats.Analyse(ref, nil, opt)
		return ev
	}
	tNow := w.effective(minTime)
	var groups []stats.Group
	if w.count {
		groups = w.countGroups(&ev, tNow)
	} else {
		groups = w.timeGroups(&ev, accs, tNow)
	}
	ev.Report = stats.Analyse(ref, groups, opt)
	return ev
}

// timeGroups fills ev's bounds and counts for a time-based window and
// returns the groups to analyse.
func (w *Window) timeGroups(ev *Evaluation, accs []stats.Accumulator, tNow int64) []stats.Group {
	end := floorDiv(tNow, w.bucketNs) + 1
	from := end - w.span
	ev.From, ev.To = nsTime(from*w.bucketNs), nsTime(end*w.bucketNs)
	ev.Buckets = w.closed.len() + len(w.open)
	live := make([]bool, len(w.names))
	total := 0
	for g, name := range w.names {
		c := GroupCount{Name: name, N: accs[g].N}
		last := w.last[g]
		if last != noLast && last >= from {
			lastEnd := (last + 1) * w.bucketNs
			c.Last = nsTime(lastEnd)
			c.Silent = w.silentNs >= 0 && lastEnd <= tNow-w.silentNs
		} else {
			c.Silent = true
		}
		ev.Counts[g] = c
		if c.Silent {
			ev.Silent = append(ev.Silent, name)
			continue
		}
		live[g] = true
		total += w.sampled(g)
	}
	vals := make([]float64, 0, total)
	var groups []stats.Group
	for g, name := range w.names {
		if !live[g] {
			continue
		}
		start := len(vals)
		for i := w.closed.h; i < len(w.closed.q); i++ {
			vals = append(vals, w.closed.q[i].sample(g, w.sample)...)
		}
		for _, b := range w.open {
			vals = append(vals, b.sample(g, w.sample)...)
		}
		groups = append(groups, stats.Group{Name: name, Acc: accs[g], Values: vals[start:len(vals):len(vals)]})
	}
	return groups
}

// sampled returns how many values of group g the window's samples hold.
func (w *Window) sampled(g int) int {
	n := 0
	for i := w.closed.h; i < len(w.closed.q); i++ {
		n += len(w.closed.q[i].sample(g, w.sample))
	}
	for _, b := range w.open {
		n += len(b.sample(g, w.sample))
	}
	return n
}

// countGroups fills ev's bounds and counts for a count-based window and
// returns the groups to analyse.
func (w *Window) countGroups(ev *Evaluation, tNow int64) []stats.Group {
	from := int64(noLast)
	var groups []stats.Group
	for g, name := range w.names {
		r := &w.rings[g]
		c := GroupCount{Name: name, N: int64(r.n)}
		var acc stats.Accumulator
		var vals []float64
		var oldest, newest int64 = noLast, noLast
		if r.n > 0 {
			acc, vals, oldest, newest = r.summary(make([]float64, 0, r.n))
			c.Last = nsTime(newest)
			c.Silent = w.silentNs >= 0 && newest <= tNow-w.silentNs
		} else {
			c.Silent = true
		}
		ev.Counts[g] = c
		if c.Silent {
			ev.Silent = append(ev.Silent, name)
			continue
		}
		if from == noLast || oldest < from {
			from = oldest
		}
		groups = append(groups, stats.Group{Name: name, Acc: acc, Values: vals})
	}
	if from == noLast {
		from = tNow
	}
	ev.From, ev.To = nsTime(from), nsTime(tNow)
	return groups
}
