package window

import "github.com/lockstep-project/lockstep/stats"

// ring is the last values of one group in a count-based window, with their
// event times, in arrival order: the oldest at head.
type ring struct {
	v    []float64
	t    []int64
	head int
	n    int
}

func newRing(count int) ring {
	return ring{v: make([]float64, count), t: make([]int64, count)}
}

// push appends a value, replacing the oldest when the ring is full.
func (r *ring) push(ns int64, v float64) {
	i := r.head + r.n
	if r.n == len(r.v) {
		i = r.head
		r.head++
		if r.head == len(r.v) {
			r.head = 0
		}
	} else {
		r.n++
	}
	if i >= len(r.v) {
		i -= len(r.v)
	}
	r.v[i], r.t[i] = v, ns
}

// at returns the i-th oldest value and its time (i < r.n).
func (r *ring) at(i int) (ns int64, v float64) {
	j := r.head + i
	if j >= len(r.v) {
		j -= len(r.v)
	}
	return r.t[j], r.v[j]
}

// acc returns the accumulator of the ring's values, built oldest first.
func (r *ring) acc() stats.Accumulator {
	var a stats.Accumulator
	for i := range r.n {
		_, v := r.at(i)
		a.Add(v)
	}
	return a
}

// summary returns the accumulator of the ring's values, built oldest first,
// the values in that order appended to dst, and the oldest and newest event
// times (noLast when the ring is empty).
// Cost O(Count): rebuilding keeps the result a function of the values alone
// (a restored ring sums exactly as the original, and acc gives the same
// accumulator), and the values are copied for the analysis anyway.
func (r *ring) summary(dst []float64) (acc stats.Accumulator, vals []float64, oldest, newest int64) {
	oldest, newest = noLast, noLast
	for i := range r.n {
		ns, v := r.at(i)
		acc.Add(v)
		dst = append(dst, v)
		if oldest == noLast || ns < oldest {
			oldest = ns
		}
		newest = max(newest, ns)
	}
	return acc, dst, oldest, newest
}

// addCount is Add for a count-based window.
func (w *Window) addCount(group int, ns int64, v float64) Result {
	if w.hasLatest && ns < w.latest-w.lateNs {
		w.totals.Late++
		return Late
	}
	if !w.hasLatest || ns > w.latest {
		w.latest, w.hasLatest = ns, true
	}
	w.rings[group].push(ns, v)
	w.totals.Added++
	return Added
}
