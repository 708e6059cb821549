package alert

import (
	"encoding/csv"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"testing"

	"github.com/lockstep-project/lockstep/stats"
)

// cusumARLs reads the average run lengths of the two-sided tabular CUSUM
// computed by R's spc package (xcusum.arl, sided = "two"), written by
// testdata/reference/cusum_arl.R. The k = 0.5 rows agree with the table
// printed in quality-control textbooks (h = 4: 168 in control, 8.38 at a
// 1 σ shift; h = 5: 465 and 10.4).
func cusumARLs(t *testing.T) []cusumARL {
	t.Helper()
	f, err := os.Open(filepath.Join("..", "testdata", "reference", "cusum_arl.csv"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	recs, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	var out []cusumARL
	for i, r := range recs[1:] {
		var v [4]float64
		for j := range v {
			if v[j], err = strconv.ParseFloat(r[j], 64); err != nil {
				t.Fatalf("cusum_arl.csv line %d: %v", i+2, err)
			}
		}
		out = append(out, cusumARL{k: v[0], h: v[1], shift: v[2], arl: v[3]})
	}
	if len(out) == 0 {
		t.Fatal("cusum_arl.csv holds no rows")
	}
	return out
}

type cusumARL struct{ k, h, shift, arl float64 }

// twoSidedSiegmund is 1/(1/ARL⁺ + 1/ARL⁻).
func twoSidedSiegmund(mu, k, h float64) float64 {
	return 1 / (1/SiegmundARL(mu, k, h) + 1/SiegmundARL(-mu, k, h))
}

// TestSiegmundAgainstSPC holds Siegmund's approximation, which sets the
// detectors' thresholds, within 5 % of spc's ARLs for h ≥ 4 — the range the
// monitor's thresholds fall in (h of 8 or more at lockstep's budgets).
func TestSiegmundAgainstSPC(t *testing.T) {
	for _, r := range cusumARLs(t) {
		got := twoSidedSiegmund(r.shift, r.k, r.h)
		if d := math.Abs(got-r.arl) / r.arl; d > 0.05 {
			t.Errorf("k %v, h %v, shift %v: Siegmund ARL %.5g, spc %.5g (%.1f %% apart)", r.k, r.h, r.shift, got, r.arl, 100*d)
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
// N(μ, 1) increments and checks the mean run length against spc's,
// within 4 standard errors of the simulation.
func TestCUSUMStepRunLength(t *testing.T) {
	runs := 4000
	if testing.Short() {
		runs = 800
	}
	rng := rand.New(rand.NewPCG(7, 11))
	for _, r := range cusumARLs(t) {
		if r.k != 0.5 || r.h > 5 {
			continue // run lengths short enough to simulate
		}
		var sum, sum2 float64
		for range runs {
			var hi, lo float64
			n := 0
			for {
				n++
				hi, lo = cusumStep(hi, lo, r.shift+rng.NormFloat64(), r.k, 2*r.h)
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
			t.Errorf("h = %v, shift %v: simulated ARL %.4g ± %.2g, spc %.4g", r.h, r.shift, mean, se, r.arl)
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
// rate. With TestClassic the pooled SD is estimated from each
// evaluation's 76 df (there is no window span here), which fattens the
// tails of z and raises it (measured: 1.23 α). With TestAuto each group's
// variance is the larger of the pooled one and its own (19 df; see
// contrastZ), which is conservative (measured: 0.68 α). The test holds the
// rate within [0.3 α, 1.5 α] for both.
func TestContrastCUSUMInControlRate(t *testing.T) {
	if testing.Short() {
		t.Skip("simulation")
	}
	for _, test := range []TestChoice{TestClassic, TestAuto} {
		contrastCUSUMInControlRate(t, test)
	}
}

func contrastCUSUMInControlRate(t *testing.T, test TestChoice) {
	const alpha = 1e-3
	r := meansOnly(nil, []ContrastCUSUM{{K: 0.5, Share: 1}})
	r.Alpha, r.ClearAlpha, r.Test = alpha, alpha, test
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
		t.Errorf("%v: in-control signal rate %.3g per evaluation (%d signals), budget %.3g", test, rate, signals, alpha)
	}
	t.Logf("%v: in-control signal rate %.3g per evaluation (%d signals in %d), budget %.3g", test, rate, signals, evals, alpha)
}
