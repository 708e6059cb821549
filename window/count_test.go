package window

import (
	"slices"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/stats"
)

// values returns each group's values in a count-based window, oldest first,
// read through Buckets.
func values(w *Window) [][]float64 {
	out := make([][]float64, len(w.Groups()))
	w.Buckets(func(_ time.Time, g int, acc stats.Accumulator, sample []float64) {
		out[g] = append(out[g], sample...)
	})
	return out
}

// TestCountWindow: a slow capping line, one torque check per capping head
// every two minutes, analysed over the last five values of each head.
func TestCountWindow(t *testing.T) {
	w := newWindow(t, Config{Count: 5, Lateness: time.Minute, SilentAfter: 30 * time.Minute}, "H1", "H2", "H3")
	for i := range 7 {
		mustAdd(t, w, 0, at(time.Duration(2*i)*time.Minute), float64(i+1)/10, Added)
	}
	mustAdd(t, w, 1, at(11*time.Minute+30*time.Second), 0.25, Added)
	mustAdd(t, w, 1, at(12*time.Minute+30*time.Second), 0.35, Added)
	// Arrival order, not time order: 06:11:45 arrives after 06:12:30.
	mustAdd(t, w, 1, at(11*time.Minute+45*time.Second), 0.30, Added)
	// Older than the watermark (06:12:30 − 1 min).
	mustAdd(t, w, 1, at(11*time.Minute+29*time.Second), 9.9, Late)
	mustAdd(t, w, 2, at(11*time.Minute+50*time.Second), 0.4, Added)

	got := values(w)
	want := [][]float64{{0.3, 0.4, 0.5, 0.6, 0.7}, {0.25, 0.35, 0.30}, {0.4}}
	for g := range want {
		if !slices.Equal(got[g], want[g]) {
			t.Errorf("%s values %v, want %v", w.Groups()[g], got[g], want[g])
		}
	}
	if tot := w.Totals(); tot != (Totals{Added: 11, Late: 1}) {
		t.Errorf("totals %+v", tot)
	}

	ev := w.Evaluate(at(13*time.Minute), stats.Options{}, stats.Reference{})
	if ev.Buckets != 0 || !ev.From.Equal(at(4*time.Minute)) || !ev.To.Equal(at(13*time.Minute)) {
		t.Errorf("window [%v, %v], %d buckets; want [06:04, 06:13], 0", ev.From, ev.To, ev.Buckets)
	}
	for g, n := range []int64{5, 3, 1} {
		if ev.Counts[g].N != n || ev.Counts[g].Silent {
			t.Errorf("count %+v, want N %d, not silent", ev.Counts[g], n)
		}
	}
	if !ev.Counts[1].Last.Equal(at(12*time.Minute + 30*time.Second)) {
		t.Errorf("H2 last %v, want its newest event time 06:12:30", ev.Counts[1].Last)
	}
	if len(ev.Report.Groups) != 3 || ev.Report.Groups[0].N != 5 {
		t.Fatalf("report groups %+v", ev.Report.Groups)
	}
	sums := w.Sums(at(13*time.Minute), nil)
	var h1 stats.Accumulator // the five newest values, added oldest first
	for _, x := range want[0] {
		h1.Add(x)
	}
	if sums[0] != h1 {
		t.Errorf("H1 sums %+v, want %+v", sums[0], h1)
	}

	// H3 sent one value, at 06:11:50; thirty minutes later it is silent.
	ev = w.Evaluate(at(41*time.Minute+49*time.Second), stats.Options{}, stats.Reference{})
	if len(ev.Silent) != 0 {
		t.Errorf("silent %v at 06:41:49, want none", ev.Silent)
	}
	ev = w.Evaluate(at(41*time.Minute+50*time.Second), stats.Options{}, stats.Reference{})
	if !slices.Equal(ev.Silent, []string{"H3"}) || len(ev.Report.Groups) != 2 || ev.Counts[2].N != 1 {
		t.Errorf("silent %v, report groups %d, H3 %+v", ev.Silent, len(ev.Report.Groups), ev.Counts[2])
	}
	ev = w.Evaluate(at(42*time.Minute+30*time.Second), stats.Options{}, stats.Reference{})
	if !slices.Equal(ev.Silent, []string{"H1", "H2", "H3"}) || len(ev.Report.Groups) != 0 || !ev.From.Equal(ev.To) {
		t.Errorf("silent %v, report groups %d, window [%v, %v]", ev.Silent, len(ev.Report.Groups), ev.From, ev.To)
	}
}

func TestCountWindowDoesNotAllocate(t *testing.T) {
	w := newWindow(t, Config{Count: 50}, "H1", "H2")
	i := 0
	if n := testing.AllocsPerRun(1000, func() {
		i++
		w.Add(i%2, at(time.Duration(i)*time.Second), float64(i%13)*0.01)
	}); n != 0 {
		t.Errorf("%v allocations per Add, want 0", n)
	}
}
