package alert

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/lockstep-project/lockstep/stats"
)

// Published in-control and out-of-control average run lengths of the
// two-sided tabular CUSUM with k = 0.5 (D. C. Montgomery, Introduction to
// Statistical Quality Control, the table of ARLs for h = 4 and h = 5,
// from Hawkins 1993). The values are quoted from memory of that table:
// h = 4: 168 in control, 8.38 at a 1 σ shift; h = 5: 465 and 10.4.
var cusumARLTable = []struct {
	h, shift, arl float64
}{
	{4, 0, 168}, {4, 1, 8.38}, {5, 0, 465}, {5, 1, 10.4},
}

// twoSidedSiegmund is 1/(1/ARL⁺ + 1/ARL⁻).
func twoSidedSiegmund(mu, k, h float64) float64 {
	return 1 / (1/SiegmundARL(mu, k, h) + 1/SiegmundARL(-mu, k, h))
}

func TestSiegmundAgainstTable(t *testing.T) {
	for _, r := range cusumARLTable {
		got := twoSidedSiegmund(r.shift, 0.5, r.h)
		if math.Abs(got-r.arl)/r.arl > 0.03 {
			t.Errorf("h = %v, shift %v: Siegmund ARL %.4g, table %.4g (more than 3 %% apart)", r.h, r.shift, got, r.arl)
		}
	}
}

func TestCUSUMThresholdInverts(t *testing.T) {
	for _, k := range []float64{0.25, 0.5, 0.85, 1.5} {
		for _, arl := range []float64{100, 1e4, 1e6} {
			h := CUSUMThreshold(k, arl)
			if got := SiegmundARL(0, k, h); math.Abs(got-arl)/arl > 1e-9 {
				t.Errorf("k %v: h %v gives ARL %v, want %v", k, h, got, arl)
			}
		}
	}
	if h := CUSUMThreshold(0.5, 1); h != 0 {
		t.Errorf("an ARL below that of h = 0 gives h %v, want 0", h)
	}
}

// TestCUSUMStepRunLength simulates the two-sided chart of cusumStep on
// N(μ, 1) increments and checks the mean run length against the table,
// within 4 standard errors of the simulation.
func TestCUSUMStepRunLength(t *testing.T) {
	runs := 4000
	if testing.Short() {
		runs = 800
	}
	rng := rand.New(rand.NewPCG(7, 11))
	for _, r := range cusumARLTable {
		var sum, sum2 float64
		for range runs {
			var hi, lo float64
			n := 0
			for {
				n++
				hi, lo = cusumStep(hi, lo, r.shift+rng.NormFloat64(), 0.5, 2*r.h)
				if hi > r.h || lo > r.h {
					break
				}
			}
			sum += float64(n)
			sum2 += float64(n) * float64(n)
		}
		mean := sum / float64(runs)
		se := math.Sqrt((sum2/float64(runs) - mean*mean) / float64(runs))
		if math.Abs(mean-r.arl) > 4*se+0.01*r.arl {
			t.Errorf("h = %v, shift %v: simulated ARL %.4g ± %.2g, table %.4g", r.h, r.shift, mean, se, r.arl)
		}
	}
}

func TestCUSUMStepCaps(t *testing.T) {
	hi, lo := cusumStep(9, 0, 5, 0.5, 10)
	if hi != 10 || lo != 0 {
		t.Errorf("cusumStep(9, 0, 5) = %v, %v; want the cap 10 and 0", hi, lo)
	}
	hi, lo = cusumStep(1, 2, -3, 0.5, 10)
	if hi != 0 || lo != 4.5 {
		t.Errorf("cusumStep(1, 2, −3) = %v, %v; want 0, 4.5", hi, lo)
	}
}

// TestContrastCUSUMInControlRate runs the monitor's CUSUM detector on
// in-control contrasts of four groups and compares its rate of first
// signals with the share of the budget it was given: h comes from
// Siegmund's approximation for 8 one-sided charts of run length 8/α each;
// the charts are dependent (the contrasts sum to zero), which lowers the
// rate, and the pooled SD is estimated from each evaluation's 76 df
// (there is no window span here), which fattens the tails of z and raises
// it (measured: 1.23 α). The test holds the rate within [0.3 α, 1.5 α].
func TestContrastCUSUMInControlRate(t *testing.T) {
	if testing.Short() {
		t.Skip("simulation")
	}
	const alpha = 1e-3
	r := meansOnly(nil, []ContrastCUSUM{{K: 0.5, Share: 1}})
	r.Alpha, r.ClearAlpha = alpha, alpha
	rng := rand.New(rand.NewPCG(3, 5))
	groups := []string{"A", "B", "C", "D"}
	signals, evals := 0, 0
	for range 40 {
		m, _ := NewMonitor(r)
		for e := range 5000 {
			recent := make([]stats.Accumulator, 4)
			for g := range recent {
				for range 20 {
					recent[g].Add(rng.NormFloat64())
				}
			}
			cs := m.Step(inputAt(e, groups, nil, recent))
			evals++
			if phaseOf(cs, KindMeansDiverge) == PhaseRaise {
				signals++
				m, _ = NewMonitor(r) // restart after a signal
			}
		}
	}
	rate := float64(signals) / float64(evals)
	if rate > 1.5*alpha || rate < 0.3*alpha {
		t.Errorf("in-control signal rate %.3g per evaluation (%d signals), budget %.3g", rate, signals, alpha)
	}
	t.Logf("in-control signal rate %.3g per evaluation (%d signals in %d), budget %.3g", rate, signals, evals, alpha)
}
