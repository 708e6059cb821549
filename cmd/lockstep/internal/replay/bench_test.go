package replay

import (
	"context"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/stats"
	"github.com/lockstep-project/lockstep/store"
	"github.com/lockstep-project/lockstep/window"
)

// Benchmarks: a replay of 2 h of invented values (four groups at 1 value/s)
// evaluated every minute, against the baseline of the same values, already
// centred, added to a window and evaluated at the same times without the
// replay (BenchmarkReplayBaseline). The ratio is the replay's own cost:
// reading and centring the text, the group pre-pass, the plan. Report it as
// Replay/Baseline from one run.

func benchSpec(t0 time.Time) Spec {
	return Spec{Characteristic: "fill", From: t0.Add(30 * time.Minute), To: t0.Add(2 * time.Hour),
		Step: time.Minute, Options: stats.DefaultOptions()}
}

func BenchmarkReplay(b *testing.B) {
	t0 := time.Date(2026, 12, 1, 0, 0, 0, 0, time.UTC)
	st := genStore{t0: t0, t1: t0.Add(2 * time.Hour)}
	for b.Loop() {
		plan, err := NewPlan(st, benchSpec(t0))
		if err != nil {
			b.Fatal(err)
		}
		if err := plan.Run(context.Background(), func(Eval) error { return nil }); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkReplayBaseline(b *testing.B) {
	t0 := time.Date(2026, 12, 1, 0, 0, 0, 0, time.UTC)
	st := genStore{t0: t0, t1: t0.Add(2 * time.Hour)}
	spec := benchSpec(t0)
	type val struct {
		g int
		t time.Time
		v float64
	}
	var vals []val
	ref, _ := stats.ParseDecimal("500")
	r := stats.NewReference(ref)
	idx := map[string]int{"A": 0, "B": 1, "C": 2, "D": 3}
	_ = st.Raw("fill", time.Time{}, time.Time{}, func(rv store.RawValue) error {
		v, _, _ := r.CentreString(rv.Text)
		vals = append(vals, val{idx[rv.Group], rv.Time, v})
		return nil
	})
	for b.Loop() {
		w, _ := window.New(window.Config{})
		for _, g := range []string{"A", "B", "C", "D"} {
			w.Group(g)
		}
		next, i := spec.From, 0
		for !next.After(spec.To) {
			for ; i < len(vals) && vals[i].t.Before(next); i++ {
				w.Add(vals[i].g, vals[i].t, vals[i].v)
			}
			w.Evaluate(next, spec.Options, r)
			next = next.Add(spec.Step)
		}
	}
}
