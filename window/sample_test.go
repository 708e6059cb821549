package window

import (
	"slices"
	"testing"
	"time"
)

// sampleOf fills one bucket of group g with the values and returns the
// group's kept sample.
func sampleOf(t *testing.T, cfg Config, start time.Time, g int, vals []float64) []float64 {
	t.Helper()
	w := newWindow(t, cfg, "L1", "L2")
	for i, v := range vals {
		mustAdd(t, w, g, start.Add(time.Duration(i)), v, Added)
	}
	rs := buckets(w)
	if len(rs) != 1 || rs[0].acc.N != int64(len(vals)) {
		t.Fatalf("buckets %+v, want one with %d values", rs, len(vals))
	}
	return rs[0].sample
}

func seq(n int) []float64 {
	xs := make([]float64, n)
	for i := range xs {
		xs[i] = float64(i)
	}
	return xs
}

func TestSampleKeepsEverythingUpToSample(t *testing.T) {
	got := sampleOf(t, Config{Sample: 64}, at(0), 0, seq(40))
	if !slices.Equal(got, seq(40)) {
		t.Errorf("sample %v, want all 40 values in arrival order", got)
	}
	if got := sampleOf(t, Config{Sample: -1}, at(0), 0, seq(40)); len(got) != 0 {
		t.Errorf("Sample −1 kept %v", got)
	}
}

func TestSampleIsASubsetAndReproducible(t *testing.T) {
	cfg := Config{Sample: 64}
	a := sampleOf(t, cfg, at(0), 0, seq(1000))
	if len(a) != 64 {
		t.Fatalf("kept %d values, want 64", len(a))
	}
	seen := map[float64]bool{}
	for _, x := range a {
		if seen[x] || x != float64(int(x)) || x < 0 || x >= 1000 {
			t.Fatalf("sample %v is not a subset of the 1000 values", a)
		}
		seen[x] = true
	}
	if b := sampleOf(t, cfg, at(0), 0, seq(1000)); !slices.Equal(a, b) {
		t.Errorf("same values, same bucket and group, different samples")
	}
	if b := sampleOf(t, cfg, at(time.Minute), 0, seq(1000)); slices.Equal(a, b) {
		t.Errorf("another bucket drew the same sample: the seed ignores the bucket start")
	}
	if b := sampleOf(t, cfg, at(0), 1, seq(1000)); slices.Equal(a, b) {
		t.Errorf("another group drew the same sample: the seed ignores the group")
	}
}

// TestSampleIsUniform: 400 buckets of 256 values keep 16 each; every eighth
// of the arrival order must be kept about equally often. The counts are a
// fixed outcome of the seeds; the bound is χ² with 7 df at p = 0.001.
func TestSampleIsUniform(t *testing.T) {
	const nb, n, keep, parts = 400, 256, 16, 8
	w := newWindow(t, Config{Bucket: time.Second, Length: 1000 * time.Second, Lateness: -1, Sample: keep}, "L1")
	for b := range nb {
		for i := range n {
			mustAdd(t, w, 0, at(time.Duration(b)*time.Second+time.Duration(i)), float64(i), Added)
		}
	}
	var counts [parts]float64
	kept := 0
	for _, r := range buckets(w) {
		for _, x := range r.sample {
			counts[int(x)*parts/n]++
			kept++
		}
	}
	if kept != nb*keep {
		t.Fatalf("kept %d values, want %d", kept, nb*keep)
	}
	expect := float64(kept) / parts
	chi2 := 0.0
	for _, c := range counts {
		chi2 += (c - expect) * (c - expect) / expect
	}
	if chi2 > 24.32 {
		t.Errorf("kept per eighth of the bucket %v (expected %v each): χ² %.1f > 24.32", counts, expect, chi2)
	}
}
