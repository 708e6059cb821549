package replay

import (
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/stats"
)

// TestTally: raises are counted at their raise transition, the first raise
// time kept, and the time raised summed over the spans, a span still open
// at the end counting to the last evaluation.
func TestTally(t *testing.T) {
	t0 := time.Date(2026, 12, 1, 6, 0, 0, 0, time.UTC)
	at := func(m int) time.Time { return t0.Add(time.Duration(m) * time.Minute) }
	raise := []Transition{{Kind: "means-diverge", Phase: "raised"}}
	rows := []Row{
		{Time: at(0)},
		{Time: at(1), Transitions: []Transition{{Kind: "means-diverge", Phase: "watch"}}},
		{Time: at(2), Transitions: raise, Raised: true},
		{Time: at(3), Raised: true},
		{Time: at(5), Transitions: []Transition{{Kind: "means-diverge", Phase: "cleared"}}},
		{Time: at(6)},
		{Time: at(8), Transitions: raise, Raised: true},
		{Time: at(10), Raised: true},
	}
	var tl Tally
	for i := range rows {
		tl.Add(&rows[i])
	}
	s := tl.Summary("raw", nil)
	if s.Evaluations != 8 || s.Raised != 2 || s.FirstRaise == nil || !s.FirstRaise.Equal(at(2)) || time.Duration(s.TimeRaised) != 5*time.Minute {
		t.Errorf("summary %+v; want 8 evaluations, 2 raised, first at %v, 5m raised", s, at(2))
	}
	spans := tl.Spans()
	if len(spans) != 2 || !spans[0][0].Equal(at(2)) || !spans[0][1].Equal(at(5)) || !spans[1][1].Equal(at(10)) {
		t.Errorf("spans %v", spans)
	}
}

func TestDecimals(t *testing.T) {
	for text, want := range map[string]int{"500": 2, "500.1": 3, "500.123": 5, "0.000001": 8, "1000000000001.4": 3, "1.5e-20": 9} {
		d, err := stats.ParseDecimal(text)
		if err != nil {
			t.Fatal(err)
		}
		if got := Decimals(d); got != want {
			t.Errorf("Decimals(%s = %s) = %d, want %d", text, d, got, want)
		}
	}
}
