package alert

import (
	"math"
	"math/rand/v2"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/stats"
	"gonum.org/v1/gonum/stat/distuv"
)

// spreadStepRuns simulates the demo's sealing jaws (testdata/plant/coffee.toml)
// under rule: six groups at one value per second, SD 1,
// evaluated every 10 s (10 values per group and evaluation), 1-min buckets,
// the 1-min and 30-min window F spans of whole buckets and a 30-min main
// window whose Brown–Forsythe test drives the automatic test choice. After
// warm evaluations in control, group 3's SD is multiplied by factor while
// every mean stays put, for after evaluations. It returns in how many of
// runs a means-diverge condition was raised, and the evaluations run.
func spreadStepRuns(t *testing.T, rule Rule, runs, warm, after int, factor float64, seed uint64) (raised, evals int) {
	t.Helper()
	const (
		groups  = 6
		perEval = 10 // values per group and evaluation
		perBuck = 6  // evaluations per 1-min bucket
		window  = 30 // buckets in the long span and the main window
	)
	names := []string{"J1", "J2", "J3", "J4", "J5", "J6"}
	rng := rand.New(rand.NewPCG(seed, 7))
	for range runs {
		m, err := NewMonitor(rule)
		if err != nil {
			t.Fatal(err)
		}
		var buckets [][]stats.Accumulator // closed 1-min buckets
		open := make([]stats.Accumulator, groups)
		var raw [][]float64 // per evaluation, group-major values
		hit := false
		for e := range warm + after {
			recent := make([]stats.Accumulator, groups)
			vals := make([]float64, 0, groups*perEval)
			for g := range groups {
				sd := 1.0
				if g == 3 && e >= warm {
					sd = factor
				}
				for range perEval {
					x := sd * rng.NormFloat64()
					recent[g].Add(x)
					vals = append(vals, x)
				}
				open[g].Merge(recent[g])
			}
			raw = append(raw, vals)
			if len(raw) > window*perBuck {
				raw = raw[1:]
			}
			now := mt0.Add(time.Duration(e+1) * 10 * time.Second)
			in := Input{Time: now, Unit: "°C", Groups: names, Recent: recent, RecentFrom: now.Add(-10 * time.Second)}
			for _, length := range []int{1, window} {
				span := make([]stats.Accumulator, groups)
				for _, b := range buckets[max(0, len(buckets)-length):] {
					for g := range groups {
						span[g].Merge(b[g])
					}
				}
				in.Spans = append(in.Spans, Span{Length: time.Duration(length) * time.Minute, Groups: span})
			}
			samples := make([][]float64, groups)
			for _, vals := range raw {
				for g := range groups {
					samples[g] = append(samples[g], vals[g*perEval:(g+1)*perEval]...)
				}
			}
			if bf, err := stats.BrownForsythe(samples); err == nil {
				in.Report = &stats.Report{BrownForsythe: &bf}
			}
			if (e+1)%perBuck == 0 {
				buckets = append(buckets, open)
				open = make([]stats.Accumulator, groups)
			}
			evals++
			for _, c := range m.Step(in) {
				if c.Kind == KindMeansDiverge && c.Phase == PhaseRaise && !hit {
					hit = true
					raised++
					t.Logf("means raised at evaluation %d (%d after the spread change): %s", e, e-warm, c.Reason)
				}
			}
		}
	}
	return raised, evals
}

// TestSpreadChangeRaisesNoMeansAlert: one group's SD triples while every
// mean stays put. That is the spread condition's business; the means
// detectors, whose contrasts are standardized by each group's own variance
// (Welch 1951), must stay within their false-alarm budget: Alpha per
// evaluation, at most about evaluations × Alpha raises (0.4 here, 0.08
// with -short). The test allows the largest count that a Poisson number
// of that mean exceeds with probability at least 0.001. The pooled-SD
// standardization this replaces (still used with TestClassic) raised in 56
// of the 60 runs, mostly on the k = 0.85 CUSUM within minutes of the
// change; the group's variance over the long span alone, without the
// recent one, in 29 (it lags the change).
func TestSpreadChangeRaisesNoMeansAlert(t *testing.T) {
	runs := 60
	if testing.Short() {
		runs = 12
	}
	raised, evals := spreadStepRuns(t, DefaultRule(), runs, 48, 120, 3, 11)
	mean := float64(evals) * DefaultRule().Alpha
	allow := 0
	for p := (distuv.Poisson{Lambda: mean}); 1-p.CDF(float64(allow)) >= 0.001; allow++ {
	}
	t.Logf("%d of %d runs raised a means alert in %d evaluations; the budget predicts at most %.2g, allows %d", raised, runs, evals, mean, allow)
	if raised > allow {
		t.Errorf("%d of %d runs raised a means alert on a spread change; the budget allows %d (mean %.2g)", raised, runs, allow, mean)
	}
}

// TestContrastZByHand checks the CUSUMs' standardized contrasts against
// the formulas worked by hand: three groups with n = 10, 20, 30, means 1,
// 0, 0 and recent variances 4, 1, 1; long-span variances 2, 1, 3.
//
// Pooled (s_p = 1.5): z_A = (1 − 0)/(1.5·√(1/10 + 1/50)) = 1/(1.5·√0.12).
// Welch-type: v = max(long, recent) = 4, 1, 3; for A the rest's variance
// is (20·1 + 30·3)/50² = 0.044, so z_A = 1/√(0.4 + 0.044); for B the rest
// (A and C, 40 values, mean 0.25) gives z_B = −0.25/√(1/20 + (10·4 +
// 30·3)/40²).
func TestContrastZByHand(t *testing.T) {
	recent := []stats.Accumulator{accOf(10, 1, 2), accOf(20, 0, 1), accOf(30, 0, 1)}
	long := []stats.Accumulator{accOf(100, 0, math.Sqrt(2)), accOf(100, 0, 1), accOf(100, 0, math.Sqrt(3))}
	var all stats.Accumulator
	for _, a := range recent {
		all.Merge(a)
	}
	pooled := contrastZ(recent, all, long, 1.5, false)
	if want := 1 / (1.5 * math.Sqrt(0.12)); !near(pooled[0], want, 1e-12) {
		t.Errorf("pooled z_A %v, want %v", pooled[0], want)
	}
	w := contrastZ(recent, all, long, 1.5, true)
	if want := 1 / math.Sqrt(0.4+0.044); !near(w[0], want, 1e-12) {
		t.Errorf("Welch-type z_A %v, want %v", w[0], want)
	}
	if want := -0.25 / math.Sqrt(1.0/20+130.0/1600); !near(w[1], want, 1e-12) {
		t.Errorf("Welch-type z_B %v, want %v", w[1], want)
	}
	// Without a long span the pooled SD stands in for it: v_B = max(1.5², 1).
	w = contrastZ(recent, all, nil, 1.5, true)
	if want := -0.25 / math.Sqrt(2.25/20+(10*4+30*2.25)/1600.0); !near(w[1], want, 1e-12) {
		t.Errorf("Welch-type z_B without a span %v, want %v", w[1], want)
	}
	// Equal variances everywhere: both forms agree.
	eq := []stats.Accumulator{accOf(10, 1, 1), accOf(20, 0, 1), accOf(30, 0, 1)}
	all = stats.Accumulator{}
	for _, a := range eq {
		all.Merge(a)
	}
	p, q := contrastZ(eq, all, eq, 1, false), contrastZ(eq, all, eq, 1, true)
	for i := range p {
		if !near(p[i], q[i], 1e-12) {
			t.Errorf("equal spreads, group %d: pooled %v, Welch-type %v", i, p[i], q[i])
		}
	}
	// An empty group, or a lone group, gives 0 and no NaN.
	z := contrastZ([]stats.Accumulator{accOf(10, 1, 1), {}}, accOf(10, 1, 1), nil, 1, true)
	if z[0] != 0 || z[1] != 0 {
		t.Errorf("lone group: z %v, want zeros", z)
	}
}

// TestSpreadChangeClassicStillPooled: with TestClassic the CUSUMs keep the
// pooled SD, which assumes equal spreads, and the same spread change sets
// them off in most runs (as every run but a few did before the Welch-type
// standard error): the standardization follows the test choice.
func TestSpreadChangeClassicStillPooled(t *testing.T) {
	r := DefaultRule()
	r.Test = TestClassic
	raised, _ := spreadStepRuns(t, r, 12, 48, 120, 3, 13)
	if raised < 6 {
		t.Errorf("classic: %d of 12 runs raised a means alert, want most (the pooled SD assumes equal spreads)", raised)
	}
}

// TestShiftWelchInterval: with two groups the named group's shift against
// the rest is the two-sample difference, and the Welch form of its
// interval is Welch's two-sample t interval. Reference from R 4.2,
// t.test(a, b, var.equal = FALSE) on a sample a of 10 values rescaled to
// mean 1, SD 2 and b of 20 values rescaled to mean 0, SD 1 (only n, mean
// and SD enter): interval [−0.471590390117, 2.471590390117], df
// 11.3069387755.
func TestShiftWelchInterval(t *testing.T) {
	accs := []stats.Accumulator{accOf(10, 1, 2), accOf(20, 0, 1)}
	shift, lo, hi, ok := shiftOf(accs, []int{0}, 0, 0.95, true)
	if !ok || !near(shift, 1, 1e-12) || !near(lo, -0.471590390117, 1e-9) || !near(hi, 2.471590390117, 1e-9) {
		t.Errorf("Welch: shift %v [%v, %v] (%v), want 1 [−0.471590390117, 2.471590390117]", shift, lo, hi, ok)
	}
	// The pooled form: s_p² = (9·4 + 19·1)/28, t(28).
	sp := math.Sqrt((9*4 + 19*1) / 28.0)
	h := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: 28}.Quantile(0.975) * sp * math.Sqrt(1.0/10+1.0/20)
	if _, lo, hi, _ := shiftOf(accs, []int{0}, 0, 0.95, false); !near(lo, 1-h, 1e-9) || !near(hi, 1+h, 1e-9) {
		t.Errorf("pooled: [%v, %v], want [%v, %v]", lo, hi, 1-h, 1+h)
	}
}
