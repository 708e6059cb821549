package window

import (
	"math/bits"

	"github.com/lockstep-project/lockstep/stats"
)

// bucket is one time slice of a time-based window: per-group accumulators
// and value samples. Slices are indexed by group; a bucket made before a
// group was interned is shorter, and a missing group counts as empty.
type bucket struct {
	idx int64               // bucket number: start = idx × Bucket since the Unix epoch
	acc []stats.Accumulator // the values of each group in this bucket
	// agg is the suffix aggregate while the bucket is in the front stack:
	// this bucket merged with every newer bucket of the front, per group.
	agg []stats.Accumulator
	// samp holds group g's sample in samp[g·S : g·S + min(acc[g].N, S)],
	// S the window's Sample; capacity is reserved for every group.
	samp []float64
}

// reset makes b an empty bucket number idx for ng groups, reusing its
// memory.
func (b *bucket) reset(idx int64, ng, sample int) {
	b.idx = idx
	b.acc = b.acc[:0]
	b.agg = b.agg[:0]
	b.samp = b.samp[:0]
	b.grow(ng, sample)
}

// grow extends b to ng groups; new groups are empty.
func (b *bucket) grow(ng, sample int) {
	if len(b.acc) >= ng {
		return
	}
	b.acc = growAcc(b.acc, ng)
	if need := ng * sample; len(b.samp) < need {
		if cap(b.samp) >= need {
			b.samp = b.samp[:need]
		} else {
			s := make([]float64, need)
			copy(s, b.samp)
			b.samp = s
		}
	}
}

// growAcc returns a with length n, the new elements zero (empty).
func growAcc(a []stats.Accumulator, n int) []stats.Accumulator {
	if len(a) >= n {
		return a
	}
	if cap(a) >= n {
		old := len(a)
		a = a[:n]
		clear(a[old:])
		return a
	}
	b := make([]stats.Accumulator, n)
	copy(b, a)
	return b
}

// add adds value v of group g (g < len(b.acc)), keeping up to sample
// values by reservoir sampling.
func (b *bucket) add(g int, v float64, sample int) {
	a := &b.acc[g]
	a.Add(v)
	if sample <= 0 {
		return
	}
	base := g * sample
	if a.N <= int64(sample) {
		b.samp[base+int(a.N)-1] = v
		return
	}
	if j := reservoirIndex(b.idx, g, a.N); j < uint64(sample) {
		b.samp[base+int(j)] = v
	}
}

// sample returns group g's kept values (aliasing b's memory).
func (b *bucket) sample(g, sample int) []float64 {
	if g >= len(b.acc) || sample <= 0 {
		return nil
	}
	n := int(min(b.acc[g].N, int64(sample)))
	return b.samp[g*sample : g*sample+n]
}

// SplitMix64 (G. L. Steele, D. Lea and C. H. Flood, "Fast splittable
// pseudorandom number generators", OOPSLA 2014): the n-th output of the
// generator with seed s is mix64(s + n·gamma).
const splitGamma = 0x9e3779b97f4a7c15

func mix64(z uint64) uint64 {
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

// reservoirIndex returns the slot, uniform on [0, n), that the n-th value of
// group g in bucket idx is offered (Algorithm R): the n-th SplitMix64 output
// for the seed of (idx, g), scaled to [0, n) by taking the high word of a
// 64×64-bit product (D. Lemire, "Fast random integer generation in an
// interval", ACM TOMACS 29(1), 2019, without its rejection step), whose
// bias is below n/2⁶⁴.
func reservoirIndex(idx int64, g int, n int64) uint64 {
	seed := mix64(mix64(uint64(idx)) ^ uint64(g))
	r := mix64(seed + uint64(n)*splitGamma)
	hi, _ := bits.Mul64(r, uint64(n))
	return hi
}

// mergeInto merges src into dst group by group (len(dst) ≥ len(src)).
func mergeInto(dst, src []stats.Accumulator) {
	for g := range src {
		dst[g].Merge(src[g])
	}
}

// queue is the closed buckets of a time-based window, oldest first, as a
// two-stacks sliding aggregation: q[h:f] is the front stack, whose buckets
// carry suffix aggregates (q[i].agg = q[i] ⊕ … ⊕ q[f−1]), and q[f:] the
// back stack, summarised by the running aggregate back (q[f] ⊕ … in order).
// The aggregate of every closed bucket is then q[h].agg ⊕ back. Pushing
// merges once into back; popping drops q[h]; when the front is empty, a pop
// first flips: the suffix aggregates of all of q are recomputed, newest to
// oldest, and back is cleared. A bucket passes from back to front once, so
// push and pop cost O(groups) amortised (a flip costs O(groups × buckets)
// about once per window length; Buckets adds one flip per call).
//
// Accumulators cannot be subtracted robustly (removing a part from mean and
// M2 cancels catastrophically), which is why the window is a queue of two
// stacks rather than one running sum. This is the common "two-stacks"
// sliding-window aggregation; K. Tangwongsan, M. Hirzel and S. Schneider,
// "Low-latency sliding-window aggregation in worst-case constant time",
// DEBS 2017, describe the family and its worst-case refinement, which this
// amortised version does not need.
//
// Merge order is fixed, older on the left, so results depend only on which
// buckets were flipped together; flip also serves as the canonical re-form
// that Buckets and Restore rely on.
type queue struct {
	q      []*bucket
	h, f   int
	back   []stats.Accumulator
	merges int // bucket merges done (each O(groups)), for tests of cost
}

func (s *queue) len() int { return len(s.q) - s.h }

// oldest returns the oldest closed bucket, or nil.
func (s *queue) oldest() *bucket {
	if s.h == len(s.q) {
		return nil
	}
	return s.q[s.h]
}

// push appends the newest closed bucket.
func (s *queue) push(b *bucket, ng int) {
	s.q = append(s.q, b)
	s.back = growAcc(s.back, ng)
	mergeInto(s.back, b.acc)
	s.merges++
}

// pop removes and returns the oldest closed bucket (s.len() > 0).
func (s *queue) pop(ng int) *bucket {
	if s.h == s.f {
		s.flip(ng)
	}
	b := s.q[s.h]
	s.q[s.h] = nil
	s.h++
	return b
}

// flip moves every closed bucket into the front stack and clears back:
// q[i].agg = q[i] ⊕ (q[i+1] ⊕ (… ⊕ q[n−1])).
func (s *queue) flip(ng int) {
	if s.h > 0 {
		n := copy(s.q, s.q[s.h:])
		clear(s.q[n:])
		s.q = s.q[:n]
		s.h = 0
	}
	for i := len(s.q) - 1; i >= 0; i-- {
		b := s.q[i]
		b.agg = growAcc(b.agg[:0], ng)
		copy(b.agg, b.acc)
		if i+1 < len(s.q) {
			mergeInto(b.agg, s.q[i+1].agg)
			s.merges++
		}
	}
	s.f = len(s.q)
	clear(s.back)
}

// aggregate merges the aggregate of every closed bucket into dst
// (len(dst) = ng, dst empty on entry).
func (s *queue) aggregate(dst []stats.Accumulator) {
	if s.h < s.f {
		copy(dst, s.q[s.h].agg)
		s.merges++
	}
	mergeInto(dst, s.back)
	s.merges++
}
