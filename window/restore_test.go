package window

import (
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/stats"
)

// fillStream returns a deterministic stream of fill weights from four lines,
// about two bags a second each, some arriving up to 90 s late, line L3
// drifting up by 0.3 g an hour, event times from start on for d.
func fillStream(seed uint64, start, d time.Duration) []event {
	rng := rand.New(rand.NewPCG(seed, 1))
	var out []event
	for ns := int64(start); ns < int64(start+d); ns += int64(125 * time.Millisecond) {
		g := rng.IntN(4)
		t := ns
		if rng.IntN(10) == 0 {
			t -= rng.Int64N(int64(90 * time.Second))
		}
		drift := 0.0
		if g == 2 {
			drift = 0.3 * float64(t) / float64(time.Hour)
		}
		out = append(out, event{g: g, ns: shift.UnixNano() + t, v: 0.05*float64(g) + drift + 0.4*rng.NormFloat64()})
	}
	return out
}

// feed adds the events to every window, failing if the windows disagree
// about any of them. Each minute of event time it takes the windows' sums
// for now, and every fifth minute (the first included) their evaluations,
// and compares them bit for bit.
func feed(t *testing.T, events []event, ws ...*Window) {
	t.Helper()
	d, _ := stats.ParseDecimal("500.0")
	ref := stats.NewReference(d)
	next, tick := int64(math.MinInt64), 0
	for _, e := range events {
		var first Result
		for i, w := range ws {
			r := w.Add(e.g, time.Unix(0, e.ns), e.v)
			if i == 0 {
				first = r
			} else if r != first {
				t.Fatalf("event %+v: window %d says %v, window 0 %v", e, i, r, first)
			}
		}
		if e.ns < next {
			continue
		}
		next = e.ns + int64(time.Minute)
		now := time.Unix(0, e.ns+int64(time.Second))
		full := tick%5 == 0 && len(ws) > 1
		tick++
		var sums0 []stats.Accumulator
		var ev0 Evaluation
		for i, w := range ws {
			var ev Evaluation
			if full {
				ev = w.Evaluate(now, stats.Options{}, ref)
			}
			sums := w.Sums(now, nil)
			if i == 0 {
				sums0, ev0 = sums, ev
				continue
			}
			if d := sameBits(sums0, sums); d != "" {
				t.Fatalf("at %v: window %d sums differ: %s", now, i, d)
			}
			if d := sameBits(ev0, ev); d != "" {
				t.Fatalf("at %v: window %d evaluates differently: Evaluation%s", now, i, d)
			}
		}
	}
}

// restore builds a window like w from Buckets' output and Latest, the way a
// store would, loading the records in the given order (and twice, as a
// retried load would).
func restore(t *testing.T, w *Window, shuffle *rand.Rand) *Window {
	t.Helper()
	recs := buckets(w)
	if shuffle != nil && w.Config().Count == 0 { // count-based: order matters
		shuffle.Shuffle(len(recs), func(i, j int) { recs[i], recs[j] = recs[j], recs[i] })
	}
	r := newWindow(t, w.Config(), w.Groups()...)
	for range 2 {
		for _, rec := range recs {
			if err := r.Restore(rec.start, rec.group, rec.acc, rec.sample); err != nil {
				t.Fatal(err)
			}
		}
		if w.Config().Count > 0 {
			break // count-based restores append: load once
		}
	}
	r.SetLatest(w.Latest())
	return r
}

// TestRestoreEvaluatesBitForBit: a window restored from Buckets' output
// mid-shift evaluates exactly like the original, and keeps doing so while
// both take the rest of the shift.
func TestRestoreEvaluatesBitForBit(t *testing.T) {
	before := fillStream(1, 0, 47*time.Minute+20*time.Second)
	after := fillStream(2, 47*time.Minute+20*time.Second, 40*time.Minute)
	for _, tt := range []struct {
		name string
		cfg  Config
	}{
		{"time-based", Config{Bucket: time.Minute, Length: 30 * time.Minute, Lateness: 2 * time.Minute, Sample: 16}},
		{"time-based, 10 s buckets", Config{Bucket: 10 * time.Second, Length: 20 * time.Minute, Lateness: 45 * time.Second}},
		{"count-based", Config{Count: 200, Lateness: 2 * time.Minute}},
	} {
		t.Run(tt.name, func(t *testing.T) {
			w := newWindow(t, tt.cfg, "L1", "L2", "L3", "L4")
			feed(t, before, w)
			if !tt.cfg.withDefaults().isCount() && (w.closed.h == w.closed.f || w.closed.f == len(w.closed.q) || len(w.open) == 0) {
				t.Fatalf("want a window with front, back and open buckets before the restore; front %d, back %d, open %d",
					w.closed.f-w.closed.h, len(w.closed.q)-w.closed.f, len(w.open))
			}
			r := restore(t, w, rand.New(rand.NewPCG(3, 4)))
			if !r.Latest().Equal(w.Latest()) {
				t.Fatalf("restored latest %v, original %v", r.Latest(), w.Latest())
			}
			feed(t, after, w, r)
		})
	}
}

func (c Config) isCount() bool { return c.Count > 0 }

func TestRestoreErrors(t *testing.T) {
	one := stats.Accumulator{N: 1, Mean: 0.4, Min: 0.4, Max: 0.4}
	two := stats.Accumulator{N: 2, Mean: 0.5, M2: 0.02, Min: 0.4, Max: 0.6}
	tests := []struct {
		name   string
		cfg    Config
		start  time.Time
		group  int
		acc    stats.Accumulator
		sample []float64
		want   string
	}{
		{"group not interned", Config{}, at(0), 2, one, []float64{0.4}, "the window has 2 groups"},
		{"negative group", Config{}, at(0), -1, one, []float64{0.4}, "the window has 2 groups"},
		{"not on a bucket boundary", Config{}, at(30 * time.Second), 0, one, []float64{0.4}, "not a multiple of the bucket 1m0s"},
		{"time out of range", Config{}, time.Time{}, 0, one, []float64{0.4}, "outside the accepted range"},
		{"negative count", Config{}, at(0), 0, stats.Accumulator{N: -1}, nil, "negative count -1"},
		{"empty with sums", Config{}, at(0), 0, stats.Accumulator{Mean: 1}, nil, "empty accumulator with non-zero sums"},
		{"mean not finite", Config{}, at(0), 0, stats.Accumulator{N: 1, Mean: math.NaN()}, nil, "not finite"},
		{"negative M2", Config{}, at(0), 0, stats.Accumulator{N: 2, M2: -1, Min: 0, Max: 1}, []float64{0, 1}, "negative M2"},
		{"min above max", Config{}, at(0), 0, stats.Accumulator{N: 2, Min: 1, Max: 0}, nil, "minimum 1 above maximum 0"},
		{"sample value outside the range", Config{}, at(0), 0, two, []float64{0.4, 0.7}, "sample value 2 (0.7) is outside"},
		{"sample too short", Config{}, at(0), 0, two, []float64{0.4}, "sample has 1 values; with Sample 64 and 2 values a bucket keeps 2"},
		{"sample longer than Sample", Config{Sample: 1}, at(0), 0, two, []float64{0.4, 0.6}, "with Sample 1 and 2 values a bucket keeps 1"},
		{"count-based, count and values differ", Config{Count: 10}, at(0), 0, two, []float64{0.4}, "sample has 1, accumulator counts 2"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			w := newWindow(t, tt.cfg, "L1", "L2")
			err := w.Restore(tt.start, tt.group, tt.acc, tt.sample)
			if err == nil || !errors.Is(err, ErrRestore) || !strings.Contains(err.Error(), tt.want) {
				t.Fatalf("Restore: %v, want an ErrRestore containing %q", err, tt.want)
			}
			if len(buckets(w)) != 0 {
				t.Errorf("a refused Restore left a bucket behind")
			}
		})
	}
}

// TestRestoreReplaces: restoring a bucket again replaces it, and a bucket
// already out of the window is dropped at the next evaluation.
func TestRestoreReplaces(t *testing.T) {
	w := newWindow(t, Config{Length: 10 * time.Minute}, "L1", "L2")
	one := stats.Accumulator{N: 1, Mean: 0.4, Min: 0.4, Max: 0.4}
	two := stats.Accumulator{N: 2, Mean: 0.5, M2: 0.02, Min: 0.4, Max: 0.6}
	for _, r := range []struct {
		start time.Time
		acc   stats.Accumulator
		s     []float64
	}{
		{at(5 * time.Minute), one, []float64{0.4}},
		{at(5 * time.Minute), two, []float64{0.6, 0.4}},
		{at(-time.Hour), one, []float64{0.4}},
	} {
		if err := w.Restore(r.start, 0, r.acc, r.s); err != nil {
			t.Fatal(err)
		}
	}
	if got := w.Sums(at(6*time.Minute), nil)[0]; got != two {
		t.Errorf("sums %+v, want the second load of bucket 06:05, %+v", got, two)
	}
	if recs := buckets(w); len(recs) != 1 || !recs[0].start.Equal(at(5*time.Minute)) {
		t.Errorf("buckets %+v, want only 06:05", recs)
	}
}
