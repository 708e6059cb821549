package calib

import (
	"context"
	"math"
	"reflect"
	"strings"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/alert"
)

// small returns a quick calibration of four groups at 1 value/s.
func small() Config {
	return Config{
		Scenario: Scenario{Rates: []float64{1, 1, 1, 1}, SD: 2, Bucket: time.Minute},
		Rule:     alert.DefaultRule(),
		Alphas:   []float64{1e-4, 1e-3},
		Confirms: []int{1, 2},
		Shifts:   []float64{1, 0.25}, ShiftRuns: 6, Horizon: time.Hour,
		Days: 1, Drift: 3, DriftOver: time.Hour, DriftRuns: 2,
		MaxFalse: 1, BaselineK: 0.5, Seed: 42, Workers: 2,
	}
}

func TestRunDeterministic(t *testing.T) {
	a, err := Run(context.Background(), small())
	if err != nil {
		t.Fatal(err)
	}
	c := small()
	c.Workers = 1
	b, err := Run(context.Background(), c)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(a, b) {
		t.Errorf("the same seed gave different results with 2 workers and 1:\n%+v\n%+v", a, b)
	}
	c.Seed = 43
	d, err := Run(context.Background(), c)
	if err != nil {
		t.Fatal(err)
	}
	if reflect.DeepEqual(a, d) {
		t.Error("another seed gave the same result")
	}
	if len(a.Points) != 4 || len(a.Baselines) != 2 {
		t.Fatalf("%d points and %d baselines, want 4 and 2", len(a.Points), len(a.Baselines))
	}
	for _, p := range a.Points {
		if d := p.Delays[0]; d.Raised != d.Runs || d.Runs == 0 {
			t.Errorf("alpha %v confirm %d: a 1 SD shift raised in %d of %d runs within an hour", p.Alpha, p.Confirm, d.Raised, d.Runs)
		}
		if d := p.Delays[0]; d.Median < float64(p.Confirm) {
			t.Errorf("alpha %v confirm %d: median %v minutes, below the confirmation count", p.Alpha, p.Confirm, d.Median)
		}
	}
}

// TestFalseRaisesMatchTheory checks the in-control false-raise count of a
// single 1-minute window F (non-overlapping windows, Confirm 1) against the
// theoretical rate: the classic F is exact for normal values, so each
// evaluation fires with probability α independently, and a raise is a
// firing evaluation after one that did not fire (the condition clears at
// the next quiet evaluation with ClearAfter 1): α(1 − α) per evaluation.
// The count must lie in the 99.9 % binomial interval (normal approximation,
// 3.29 SD). The Shewhart baseline is checked the same way: its limits make
// each evaluation signal with probability p exactly.
func TestFalseRaisesMatchTheory(t *testing.T) {
	days := 40.0
	if testing.Short() {
		days = 10
	}
	c := small()
	c.Rule.Windows = []alert.WindowF{{Length: time.Minute, Share: 1}}
	c.Rule.CUSUMs = nil
	c.Rule.Test = alert.TestClassic
	c.Rule.ClearAlpha, c.Rule.ClearAfter = 2e-3, 1
	c.Alphas, c.Confirms = []float64{2e-3}, []int{1}
	c.Shifts, c.DriftRuns = nil, 0
	c.Days = days
	c.MaxFalse = 20 // per 30 days: p = 20/43200 per evaluation for the baselines
	res, err := Run(context.Background(), c)
	if err != nil {
		t.Fatal(err)
	}
	check := func(name string, r Rate, p float64) {
		n := float64(r.Evaluations)
		if want := days * 1440; n != want {
			t.Errorf("%s: %v evaluations, want %v", name, n, want)
		}
		mean, sd := n*p, math.Sqrt(n*p*(1-p))
		t.Logf("%s: %d false raises in %v evaluations, theory %.1f ± %.1f", name, r.Raises, n, mean, sd)
		if x := float64(r.Raises); math.Abs(x-mean) > 3.29*sd {
			t.Errorf("%s: %v false raises in %v evaluations, theory %.1f ± %.1f", name, x, n, mean, sd)
		}
		if !(r.Low <= r.Per30d && r.Per30d <= r.High) {
			t.Errorf("%s: interval %v–%v does not hold the estimate %v", name, r.Low, r.High, r.Per30d)
		}
	}
	check("window F", res.Points[0].False, 2e-3*(1-2e-3))
	check("Shewhart", res.Baselines[0].False, 20.0/43200)
}

func TestConfigErrors(t *testing.T) {
	tests := []struct {
		name   string
		change func(*Config)
		want   string
	}{
		{"one group", func(c *Config) { c.Scenario.Rates = []float64{1} }, "need at least 2"},
		{"rate", func(c *Config) { c.Scenario.Rates[1] = -1 }, "group 2's rate -1"},
		{"sd", func(c *Config) { c.Scenario.SD = 0 }, "sd 0"},
		{"alpha", func(c *Config) { c.Alphas = []float64{2} }, "alphas: 2"},
		{"confirm", func(c *Config) { c.Confirms = []int{0} }, "confirms: 0"},
		{"shift", func(c *Config) { c.Shifts = []float64{0} }, "shifts: 0"},
		{"days", func(c *Config) { c.Days = 0 }, "days: 0"},
		{"max-false", func(c *Config) { c.MaxFalse = 0 }, "max-false 0"},
		{"rule", func(c *Config) { c.Rule.CUSUMs[0].K = -1 }, "cusums[0] k -1"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			c := small()
			c.Scenario.Rates = append([]float64(nil), c.Scenario.Rates...)
			c.Rule.CUSUMs = append([]alert.ContrastCUSUM(nil), c.Rule.CUSUMs...)
			tt.change(&c)
			_, err := Run(context.Background(), c)
			if err == nil || !strings.Contains(err.Error(), tt.want) {
				t.Errorf("error %v, want one saying %q", err, tt.want)
			}
		})
	}
}

func TestRunCancelled(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := Run(ctx, small()); err == nil {
		t.Error("a cancelled run gave no error")
	}
}

func TestQuantileAndRecommend(t *testing.T) {
	inf := math.Inf(1)
	if q := quantile([]float64{5, 1, 3, inf}, 0.5); q != 3 {
		t.Errorf("median %v, want 3 (the 2nd of 4)", q)
	}
	if q := quantile([]float64{5, inf, inf}, 0.5); !math.IsInf(q, 1) {
		t.Errorf("median %v with two of three censored, want +Inf", q)
	}
	pts := []Point{
		{False: Rate{Per30d: 2}, Delays: []Delay{{Median: 1}}},
		{False: Rate{Per30d: 0.5}, Delays: []Delay{{Median: 4}}},
		{False: Rate{Per30d: 0.9}, Delays: []Delay{{Median: 3}}},
	}
	if r := recommend(pts, []float64{0.25}, 1); r != 2 {
		t.Errorf("recommended %d, want 2 (the quickest within the target)", r)
	}
	if r := recommend(pts, []float64{0.25}, 0.1); r != -1 {
		t.Errorf("recommended %d, want none", r)
	}
}

// TestCommonDriftBlindness: when every group drifts together by 3 SD over
// an hour, the per-group charts on their own targets raise in every run;
// the between-group monitor compares the groups with each other, whose
// statistics do not change under a common shift (the groups are sampled
// at the same instants), and raises at most by chance.
func TestCommonDriftBlindness(t *testing.T) {
	c := small()
	c.Alphas, c.Confirms = []float64{1e-4}, []int{1}
	c.Shifts, c.DriftRuns, c.Days = nil, 10, 2
	res, err := Run(context.Background(), c)
	if err != nil {
		t.Fatal(err)
	}
	for _, b := range res.Baselines {
		if b.Drift.Raised != b.Drift.Runs {
			t.Errorf("%s raised in %d of %d drift runs, want all", b.Name, b.Drift.Raised, b.Drift.Runs)
		}
	}
	p := res.Points[0]
	if p.Drift.Runs != 10 || p.Drift.Raised > 1 {
		t.Errorf("between-group monitor raised in %d of %d drift runs (chance %.2f), want at most 1", p.Drift.Raised, p.Drift.Runs, p.Drift.Chance)
	}
}
