package window

import (
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/stats"
)

// minuteValues adds, for minute i of the shift (i = 0..n−1), the value i to
// L1 and 10·i to L2 at 30 s past the minute.
func minuteValues(t *testing.T, w *Window, n int) {
	t.Helper()
	for i := range n {
		mustAdd(t, w, 0, at(time.Duration(i)*time.Minute+30*time.Second), float64(i), Added)
		mustAdd(t, w, 1, at(time.Duration(i)*time.Minute+30*time.Second), 10*float64(i), Added)
	}
}

// accOfValues returns the accumulator of xs.
func accOfValues(xs ...float64) stats.Accumulator {
	var a stats.Accumulator
	for _, x := range xs {
		a.Add(x)
	}
	return a
}

func TestSpanSums(t *testing.T) {
	w := newWindow(t, Config{Bucket: time.Minute, Length: 10 * time.Minute}, "L1", "L2")
	minuteValues(t, w, 8) // minutes 0..7 hold values 0..7
	tests := []struct {
		name   string
		now    time.Duration
		length time.Duration
		want   []float64 // L1's values
	}{
		{"last whole minute", 8 * time.Minute, time.Minute, []float64{7}},
		{"phase within the minute does not matter", 8*time.Minute + 40*time.Second, time.Minute, []float64{7}},
		{"open bucket left out", 7*time.Minute + 50*time.Second, time.Minute, []float64{6}},
		{"three minutes", 8 * time.Minute, 3 * time.Minute, []float64{5, 6, 7}},
		{"shorter than a bucket counts as one", 8 * time.Minute, 10 * time.Second, []float64{7}},
		{"longer than the data", 8 * time.Minute, 30 * time.Minute, []float64{0, 1, 2, 3, 4, 5, 6, 7}},
		{"empty ahead", 20 * time.Minute, time.Minute, nil},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got := w.SpanSums(at(tt.now), tt.length, nil)
			if len(got) != 2 {
				t.Fatalf("%d accumulators, want 2", len(got))
			}
			want := accOfValues(tt.want...)
			if got[0].N != want.N || !closeTo(got[0].Mean, want.Mean) || !closeTo(got[0].M2, want.M2) {
				t.Errorf("L1: %+v, want %+v", got[0], want)
			}
			if got[1].N != want.N || !closeTo(got[1].Mean, 10*want.Mean) {
				t.Errorf("L2: %+v, want mean %v", got[1], 10*want.Mean)
			}
		})
	}
}

func closeTo(a, b float64) bool {
	d := a - b
	return d < 1e-9 && d > -1e-9
}

func TestSpanSumsMatchesSums(t *testing.T) {
	w := newWindow(t, Config{Bucket: time.Minute, Length: 5 * time.Minute, Lateness: -1}, "L1", "L2")
	minuteValues(t, w, 12)
	// At 12:00 exactly, the window is buckets 8..12, bucket 12 empty: the
	// same values as the span of the last five whole minutes minus the
	// oldest, 7..11 vs 8..11.
	sums := w.Sums(at(12*time.Minute), nil)
	span := w.SpanSums(at(12*time.Minute), 4*time.Minute, nil)
	for g := range 2 {
		if sums[g].N != span[g].N || !closeTo(sums[g].Mean, span[g].Mean) || !closeTo(sums[g].M2, span[g].M2) {
			t.Errorf("group %d: Sums %+v, SpanSums %+v", g, sums[g], span[g])
		}
	}
}

func TestEndedSums(t *testing.T) {
	w := newWindow(t, Config{Bucket: time.Minute, Length: 30 * time.Minute}, "L1", "L2")
	minuteValues(t, w, 6)
	tests := []struct {
		name       string
		after, now time.Duration
		want       []float64
	}{
		{"one evaluation a minute", 4 * time.Minute, 5 * time.Minute, []float64{4}},
		{"off the minute", 4*time.Minute + 20*time.Second, 5*time.Minute + 20*time.Second, []float64{4}},
		{"two minutes", 3 * time.Minute, 5 * time.Minute, []float64{3, 4}},
		{"nothing ended", 5*time.Minute + 10*time.Second, 5*time.Minute + 50*time.Second, nil},
		{"now before after", 5 * time.Minute, 4 * time.Minute, nil},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got := w.EndedSums(at(tt.after), at(tt.now), nil)
			want := accOfValues(tt.want...)
			if got[0].N != want.N || !closeTo(got[0].Mean, want.Mean) {
				t.Errorf("L1: %+v, want %+v", got[0], want)
			}
		})
	}
	all := w.EndedSums(time.Time{}, at(6*time.Minute), nil)
	if all[0].N != 6 {
		t.Errorf("zero after: %d values, want all 6", all[0].N)
	}
	// Consecutive evaluations hand each bucket over once.
	var n int64
	prev := time.Time{}
	for s := 0; s <= 400; s += 37 {
		now := at(time.Duration(s) * time.Second)
		n += w.EndedSums(prev, now, nil)[0].N
		prev = now
	}
	if n != 6 {
		t.Errorf("evaluations every 37 s took %d values, want each of the 6 once", n)
	}
}

func TestSpanSumsCountBased(t *testing.T) {
	w := newWindow(t, Config{Count: 3}, "L1")
	for i := range 5 {
		mustAdd(t, w, 0, at(time.Duration(i)*time.Second), float64(i), Added)
	}
	if got := w.SpanSums(at(time.Minute), time.Minute, nil); got[0].N != 3 {
		t.Errorf("count-based SpanSums: %+v, want the last 3 values", got[0])
	}
	if got := w.EndedSums(time.Time{}, at(time.Minute), nil); got[0].N != 0 {
		t.Errorf("count-based EndedSums: %+v, want empty", got[0])
	}
}

// TestSpanSumsKeep: a span of the window's own length, which leaves out the
// open bucket, reaches one bucket before the window. Without Keep that
// bucket is gone and the span holds Length − Bucket of values; with Keep of
// one bucket it holds the whole Length. Keep changes neither Sums nor
// Evaluate, and keeps no more than Keep of retired buckets.
func TestSpanSumsKeep(t *testing.T) {
	const n = 40 // minutes 0..39 hold values 0..39
	for _, tc := range []struct {
		keep time.Duration
		want []float64 // L1's values in the 5-minute span at 40:00
	}{
		{0, []float64{36, 37, 38, 39}},
		{time.Minute, []float64{35, 36, 37, 38, 39}},
		{3 * time.Minute, []float64{35, 36, 37, 38, 39}},
	} {
		w := newWindow(t, Config{Bucket: time.Minute, Length: 5 * time.Minute, Lateness: -1, Keep: tc.keep}, "L1", "L2")
		minuteValues(t, w, n)
		now := at(n * time.Minute)
		sums := w.Sums(now, nil)
		if want := accOfValues(36, 37, 38, 39); sums[0].N != want.N || !closeTo(sums[0].Mean, want.Mean) {
			t.Errorf("keep %v: Sums %+v, want %+v (Keep must not reach the window's sums)", tc.keep, sums[0], want)
		}
		got := w.SpanSums(now, 5*time.Minute, nil)
		if want := accOfValues(tc.want...); got[0].N != want.N || !closeTo(got[0].Mean, want.Mean) || !closeTo(got[0].M2, want.M2) {
			t.Errorf("keep %v: SpanSums %+v, want %+v", tc.keep, got[0], want)
		}
		if long := w.SpanSums(now, 8*time.Minute, nil); long[0].N != int64(4+tc.keep/time.Minute) {
			t.Errorf("keep %v: an 8-minute span holds %d values, want %d (the window's 4 whole buckets and Keep's)", tc.keep, long[0].N, 4+tc.keep/time.Minute)
		}
		if int64(len(w.retired)) > w.keepN {
			t.Errorf("keep %v: %d retired buckets, more than %d", tc.keep, len(w.retired), w.keepN)
		}
	}
	if err := (Config{Bucket: time.Minute, Keep: 90 * time.Second}).Validate(); err == nil {
		t.Error("Keep of 1m30s with 1-minute buckets validated; want an error")
	}
	if err := (Config{Keep: -time.Minute}).Validate(); err == nil {
		t.Error("a negative Keep validated; want an error")
	}
}
