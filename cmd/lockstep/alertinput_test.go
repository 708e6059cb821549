package main

import (
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/alert"
	"github.com/lockstep-project/lockstep/stats"
	"github.com/lockstep-project/lockstep/window"
)

func TestBuildAlertInput(t *testing.T) {
	w, err := window.New(window.Config{Bucket: time.Minute, Length: 30 * time.Minute, SilentAfter: 5 * time.Minute})
	if err != nil {
		t.Fatal(err)
	}
	start := time.Date(2026, 12, 1, 6, 0, 0, 0, time.UTC)
	l1, l2, l3 := w.Group("L1"), w.Group("L2"), w.Group("L3")
	// L1 and L2 report every 10 s for 20 min (L2 0.5 g heavy); L3 stops
	// after 5 min.
	for s := 0; s < 20*60; s += 10 {
		at := start.Add(time.Duration(s) * time.Second)
		w.Add(l1, at, 0.1)
		w.Add(l2, at, 0.6+float64(s%20)/100)
		if s < 300 {
			w.Add(l3, at, float64(s%30)/100)
		}
	}
	now := start.Add(20*time.Minute + 15*time.Second)
	prev := now.Add(-time.Minute)
	ev := w.Evaluate(now, stats.DefaultOptions(), stats.Reference{})
	rule := alert.DefaultRule()
	in := buildAlertInput(w, ev, now, rule, prev, 90, 10, "g", stats.Reference{})

	if !in.Time.Equal(now) || in.Unit != "g" || in.Accepted != 90 || in.Rejected != 10 || !in.RecentFrom.Equal(prev) {
		t.Errorf("header %+v", in)
	}
	if len(in.Groups) != 3 || in.Report == nil || len(in.Spans) != len(rule.Windows) {
		t.Fatalf("groups %v, report %v, %d spans", in.Groups, in.Report != nil, len(in.Spans))
	}
	// The 1-minute span is the last whole minute, 06:19–06:20: 6 values each
	// of L1 and L2, none of L3.
	s1 := in.Spans[0]
	if !s1.From.Equal(start.Add(19*time.Minute)) || !s1.To.Equal(start.Add(20*time.Minute)) {
		t.Errorf("1-minute span [%v, %v)", s1.From, s1.To)
	}
	if s1.Groups[l1].N != 6 || s1.Groups[l2].N != 6 || s1.Groups[l3].N != 0 {
		t.Errorf("1-minute span counts %d %d %d, want 6 6 0", s1.Groups[l1].N, s1.Groups[l2].N, s1.Groups[l3].N)
	}
	// The 30-minute span holds everything before 06:20.
	if n := in.Spans[1].Groups[l1].N; n != 120 {
		t.Errorf("30-minute span holds %d values of L1, want 120", n)
	}
	// Recent: the bucket that ended in (06:19:15, 06:20:15], 06:19–06:20.
	if in.Recent[l1].N != 6 || in.Recent[l3].N != 0 {
		t.Errorf("recent counts %d, %d; want 6, 0", in.Recent[l1].N, in.Recent[l3].N)
	}
	if len(in.Silent) != 1 || in.Silent[0] != "L3" {
		t.Errorf("silent %v, want [L3]", in.Silent)
	}
	if want := start.Add(5 * time.Minute); !in.LastSeen[l3].Equal(want) {
		t.Errorf("L3 last seen %v, want %v (the end of its last bucket)", in.LastSeen[l3], want)
	}
	// The monitor takes it: L3 is silent, L2 runs heavy.
	m, err := alert.NewMonitor(rule)
	if err != nil {
		t.Fatal(err)
	}
	kinds := map[alert.Kind]alert.Condition{}
	for _, c := range m.Step(in) {
		kinds[c.Kind] = c
	}
	if c, ok := kinds[alert.KindGroupSilent]; !ok || c.Key != "L3" {
		t.Errorf("no silent condition for L3: %+v", kinds)
	}
	if c, ok := kinds[alert.KindMeansDiverge]; !ok || len(c.Groups) == 0 || c.Direction == 0 {
		t.Errorf("no means condition: %+v", kinds)
	}
	if c := kinds[alert.KindInputRejected]; c.Phase != alert.PhaseRaise || c.RejectRate != 0.1 {
		t.Errorf("input condition %+v, want a raise at 10 %%", c)
	}
}
