package window

import (
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/stats"
)

// TestBucketLookup: after values go in, Bucket returns exactly the state
// Buckets reports for the same bucket and group, for open and closed
// buckets, and nothing for a bucket or group without values.
func TestBucketLookup(t *testing.T) {
	w, err := New(Config{Bucket: time.Minute, Length: 10 * time.Minute, Lateness: 30 * time.Second, Sample: 4})
	if err != nil {
		t.Fatal(err)
	}
	l1, l2 := w.Group("L1"), w.Group("L2")
	t0 := time.Date(2026, 12, 1, 6, 0, 0, 0, time.UTC)
	for i := range 300 {
		ts := t0.Add(time.Duration(i) * 2 * time.Second)
		w.Add(l1, ts, 500+float64(i%7)*0.1)
		if i%3 == 0 {
			w.Add(l2, ts, 501+float64(i%5)*0.1)
		}
	}
	type key struct {
		start time.Time
		group int
	}
	want := map[key]stats.Accumulator{}
	// Bucket must be read before Buckets, which re-forms the stacks; the
	// states themselves do not change.
	got := map[key]stats.Accumulator{}
	for m := range 12 {
		start := t0.Add(time.Duration(m) * time.Minute)
		for _, g := range []int{l1, l2} {
			if acc, s, ok := w.Bucket(start, g); ok {
				if int64(len(s)) != min(acc.N, 4) {
					t.Errorf("%v group %d: %d sample values for n %d", start, g, len(s), acc.N)
				}
				got[key{start, g}] = acc
			}
		}
	}
	w.Buckets(func(start time.Time, g int, acc stats.Accumulator, _ []float64) {
		want[key{start, g}] = acc
	})
	if len(got) != len(want) || len(want) == 0 {
		t.Fatalf("Bucket found %d bucket-groups, Buckets %d", len(got), len(want))
	}
	for k, a := range want {
		if got[k] != a {
			t.Errorf("%v group %d: Bucket %+v, Buckets %+v", k.start, k.group, got[k], a)
		}
	}
	if _, _, ok := w.Bucket(t0.Add(-time.Hour), l1); ok {
		t.Errorf("a bucket outside the window was found")
	}
	if got := w.BucketStart(t0.Add(90 * time.Second)); !got.Equal(t0.Add(time.Minute)) {
		t.Errorf("BucketStart = %v", got)
	}
}
