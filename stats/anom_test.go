package stats

import (
	"errors"
	"testing"
)

// TestAnalysisOfMeansReference compares the deviations and Šidák limits with
// R (rSource: qt with α* = 1 − (1 − α)^(1/k), formula in make.R).
func TestAnalysisOfMeansReference(t *testing.T) {
	ref := readReference(t)
	log := newErrorLog(rSource)
	for _, sc := range allScenarios() {
		names, values := readScenario(t, sc)
		m, err := AnalysisOfMeans(groupAccumulators(values), 0.05)
		if err != nil {
			t.Fatalf("%s: %v", sc, err)
		}
		if len(m.Groups) != len(names) {
			t.Fatalf("%s: %d groups, want %d", sc, len(m.Groups), len(names))
		}
		for _, d := range m.Groups {
			g := names[d.Group]
			// Deviations are differences of means near 500 g: 1e-9 relative
			// leaves room for summation order; the limit is a product of a t
			// quantile (gonum, ≈1e-12) and the residual SD.
			log.check(t, "anom_deviation", sc+" "+g, d.Deviation, ref.get(t, sc, "anom_deviation", g, ""), 1e-9)
			log.check(t, "anom_halfwidth", sc+" "+g, d.HalfWidth, ref.get(t, sc, "anom_halfwidth", g, ""), 1e-10)
			want := 0
			switch {
			case d.Deviation > d.HalfWidth:
				want = 1
			case d.Deviation < -d.HalfWidth:
				want = -1
			}
			if d.Direction != want {
				t.Errorf("%s %s: direction %d, want %d", sc, g, d.Direction, want)
			}
		}
	}
	log.report(t)
}

func TestAnalysisOfMeansNotAvailable(t *testing.T) {
	one := Accumulator{}
	one.Add(1)
	one.Add(2)
	flat := Accumulator{}
	flat.Add(3)
	flat.Add(3)
	for _, c := range []struct {
		name   string
		groups []Accumulator
		alpha  float64
	}{
		{"one group", []Accumulator{one}, 0.05},
		{"no variation", []Accumulator{flat, flat}, 0.05},
		{"bad alpha", []Accumulator{one, one}, 1.5},
	} {
		if _, err := AnalysisOfMeans(c.groups, c.alpha); !errors.Is(err, ErrNotAvailable) {
			t.Errorf("%s: error %v, want ErrNotAvailable", c.name, err)
		}
	}
}
