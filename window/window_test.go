package window

import (
	"math"
	"slices"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/stats"
)

func TestBucketPlacement(t *testing.T) {
	epoch := time.Unix(0, 0).UTC()
	tests := []struct {
		name   string
		bucket time.Duration
		t      time.Time
		want   time.Time // start of the bucket the value lands in
	}{
		{"on a boundary", time.Minute, at(0), at(0)},
		{"just before the next", time.Minute, at(time.Minute - time.Nanosecond), at(0)},
		{"next boundary", time.Minute, at(time.Minute), at(time.Minute)},
		{"odd width, after a boundary", 7 * time.Second, at(3 * time.Second), at(-time.Second)},
		{"odd width, on a boundary", 7 * time.Second, at(-time.Second), at(-time.Second)},
		{"odd width, before a boundary", 7 * time.Second, at(-2 * time.Second), at(-8 * time.Second)},
		{"before the epoch, floor not truncation", time.Minute, epoch.Add(-30 * time.Second), epoch.Add(-time.Minute)},
		{"before the epoch, odd width", 7 * time.Second, epoch.Add(-30 * time.Second), epoch.Add(-35 * time.Second)},
		{"time zone does not matter", time.Hour,
			time.Date(2026, 3, 2, 7, 59, 0, 0, time.FixedZone("CET", 3600)), at(0)},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			w := newWindow(t, Config{Bucket: tt.bucket, Length: 10 * tt.bucket}, "L1")
			mustAdd(t, w, 0, tt.t, 0.4, Added)
			got := buckets(w)
			if len(got) != 1 || !got[0].start.Equal(tt.want) {
				t.Fatalf("buckets %+v, want one starting at %v", got, tt.want)
			}
		})
	}
}

// TestWatermark: values reach the window unless their bucket has closed;
// late values are counted and appear in no sum.
func TestWatermark(t *testing.T) {
	type step struct {
		at   time.Duration
		v    float64
		want Result
	}
	const late = 9.9 // late values stand out in Max
	tests := []struct {
		name     string
		lateness time.Duration
		steps    []step
		wantN    int64
		wantMax  float64
	}{
		{"in order", 90 * time.Second, []step{
			{10 * time.Second, 0.1, Added}, {70 * time.Second, 0.2, Added}, {130 * time.Second, 0.3, Added},
		}, 3, 0.3},
		{"out of order within the lateness", 90 * time.Second, []step{
			{10 * time.Second, 0.1, Added},
			{200 * time.Second, 0.2, Added}, // watermark 06:01:50: bucket 06:00 closed
			{90 * time.Second, 0.3, Added},  // bucket 06:01 ends 06:02, still open
			{59 * time.Second, late, Late},  // bucket 06:00 closed
			{110 * time.Second, 0.4, Added}, // on the watermark itself, bucket open
			{230 * time.Second, 0.5, Added}, // watermark 06:02:20: bucket 06:01 closes
			{120*time.Second - 1, late, Late},
			{120 * time.Second, 0.6, Added},
		}, 6, 0.6},
		{"bucket ending on the watermark is closed", 90 * time.Second, []step{
			{210 * time.Second, 0.1, Added}, // watermark 06:02:00
			{119 * time.Second, late, Late}, // bucket 06:01 ends at 06:02
			{120 * time.Second, 0.2, Added},
		}, 2, 0.2},
		{"no lateness", -1, []step{
			{30 * time.Second, 0.1, Added},
			{10 * time.Second, 0.2, Added}, // same bucket as the newest: open
			{60 * time.Second, 0.3, Added}, // watermark 06:01:00 closes bucket 06:00
			{59 * time.Second, late, Late},
		}, 3, 0.3},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			w := newWindow(t, Config{Bucket: time.Minute, Length: 10 * time.Minute, Lateness: tt.lateness}, "L1")
			var lates uint64
			for _, s := range tt.steps {
				mustAdd(t, w, 0, at(s.at), s.v, s.want)
				if s.want == Late {
					lates++
				}
			}
			if got := w.Totals(); got.Late != lates || got.Added != uint64(len(tt.steps))-lates {
				t.Errorf("totals %+v, want %d late", got, lates)
			}
			acc := w.Sums(at(5*time.Minute), nil)[0]
			if acc.N != tt.wantN || acc.Max != tt.wantMax {
				t.Errorf("sums N %d max %v, want N %d max %v (late values in no sum)", acc.N, acc.Max, tt.wantN, tt.wantMax)
			}
		})
	}
}

// TestExpired: after a quiet spell the window has moved on with now while
// the watermark stayed; a value for a bucket before the window is expired.
func TestExpired(t *testing.T) {
	w := newWindow(t, Config{Bucket: time.Minute, Length: 10 * time.Minute}, "L1", "L2")
	mustAdd(t, w, 0, at(10*time.Second), 0.1, Added)
	w.Evaluate(at(30*time.Minute), stats.Options{}, stats.Reference{})
	// Watermark 05:59:10: bucket 06:00 is not closed, but the window is
	// [06:21, 06:31).
	mustAdd(t, w, 1, at(20*time.Second), 0.2, Expired)
	mustAdd(t, w, 1, at(21*time.Minute), 0.3, Added)
	mustAdd(t, w, 1, at(20*time.Minute+59*time.Second), 0.4, Expired)
	if got := w.Totals(); got != (Totals{Added: 2, Expired: 2}) {
		t.Errorf("totals %+v", got)
	}
	if got := w.Sums(at(30*time.Minute), nil); got[0].N != 0 || got[1].N != 1 || got[1].Mean != 0.3 {
		t.Errorf("sums %+v, want only L2's 0.3", got)
	}
}

func TestRejected(t *testing.T) {
	w := newWindow(t, Config{}, "L1")
	for _, c := range []struct {
		t time.Time
		v float64
	}{
		{at(0), math.NaN()},
		{at(0), math.Inf(1)},
		{at(0), math.Inf(-1)},
		{time.Time{}, 0.1},
		{time.Date(2200, 1, 1, 0, 0, 0, 0, time.UTC), 0.1},
		{time.Date(1800, 1, 1, 0, 0, 0, 0, time.UTC), 0.1},
	} {
		mustAdd(t, w, 0, c.t, c.v, Rejected)
	}
	mustAdd(t, w, 0, time.Date(2116, 1, 1, 0, 0, 0, 0, time.UTC), 0.1, Added)
	if got := w.Totals(); got != (Totals{Added: 1, Rejected: 6}) {
		t.Errorf("totals %+v", got)
	}
	defer func() {
		if recover() == nil {
			t.Error("Add for a group never interned did not panic")
		}
	}()
	w.Add(1, at(0), 0.1)
}

// TestEviction: a five-minute window over ten minutes of two lines; buckets
// older than now − Length fall out.
func TestEviction(t *testing.T) {
	w := newWindow(t, Config{Bucket: time.Minute, Length: 5 * time.Minute, Lateness: 30 * time.Second}, "L1", "L2")
	for m := range 10 {
		mustAdd(t, w, 0, at(time.Duration(m)*time.Minute+30*time.Second), float64(m), Added)
		mustAdd(t, w, 1, at(time.Duration(m)*time.Minute+40*time.Second), float64(m)+0.5, Added)
	}
	tests := []struct {
		now      time.Duration
		from, to time.Duration
		buckets  int
		n        int64
		mean     float64 // of L1
	}{
		{9*time.Minute + 45*time.Second, 5 * time.Minute, 10 * time.Minute, 5, 5, 7},
		{12 * time.Minute, 8 * time.Minute, 13 * time.Minute, 2, 2, 8.5},
		{13*time.Minute + 59*time.Second, 9 * time.Minute, 14 * time.Minute, 1, 1, 9},
		{14 * time.Minute, 10 * time.Minute, 15 * time.Minute, 0, 0, 0},
	}
	for _, tt := range tests {
		ev := w.Evaluate(at(tt.now), stats.Options{}, stats.Reference{})
		if !ev.From.Equal(at(tt.from)) || !ev.To.Equal(at(tt.to)) || ev.Buckets != tt.buckets {
			t.Errorf("now %v: window [%v, %v) of %d buckets, want [%v, %v) of %d",
				tt.now, ev.From.Sub(shift), ev.To.Sub(shift), ev.Buckets, tt.from, tt.to, tt.buckets)
		}
		if ev.Counts[0].N != tt.n || ev.Counts[1].N != tt.n {
			t.Errorf("now %v: counts %+v, want %d each", tt.now, ev.Counts, tt.n)
		}
		if tt.n > 0 && (len(ev.Report.Groups) != 2 || ev.Report.Groups[0].Mean != tt.mean) {
			t.Errorf("now %v: report groups %+v, want L1 mean %v", tt.now, ev.Report.Groups, tt.mean)
		}
		if tt.n == 0 && (len(ev.Report.Groups) != 0 || !slices.Equal(ev.Silent, []string{"L1", "L2"})) {
			t.Errorf("now %v: empty window: report groups %+v, silent %v", tt.now, ev.Report.Groups, ev.Silent)
		}
	}
	if n := w.closed.len() + len(w.open); n != 0 {
		t.Errorf("window holds %d buckets after they all fell out", n)
	}
}

// TestOpenBucketIncluded: forty seconds into a shift every value is in the
// open bucket, and the report has them all.
func TestOpenBucketIncluded(t *testing.T) {
	w := newWindow(t, Config{}, "L1", "L2", "L3")
	d, _ := stats.ParseDecimal("500")
	ref := stats.NewReference(d)
	fills := [][]float64{
		{0.2, -0.1, 0.3, 0.0, 0.1},
		{0.4, 0.6, 0.5, 0.3, 0.7},
		{-0.2, 0.1, 0.0, -0.1, 0.2},
	}
	for i := range 5 {
		for g := range fills {
			mustAdd(t, w, g, at(time.Duration(8*i+g)*time.Second), fills[g][i], Added)
		}
	}
	ev := w.Evaluate(at(40*time.Second), stats.Options{}, ref)
	if w.closed.len() != 0 || len(w.open) != 1 {
		t.Fatalf("%d closed and %d open buckets, want only the open one", w.closed.len(), len(w.open))
	}
	if ev.Buckets != 1 || !ev.To.Equal(at(time.Minute)) || !ev.From.Equal(at(-29*time.Minute)) {
		t.Errorf("window [%v, %v) of %d buckets", ev.From, ev.To, ev.Buckets)
	}
	if len(ev.Report.Groups) != 3 || ev.Report.Table.K != 3 || ev.Report.Table.N != 15 {
		t.Fatalf("report groups %+v, table K %d N %d", ev.Report.Groups, ev.Report.Table.K, ev.Report.Table.N)
	}
	for g, want := range []float64{500.1, 500.5, 500.0} {
		if got := ev.Report.Groups[g].Mean; math.Abs(got-want) > 1e-12 {
			t.Errorf("%s mean %v, want %v (uncentred on the reference)", ev.Report.Groups[g].Name, got, want)
		}
	}
	if ev.Report.Levene == nil || ev.Report.KruskalWallis == nil {
		t.Errorf("value-based tests missing: notes %q", ev.Report.Notes)
	}
}

// TestSilentGroups: line L4 stops at 06:05:50; with SilentAfter 10 min it is
// silent from the moment its last bucket (06:05–06:06) ended ten minutes
// ago, and leaves the report then; L5 was named but never sent a value.
func TestSilentGroups(t *testing.T) {
	tests := []struct {
		name       string
		silent     time.Duration
		now        time.Duration
		wantSilent []string
		wantN      int64 // L4's values in the window
	}{
		{"L4 quiet for 9 min 59 s", 10 * time.Minute, 15*time.Minute + 59*time.Second, []string{"L5"}, 18},
		{"L4's last bucket ended 10 min ago", 10 * time.Minute, 16 * time.Minute, []string{"L4", "L5"}, 18},
		{"silence off: L4 still in the window", -1, 34*time.Minute + 59*time.Second, []string{"L5"}, 3},
		{"silence off: L4 out of the window", -1, 35 * time.Minute, []string{"L4", "L5"}, 0},
		{"silent-after beyond the window acts as the window", 2 * time.Hour, 35 * time.Minute, []string{"L4", "L5"}, 0},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			w := newWindow(t, Config{SilentAfter: tt.silent}, "L1", "L2", "L3", "L4", "L5")
			for s := time.Duration(0); s <= tt.now; s += 20 * time.Second {
				for g := range 4 {
					if g == 3 && s >= 6*time.Minute {
						continue
					}
					mustAdd(t, w, g, at(s), 0.1*float64(g)+0.01*float64(s/time.Minute), Added)
				}
			}
			ev := w.Evaluate(at(tt.now), stats.Options{}, stats.Reference{})
			if !slices.Equal(ev.Silent, tt.wantSilent) {
				t.Fatalf("silent %v, want %v", ev.Silent, tt.wantSilent)
			}
			var names []string
			for _, g := range ev.Report.Groups {
				names = append(names, g.Name)
			}
			if len(names)+len(tt.wantSilent) != 5 || slices.ContainsFunc(names, func(n string) bool { return slices.Contains(tt.wantSilent, n) }) {
				t.Errorf("report groups %v with silent %v", names, tt.wantSilent)
			}
			l4 := ev.Counts[3]
			wantLast := time.Time{}
			if tt.wantN > 0 {
				wantLast = at(6 * time.Minute)
			}
			if l4.Silent != slices.Contains(tt.wantSilent, "L4") || l4.N != tt.wantN || !l4.Last.Equal(wantLast) {
				t.Errorf("L4 count %+v, want N %d, last %v", l4, tt.wantN, wantLast)
			}
			if l5 := ev.Counts[4]; l5 != (GroupCount{Name: "L5", Silent: true}) {
				t.Errorf("L5 count %+v", l5)
			}
		})
	}
}

func TestGroups(t *testing.T) {
	w := newWindow(t, Config{}, "L1")
	if g := w.GroupBytes([]byte("L2")); g != 1 {
		t.Errorf("GroupBytes(L2) = %d, want 1", g)
	}
	if g := w.Group("L2"); g != 1 {
		t.Errorf("Group(L2) = %d, want 1", g)
	}
	if !slices.Equal(w.Groups(), []string{"L1", "L2"}) {
		t.Errorf("Groups() = %v", w.Groups())
	}
	name := []byte("L1")
	if n := testing.AllocsPerRun(100, func() {
		if w.GroupBytes(name) != 0 {
			t.Fatal("GroupBytes(L1) != 0")
		}
	}); n != 0 {
		t.Errorf("GroupBytes of a known name: %v allocations, want 0", n)
	}
}

// TestGroupAddedLater: a group first seen mid-window joins buckets made
// before it existed.
func TestGroupAddedLater(t *testing.T) {
	w := newWindow(t, Config{Bucket: time.Minute, Length: 10 * time.Minute, Lateness: 90 * time.Second}, "L1")
	for s := time.Duration(0); s < 5*time.Minute; s += 10 * time.Second {
		mustAdd(t, w, 0, at(s), 0.1, Added)
	}
	l2 := w.Group("L2")
	mustAdd(t, w, l2, at(4*time.Minute), 0.5, Added)                // open bucket made before L2
	mustAdd(t, w, l2, at(3*time.Minute+30*time.Second), 0.7, Added) // open, older
	mustAdd(t, w, l2, at(6*time.Minute), 0.6, Added)                // a new bucket
	got := w.Sums(at(6*time.Minute), nil)
	if got[0].N != 30 || got[1].N != 3 || got[1].Min != 0.5 || got[1].Max != 0.7 {
		t.Errorf("sums %+v", got)
	}
}

func TestAddDoesNotAllocate(t *testing.T) {
	t.Run("same bucket", func(t *testing.T) {
		w := newWindow(t, Config{}, "L1", "L2")
		mustAdd(t, w, 0, at(0), 0.1, Added)
		mustAdd(t, w, 1, at(0), 0.1, Added)
		i := 0
		if n := testing.AllocsPerRun(1000, func() {
			i++
			w.Add(i%2, at(time.Duration(i)*time.Millisecond), 0.001*float64(i%97))
		}); n != 0 {
			t.Errorf("%v allocations per Add, want 0", n)
		}
	})
	t.Run("steady stream across buckets", func(t *testing.T) {
		// One-second buckets: each run crosses a bucket every 10 calls, so
		// the runs close, evict, flip and reuse about 500 buckets.
		w := newWindow(t, Config{Bucket: time.Second, Length: 30 * time.Second, Lateness: 2 * time.Second}, "L1", "L2", "L3", "L4")
		i := 0
		add := func() {
			i++
			w.Add(i%4, at(time.Duration(i)*25*time.Millisecond), 0.001*float64(i%89))
		}
		for range 10000 {
			add()
		}
		if n := testing.AllocsPerRun(5000, add); n != 0 {
			t.Errorf("%v allocations per Add, want 0", n)
		}
	})
}

// TestSumsDoesNotAllocate: with room in dst, the sums of a window cost no
// allocation.
func TestSumsDoesNotAllocate(t *testing.T) {
	for _, cfg := range []Config{{}, {Count: 100}} {
		w := newWindow(t, cfg, "L1", "L2", "L3")
		for s := range 1800 {
			w.Add(s%3, at(time.Duration(s)*time.Second), float64(s%7)*0.1)
		}
		dst := make([]stats.Accumulator, 0, 3)
		if n := testing.AllocsPerRun(100, func() { dst = w.Sums(at(30*time.Minute), dst) }); n != 0 {
			t.Errorf("count %d: %v allocations per Sums, want 0", cfg.Count, n)
		}
		if dst[0].N == 0 {
			t.Errorf("count %d: empty sums", cfg.Count)
		}
	}
}
