package alert

import (
	"math/rand/v2"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/stats"
)

// TestShiftRaisedNamedCleared runs the default rule over a simulated
// stream of four groups at 60 values a minute, SD 1: in control for an
// hour, then D runs 1 SD high for 30 minutes, then in control again. The
// means condition must raise within two evaluations of the shift (calibrate
// measures a median of 1 and a 90th percentile of 2 minutes), name D high
// with an interval around the true shift of 1, and clear after the shift
// is removed.
func TestShiftRaisedNamedCleared(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	groups := []string{"A", "B", "C", "D"}
	m, err := NewMonitor(DefaultRule())
	if err != nil {
		t.Fatal(err)
	}
	var hist [][]stats.Accumulator
	raisedAt, clearedAt := -1, -1
	for e := range 180 {
		recent := make([]stats.Accumulator, 4)
		for g := range 4 {
			mu := 0.0
			if g == 3 && e >= 60 && e < 90 {
				mu = 1
			}
			for range 60 {
				recent[g].Add(mu + rng.NormFloat64())
			}
		}
		hist = append(hist, recent)
		span30 := make([]stats.Accumulator, 4)
		for _, h := range hist[max(0, len(hist)-30):] {
			for g := range 4 {
				span30[g].Merge(h[g])
			}
		}
		in := inputAt(e, groups, recent, recent)
		in.Spans = append(in.Spans, Span{Length: 30 * time.Minute, Groups: span30})
		for _, c := range m.Step(in) {
			if c.Kind != KindMeansDiverge {
				continue
			}
			switch {
			case c.Phase == PhaseRaise && raisedAt < 0:
				raisedAt = e
				if e < 60 {
					t.Fatalf("raised at evaluation %d, before the shift: %+v", e, c)
				}
				if c.Groups[0] != "D" || c.Direction != 1 || !(c.Lower < 1 && 1 < c.Upper) {
					t.Errorf("raise names %v, direction %d, shift %.3g [%.3g, %.3g]; want D high around 1", c.Groups, c.Direction, c.Shift, c.Lower, c.Upper)
				}
			case c.Phase == PhaseClear:
				clearedAt = e
			}
		}
	}
	if raisedAt < 0 || raisedAt > 61 {
		t.Errorf("raised at evaluation %d, want 60 or 61 (the shift starts at 60)", raisedAt)
	}
	if clearedAt < 90 {
		t.Errorf("cleared at evaluation %d, want after the shift ends at 90", clearedAt)
	}
	t.Logf("raised at %d, cleared at %d", raisedAt, clearedAt)
}
