package replay

import (
	"context"
	"fmt"
	"math/rand/v2"
	"runtime"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/stats"
	"github.com/lockstep-project/lockstep/store"
	"github.com/lockstep-project/lockstep/window"
)

// genStore is a Store that invents its raw values as they are read (four
// groups, one value each per second, input data only): a period of any
// length without a file, to measure what a replay holds.
type genStore struct {
	t0, t1 time.Time
}

func (g genStore) Characteristics() ([]store.Characteristic, error) {
	ref, err := stats.ParseDecimal("500")
	return []store.Characteristic{{Name: "fill", Unit: "g", Reference: ref}}, err
}

func (g genStore) Buckets(string, time.Time, time.Time, func(store.BucketState) error) error {
	return nil
}

func (g genStore) Raw(_ string, from, to time.Time, fn func(store.RawValue) error) error {
	rng := rand.New(rand.NewPCG(3, 4))
	start := g.t0
	if from.After(start) {
		start = from.Truncate(time.Second)
	}
	end := g.t1
	if !to.IsZero() && to.Before(end) {
		end = to
	}
	for t := start; t.Before(end); t = t.Add(time.Second) {
		if t.Before(from) {
			continue
		}
		for _, grp := range [...]string{"A", "B", "C", "D"} {
			if err := fn(store.RawValue{Characteristic: "fill", Group: grp, Time: t, Text: fmt.Sprintf("%.3f", 500+0.05*rng.NormFloat64())}); err != nil {
				return err
			}
		}
	}
	return nil
}

// TestRunConstantMemory: the heap a replay holds does not grow with the
// period: after a garbage collection, the live heap at the last of 12 h of
// evaluations is within 2 MiB of what it was after the first hour, while
// 172,800 values went through.
func TestRunConstantMemory(t *testing.T) {
	if testing.Short() {
		t.Skip("reads 12 h of invented values")
	}
	t0 := time.Date(2026, 12, 1, 0, 0, 0, 0, time.UTC)
	st := genStore{t0: t0, t1: t0.Add(12 * time.Hour)}
	plan, err := NewPlan(st, Spec{Characteristic: "fill", From: t0.Add(30 * time.Minute), To: t0.Add(12 * time.Hour),
		Step: 5 * time.Minute, Window: window.Config{}, Options: stats.DefaultOptions()})
	if err != nil {
		t.Fatal(err)
	}
	heap := func() uint64 {
		runtime.GC()
		var m runtime.MemStats
		runtime.ReadMemStats(&m)
		return m.HeapAlloc
	}
	var early, late uint64
	var n int64
	err = plan.Run(context.Background(), func(e Eval) error {
		n++
		switch n {
		case 12:
			early = heap()
		case plan.Evaluations:
			late = heap()
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if n != 139 || plan.Source != Raw {
		t.Fatalf("%d evaluations from %v, want 139 from raw", n, plan.Source)
	}
	if late > early+2<<20 {
		t.Errorf("live heap grew from %d to %d bytes over the replay", early, late)
	}
	t.Logf("live heap after 1 h: %d bytes, after 12 h: %d bytes", early, late)
}
