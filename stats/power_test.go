package stats

import (
	"errors"
	"math"
	"testing"
)

// TestMinimumDetectableShiftReference compares the per-group shift with R
// (rSource: uniroot on pf(qf(0.95, ...), ncp = λ, lower.tail = FALSE) − 0.9).
// Tolerance 1e-8 relative: R's noncentral F is accurate to about 1e-9 in
// power, and dδ/δ = dλ/(2λ) keeps that size.
func TestMinimumDetectableShiftReference(t *testing.T) {
	ref := readReference(t)
	log := newErrorLog(rSource)
	for _, sc := range allScenarios() {
		names, values := readScenario(t, sc)
		s, err := MinimumDetectableShift(groupAccumulators(values), 0.05, 0.9)
		if err != nil {
			t.Fatalf("%s: %v", sc, err)
		}
		largest := 0.0
		for i, g := range names {
			log.check(t, "mds", sc+" "+g, s.PerGroup[i], ref.get(t, sc, "mds", g, ""), 1e-8)
			largest = math.Max(largest, s.PerGroup[i])
		}
		if s.Largest != largest {
			t.Errorf("%s: Largest %g, want the largest per-group shift %g", sc, s.Largest, largest)
		}
		// The shift reaches the asked power: recompute it from λ.
		tab, _ := OneWay(groupAccumulators(values))
		fcrit := FQuantile(0.95, tab.DFBetween, tab.DFWithin)
		if p := NoncentralFSurvival(fcrit, tab.DFBetween, tab.DFWithin, s.Lambda); math.Abs(p-0.9) > 1e-9 {
			t.Errorf("%s: power at λ = %g is %g, want 0.9", sc, s.Lambda, p)
		}
	}
	log.report(t)
}

func TestMinimumDetectableShiftNotAvailable(t *testing.T) {
	var a Accumulator
	a.Add(1)
	a.Add(2)
	for _, c := range []struct {
		name         string
		groups       []Accumulator
		alpha, power float64
	}{
		{"one group", []Accumulator{a}, 0.05, 0.9},
		{"power below alpha", []Accumulator{a, a}, 0.05, 0.01},
		{"alpha out of range", []Accumulator{a, a}, 0, 0.9},
	} {
		if _, err := MinimumDetectableShift(c.groups, c.alpha, c.power); !errors.Is(err, ErrNotAvailable) {
			t.Errorf("%s: error %v, want ErrNotAvailable", c.name, err)
		}
	}
}
