package window

import (
	"fmt"
	"math"
	"math/big"
	"math/rand/v2"
	"slices"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/stats"
)

// model is the window restated from the rules in Config and Add, without
// buckets, stacks or eviction: it keeps every accepted value and filters
// them by bucket at each evaluation.
type model struct {
	bucket, span, late int64
	count              int // > 0: count-based
	latest, clock      int64
	hasLatest          bool
	hasClock           bool
	kept               []event // accepted values, in arrival order
}

type event struct {
	g   int
	ns  int64
	v   float64
	idx int64 // bucket number, set by model.add
}

// floorBig is ⌊a/b⌋ by math/big's Euclidean division (b > 0), independent
// of the package's floorDiv.
func floorBig(a, b int64) int64 {
	return new(big.Int).Div(big.NewInt(a), big.NewInt(b)).Int64()
}

func (m *model) now() int64 {
	t := m.latest
	if m.hasClock && (!m.hasLatest || m.clock > t) {
		t = m.clock
	}
	return t
}

func (m *model) from() int64 { return floorBig(m.now(), m.bucket) + 1 - m.span }

func (m *model) add(e event) Result {
	if m.count > 0 {
		if m.hasLatest && e.ns < m.latest-m.late {
			return Late
		}
	} else {
		idx := floorBig(e.ns, m.bucket)
		if m.hasLatest && (idx+1)*m.bucket <= m.latest-m.late {
			return Late
		}
		end := e.ns
		if m.hasLatest || m.hasClock {
			end = max(end, m.now())
		}
		if idx < floorBig(end, m.bucket)+1-m.span {
			return Expired
		}
	}
	if !m.hasLatest || e.ns > m.latest {
		m.latest, m.hasLatest = e.ns, true
	}
	e.idx = floorBig(e.ns, m.bucket)
	m.kept = append(m.kept, e)
	return Added
}

func (m *model) observe(now int64) {
	if !m.hasClock || now > m.clock {
		m.clock, m.hasClock = now, true
	}
}

// inWindow returns group g's values in the window, by bucket number
// (time-based; arrival order within a bucket), or its last count values.
func (m *model) inWindow(g int) (byBucket map[int64][]float64, all []float64) {
	byBucket = map[int64][]float64{}
	from := m.from()
	for _, e := range m.kept {
		if e.g != g {
			continue
		}
		if m.count > 0 {
			all = append(all, e.v)
			continue
		}
		if e.idx >= from {
			byBucket[e.idx] = append(byBucket[e.idx], e.v)
			all = append(all, e.v)
		}
	}
	if m.count > 0 && len(all) > m.count {
		all = all[len(all)-m.count:]
	}
	return byBucket, all
}

// naiveSums merges the accumulators of every bucket in the window, oldest
// first: the O(buckets) recomputation the two stacks replace.
func naiveSums(byBucket map[int64][]float64) stats.Accumulator {
	var keys []int64
	for k := range byBucket {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	var all stats.Accumulator
	for _, k := range keys {
		var b stats.Accumulator
		for _, x := range byBucket[k] {
			b.Add(x)
		}
		all.Merge(b)
	}
	return all
}

func near(got, want, scale, tol float64) bool { return math.Abs(got-want) <= tol*scale }

// TestAggregateMatchesNaive: for random streams of fill weights with
// out-of-order, late and expired values and quiet spells, every result of
// Add matches the model, the window's sums match a naive merge of every
// bucket in the window and a two-pass computation over the raw values
// (counts, minimum and maximum exactly, mean and M2 to rounding), the counts
// of each evaluation match, and Buckets yields the model's buckets with
// samples that are subsets of their values.
func TestAggregateMatchesNaive(t *testing.T) {
	trials := 300
	if testing.Short() {
		trials = 40
	}
	rng := rand.New(rand.NewPCG(20260302, 6))
	widths := []time.Duration{time.Second, 7 * time.Second, time.Minute}
	spans := []int64{1, 2, 5, 30, 200}
	samples := []int{-1, 1, 5, 64}
	for trial := range trials {
		bw := widths[rng.IntN(len(widths))]
		span := spans[rng.IntN(len(spans))]
		cfg := Config{Bucket: bw, Length: time.Duration(span) * bw, Sample: samples[rng.IntN(len(samples))]}
		switch rng.IntN(4) {
		case 0:
			cfg.Lateness = -1
		case 1:
			cfg.Lateness = bw / 2
		case 2:
			cfg.Lateness = bw
		default:
			cfg.Lateness = 3*bw + bw/3
		}
		if cfg.Lateness >= cfg.Length {
			cfg.Lateness = -1
		}
		if rng.IntN(5) == 0 {
			cfg.Count = 1 + rng.IntN(40)
		}
		t.Run(fmt.Sprintf("%d", trial), func(t *testing.T) {
			runStream(t, rng, cfg, trial%10 == 0)
		})
	}
}

// runStream feeds one random stream to a window and the model. evaluate
// adds a full evaluation at the end (the analysis costs milliseconds).
func runStream(t *testing.T, rng *rand.Rand, cfg Config, evaluate bool) {
	groups := 2 + rng.IntN(3)
	names := []string{"L1", "L2", "L3", "L4"}[:groups]
	w := newWindow(t, cfg, names...)
	c := w.Config()
	m := &model{bucket: int64(c.Bucket), span: int64(c.Length / c.Bucket), late: max(int64(c.Lateness), 0), count: c.Count}
	offset := 0.0
	if rng.IntN(4) == 0 {
		offset = 1e4 // values far from the reference: rounding shows
	}
	progress := shift.UnixNano()
	b := int64(c.Bucket)
	events := 200 + rng.IntN(1500)
	for i := range events {
		progress += int64(rng.ExpFloat64() * float64(b) / 8)
		if rng.IntN(100) == 0 {
			progress += rng.Int64N(2 * int64(c.Length)) // a quiet spell
		}
		ns := progress
		switch r := rng.IntN(20); {
		case r < 5:
			ns -= rng.Int64N(m.late + b) // mostly within the lateness
		case r == 5:
			ns -= rng.Int64N(int64(c.Length) + 3*b) // late or expired
		}
		e := event{g: rng.IntN(groups), ns: ns, v: offset + 0.1*float64(rng.IntN(groups)) + 0.5*rng.NormFloat64()}
		want := m.add(e)
		if got := w.Add(e.g, time.Unix(0, e.ns), e.v); got != want {
			t.Fatalf("event %d %+v: Add = %v, model says %v", i, e, got, want)
		}
		if rng.IntN(25) == 0 {
			now := progress + rng.Int64N(2*b) - b
			m.observe(now)
			checkSums(t, m, names, w.Sums(time.Unix(0, now), nil))
		}
	}
	m.observe(progress)
	if evaluate {
		ev := w.Evaluate(time.Unix(0, progress), stats.Options{}, stats.Reference{})
		for _, c := range ev.Counts {
			for _, r := range ev.Report.Groups {
				if r.Name == c.Name && r.N != c.N {
					t.Fatalf("%s: report N %d, count %d", c.Name, r.N, c.N)
				}
			}
		}
		checkCounts(t, m, names, ev.Counts)
	}
	checkSums(t, m, names, w.Sums(time.Unix(0, progress), nil))
	checkBuckets(t, w, m, names)
}

func checkCounts(t *testing.T, m *model, names []string, counts []GroupCount) {
	t.Helper()
	for g := range names {
		if _, all := m.inWindow(g); counts[g].N != int64(len(all)) {
			t.Fatalf("%s: Evaluate counts %d, model %d", names[g], counts[g].N, len(all))
		}
	}
}

func checkSums(t *testing.T, m *model, names []string, sums []stats.Accumulator) {
	t.Helper()
	now := time.Unix(0, m.now())
	for g := range names {
		byBucket, all := m.inWindow(g)
		got := sums[g]
		if got.N != int64(len(all)) {
			t.Fatalf("%s at %v: N %d, model %d", names[g], now, got.N, len(all))
		}
		if len(all) == 0 {
			continue
		}
		var want stats.Accumulator
		if m.count > 0 {
			for _, x := range all {
				want.Add(x) // rebuilt oldest first: the same operations
			}
			if got != want {
				t.Fatalf("%s at %v: sums %+v, want %+v", names[g], now, got, want)
			}
			continue
		}
		want = naiveSums(byBucket)
		mean, m2 := twoPass(all)
		scale := math.Abs(want.Mean) + math.Sqrt(want.M2/float64(want.N)) + 1e-300
		if got.Min != slices.Min(all) || got.Max != slices.Max(all) ||
			!near(got.Mean, want.Mean, scale, 1e-13) || !near(got.Mean, mean, scale, 1e-13) ||
			!near(got.M2, want.M2, want.M2+scale*scale, 1e-10) || !near(got.M2, m2, m2+scale*scale, 1e-10) {
			t.Fatalf("%s at %v: sums %+v; naive merge %+v; two-pass mean %v M2 %v", names[g], now, got, want, mean, m2)
		}
	}
}

func checkBuckets(t *testing.T, w *Window, m *model, names []string) {
	t.Helper()
	if m.count > 0 {
		got := values(w)
		for g := range names {
			if _, all := m.inWindow(g); !slices.Equal(got[g], all) {
				t.Fatalf("%s values %v, model %v", names[g], got[g], all)
			}
		}
		return
	}
	sample := max(w.Config().Sample, 0)
	n := 0
	for _, r := range buckets(w) {
		byBucket, _ := m.inWindow(r.group)
		vals := byBucket[floorBig(r.start.UnixNano(), m.bucket)]
		var want stats.Accumulator
		for _, x := range vals {
			want.Add(x) // the same additions in the same order: exact
		}
		if r.acc != want {
			t.Fatalf("bucket %v %s: %+v, want %+v", r.start, names[r.group], r.acc, want)
		}
		if len(r.sample) != min(len(vals), sample) {
			t.Fatalf("bucket %v %s: %d sampled of %d, want %d", r.start, names[r.group], len(r.sample), len(vals), min(len(vals), sample))
		}
		rest := slices.Clone(vals)
		for _, x := range r.sample {
			i := slices.Index(rest, x)
			if i < 0 {
				t.Fatalf("bucket %v %s: sampled %v is not among its values", r.start, names[r.group], x)
			}
			rest = slices.Delete(rest, i, i+1)
		}
		n++
	}
	want := 0
	for g := range names {
		byBucket, _ := m.inWindow(g)
		want += len(byBucket)
	}
	if n != want {
		t.Fatalf("Buckets yielded %d bucket-groups, model has %d", n, want)
	}
}
