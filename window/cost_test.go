package window

import (
	"fmt"
	"runtime"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/stats"
)

// slidingStream fills a window of one-second buckets, span of them, with
// four lines sending perBucket values a second each, for the given seconds
// from second first on.
func slidingStream(w *Window, first, seconds, perBucket int) {
	for s := first; s < first+seconds; s++ {
		for i := range perBucket {
			for g := range 4 {
				ns := time.Duration(s)*time.Second + time.Duration(i*4+g)*time.Second/time.Duration(4*perBucket)
				w.Add(g, at(ns), 0.01*float64((s*7+i*3+g)%23)-0.1)
			}
		}
	}
}

func slidingWindow(t testing.TB, span, sample int) *Window {
	return newWindow(t, Config{Bucket: time.Second, Length: time.Duration(span) * time.Second, Lateness: 2 * time.Second, Sample: sample},
		"L1", "L2", "L3", "L4")
}

// TestSumsCostIndependentOfLength counts bucket merges (each O(groups))
// while a window slides a bucket at a time and is summed at each step: the
// count per step must not grow with the window's length. A naive sum would
// merge every bucket, 10 or 1440 per step.
func TestSumsCostIndependentOfLength(t *testing.T) {
	perStep := map[int]float64{}
	for _, span := range []int{10, 1440} {
		w := slidingWindow(t, span, 8)
		slidingStream(w, 0, 3*span, 2)
		w.closed.merges = 0
		const steps = 3000
		dst := make([]stats.Accumulator, 0, 4)
		for s := 3 * span; s < 3*span+steps; s++ {
			slidingStream(w, s, 1, 2)
			dst = w.Sums(at(time.Duration(s)*time.Second+time.Second/2), dst)
		}
		perStep[span] = float64(w.closed.merges) / steps
		if dst[0].N != int64(2*span) {
			t.Fatalf("%d buckets: L1 has %d values, want %d", span, dst[0].N, 2*span)
		}
	}
	t.Logf("bucket merges per step: %.2f with 10 buckets, %.2f with 1440", perStep[10], perStep[1440])
	for span, m := range perStep {
		if m > 8 {
			t.Errorf("%d buckets: %.2f bucket merges per step, want at most 8", span, m)
		}
	}
}

// heapInUse returns the bytes of live heap objects after a collection.
func heapInUse() uint64 {
	runtime.GC()
	runtime.GC()
	var m runtime.MemStats
	runtime.ReadMemStats(&m)
	return m.HeapAlloc
}

// memoryPerGroupBucket measures the heap a full window holds per group and
// bucket: four lines, 1440 one-second buckets, each bucket of each line
// holding more values than the sample keeps.
func memoryPerGroupBucket(t testing.TB, sample int) float64 {
	const span = 1440
	before := heapInUse()
	w := slidingWindow(t, span, sample)
	slidingStream(w, 0, span+5, sample/4+4)
	w.Sums(at((span+5)*time.Second), nil)
	after := heapInUse()
	held := w.closed.len() + len(w.open) + len(w.free)
	runtime.KeepAlive(w)
	return float64(after-before) / float64(4*held)
}

// TestMemoryPerGroupBucket: a bucket costs each group two accumulators
// (its own and the suffix aggregate, 2 × 40 bytes) and Sample × 8 bytes of
// sample, plus the bucket's own header shared by the groups.
func TestMemoryPerGroupBucket(t *testing.T) {
	for _, sample := range []int{64, 8} {
		got := memoryPerGroupBucket(t, sample)
		want := float64(2*40 + 8*sample)
		t.Logf("Sample %d: %.0f bytes per group and bucket (accumulators and sample alone: %.0f)", sample, got, want)
		if got < 0.9*want || got > 1.15*want+40 {
			t.Errorf("Sample %d: %.0f bytes per group and bucket, want about %.0f", sample, got, want)
		}
	}
}

// Baselines, measured in the same run: BenchmarkEvaluate/naive/… merges
// every bucket of the window per step (the O(buckets) recomputation the
// two stacks replace); compare sums/buckets=1440 with sums/buckets=10 and
// with naive/buckets=1440 as ratios. full/… is the whole Evaluate, with
// the values and stats.Analyse, at a fixed now.
func BenchmarkEvaluate(b *testing.B) {
	spans := []int{10, 1440}
	for _, span := range spans {
		b.Run(fmt.Sprintf("sums/buckets=%d", span), func(b *testing.B) {
			w := slidingWindow(b, span, 8)
			slidingStream(w, 0, 2*span, 2)
			dst := make([]stats.Accumulator, 0, 4)
			s := 2 * span
			b.ReportAllocs()
			for b.Loop() {
				slidingStream(w, s, 1, 1)
				dst = w.Sums(at(time.Duration(s)*time.Second+time.Second/2), dst)
				s++
			}
		})
	}
	for _, span := range spans {
		b.Run(fmt.Sprintf("naive/buckets=%d", span), func(b *testing.B) {
			w := slidingWindow(b, span, 8)
			slidingStream(w, 0, 2*span, 2)
			dst := make([]stats.Accumulator, 4)
			s := 2 * span
			b.ReportAllocs()
			for b.Loop() {
				slidingStream(w, s, 1, 1)
				w.observe(at(time.Duration(s)*time.Second + time.Second/2))
				clear(dst)
				for _, bk := range w.closed.q[w.closed.h:] {
					mergeInto(dst, bk.acc)
				}
				for _, bk := range w.open {
					mergeInto(dst, bk.acc)
				}
				s++
			}
		})
	}
	for _, span := range spans {
		b.Run(fmt.Sprintf("full/buckets=%d", span), func(b *testing.B) {
			w := slidingWindow(b, span, 8)
			slidingStream(w, 0, 2*span, 8)
			now := at(time.Duration(2*span) * time.Second)
			b.ReportAllocs()
			for b.Loop() {
				w.Evaluate(now, stats.Options{}, stats.Reference{})
			}
		})
	}
}

func BenchmarkAdd(b *testing.B) {
	b.Run("same bucket", func(b *testing.B) {
		w := slidingWindow(b, 30, 64)
		i := 0
		b.ReportAllocs()
		for b.Loop() {
			i++
			w.Add(i&3, at(time.Duration(i&1023)*time.Microsecond), 0.001*float64(i%89))
		}
	})
	b.Run("steady stream", func(b *testing.B) {
		// 40 values a second over 1-second buckets: closing, eviction,
		// flips and bucket reuse included.
		w := slidingWindow(b, 30, 64)
		i := 0
		add := func() {
			i++
			w.Add(i&3, at(time.Duration(i)*25*time.Millisecond), 0.001*float64(i%89))
		}
		for range 10000 {
			add()
		}
		b.ReportAllocs()
		for b.Loop() {
			add()
		}
	})
	b.Run("count-based", func(b *testing.B) {
		w := newWindow(b, Config{Count: 500}, "L1", "L2", "L3", "L4")
		i := 0
		b.ReportAllocs()
		for b.Loop() {
			i++
			w.Add(i&3, at(time.Duration(i)*25*time.Millisecond), 0.001*float64(i%89))
		}
	})
}
