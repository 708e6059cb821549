package alert

import (
	"math"
	"slices"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/stats"
	"gonum.org/v1/gonum/stat/distuv"
)

func TestTrackerConfirmAndClear(t *testing.T) {
	const h, q, n = true, true, false // holds, quiet, neither
	type ev struct{ holds, quiet bool }
	tests := []struct {
		name           string
		confirm, clear int
		seq            []ev
		want           []Phase
	}{
		{"raise at once", 1, 2, []ev{{h, n}, {n, q}, {n, q}, {n, q}},
			[]Phase{PhaseRaise, PhaseRaise, PhaseClear, 0}},
		{"watch then raise", 3, 1, []ev{{h, n}, {h, n}, {h, n}, {n, q}},
			[]Phase{PhaseWatch, PhaseWatch, PhaseRaise, PhaseClear}},
		{"watch broken", 2, 1, []ev{{h, n}, {n, n}, {h, n}, {h, n}},
			[]Phase{PhaseWatch, 0, PhaseWatch, PhaseRaise}},
		{"between levels resets quiet count", 1, 2, []ev{{h, n}, {n, q}, {n, n}, {n, q}, {n, q}},
			[]Phase{PhaseRaise, PhaseRaise, PhaseRaise, PhaseRaise, PhaseClear}},
		{"holding again resets quiet count", 1, 2, []ev{{h, n}, {n, q}, {h, n}, {n, q}, {n, q}},
			[]Phase{PhaseRaise, PhaseRaise, PhaseRaise, PhaseRaise, PhaseClear}},
		{"raise again after clear", 1, 1, []ev{{h, n}, {n, q}, {h, n}},
			[]Phase{PhaseRaise, PhaseClear, PhaseRaise}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			var tr tracker
			for i, e := range tt.seq {
				if got := tr.step(e.holds, e.quiet, tt.confirm, tt.clear); got != tt.want[i] {
					t.Errorf("evaluation %d: phase %v, want %v", i+1, got, tt.want[i])
				}
			}
		})
	}
}

// twoGroups returns two groups of 50 values, SD 1, d apart: F = 25 d² on
// (1, 98) df.
func twoGroups(d float64) []stats.Accumulator {
	return []stats.Accumulator{accOf(50, d/2, 1), accOf(50, -d/2, 1)}
}

func TestWindowFMatchesStats(t *testing.T) {
	r := meansOnly([]WindowF{{Length: time.Minute, Share: 0.5}}, nil)
	r.Alpha, r.ClearAlpha, r.Test = 2e-3, 0.2, TestClassic
	for _, d := range []float64{0, 0.3, 0.6, 0.7, 0.8, 1, 2} {
		m, err := NewMonitor(r)
		if err != nil {
			t.Fatal(err)
		}
		span := twoGroups(d)
		tab, err := stats.OneWay(span)
		if err != nil {
			t.Fatal(err)
		}
		// Hand check: SS between = 25 d², MS within = 1.
		if !near(tab.F, 25*d*d, 1e-12) {
			t.Errorf("d = %v: F %v, want %v", d, tab.F, 25*d*d)
		}
		cs := m.Step(inputAt(0, []string{"A", "B"}, span, nil))
		fires := tab.P < 0.5*2e-3
		if got := phaseOf(cs, KindMeansDiverge) == PhaseRaise; got != fires {
			t.Errorf("d = %v (p = %.3g): raised %v, want %v", d, tab.P, got, fires)
		}
		if fires {
			c := cs[0]
			if c.Test != "F" || c.F != tab.F || c.P != tab.P || c.Effect != tab.Omega2 {
				t.Errorf("d = %v: figures %s F %v p %v ω² %v, want F %v p %v ω² %v", d, c.Test, c.F, c.P, c.Effect, tab.F, tab.P, tab.Omega2)
			}
			if c.Detector != "F 1m" {
				t.Errorf("detector %q, want \"F 1m\"", c.Detector)
			}
		}
	}
}

func TestWelchChoice(t *testing.T) {
	span := []stats.Accumulator{accOf(40, 3, 3), accOf(40, 0, 1), accOf(40, 0, 1)}
	want, err := stats.Welch(span)
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		test TestChoice
		bfP  float64
		name string
	}{{TestWelch, 0.5, "Welch F"}, {TestClassic, 1e-9, "F"}, {TestAuto, 1e-9, "Welch F"}, {TestAuto, 0.5, "F"}} {
		r := meansOnly([]WindowF{{Length: time.Minute, Share: 1}}, nil)
		r.Alpha, r.ClearAlpha, r.Test = 0.05, 0.2, tc.test
		m, _ := NewMonitor(r)
		in := inputAt(0, []string{"A", "B", "C"}, span, nil)
		in.Report = &stats.Report{BrownForsythe: &stats.FTest{P: tc.bfP}}
		cs := m.Step(in)
		if len(cs) == 0 {
			t.Fatalf("%v: no condition", tc.test)
		}
		if cs[0].Test != tc.name {
			t.Errorf("%v, Brown–Forsythe p %v: test %q, want %q", tc.test, tc.bfP, cs[0].Test, tc.name)
		}
		if tc.name == "Welch F" && (cs[0].F != want.F || cs[0].P != want.P) {
			t.Errorf("Welch F %v p %v, want stats' %v %v", cs[0].F, cs[0].P, want.F, want.P)
		}
	}
}

func TestMeansNamesGroupShiftInterval(t *testing.T) {
	// Four groups of 100 values, SD 1; C is 0.8 low, A and B within the
	// analysis-of-means limits of the rest (±0.196). Against the rest
	// (300 values, mean 0): shift −0.8, interval ±t(396)·1·√(1/100 + 1/300).
	span := []stats.Accumulator{accOf(100, 0.1, 1), accOf(100, -0.1, 1), accOf(100, -0.8, 1), accOf(100, 0, 1)}
	r := meansOnly([]WindowF{{Length: time.Minute, Share: 1}}, nil)
	r.Alpha, r.ClearAlpha, r.Test = 1e-4, 0.01, TestClassic
	m, _ := NewMonitor(r)
	cs := m.Step(inputAt(0, []string{"A", "B", "C", "D"}, span, nil))
	if len(cs) != 1 {
		t.Fatalf("conditions %+v, want one", cs)
	}
	c := cs[0]
	if len(c.Groups) == 0 || c.Groups[0] != "C" || c.Direction != -1 {
		t.Fatalf("named %v direction %d, want C low", c.Groups, c.Direction)
	}
	h := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: 396}.Quantile(0.975) * math.Sqrt(1.0/100+1.0/300)
	if !near(c.Shift, -0.8, 1e-12) || !near(c.Lower, -0.8-h, 1e-9) || !near(c.Upper, -0.8+h, 1e-9) {
		t.Errorf("shift %v [%v, %v], want −0.8 [%v, %v]", c.Shift, c.Lower, c.Upper, -0.8-h, -0.8+h)
	}

	// The interval is about [−1.03, −0.57]: it lies beyond a practical
	// difference of 0.5 but not of 0.7; the estimate −0.8 passes 0.7 but
	// not 0.9.
	for _, tc := range []struct {
		practical float64
		judge     Judge
		raise     bool
	}{{0.5, JudgeInterval, true}, {0.7, JudgeInterval, false}, {0.7, JudgeEstimate, true}, {0.9, JudgeEstimate, false}} {
		r.Practical, r.Judge = tc.practical, tc.judge
		m, _ := NewMonitor(r)
		got := phaseOf(m.Step(inputAt(0, []string{"A", "B", "C", "D"}, span, nil)), KindMeansDiverge) == PhaseRaise
		if got != tc.raise {
			t.Errorf("practical %v judged on %v: raised %v, want %v", tc.practical, tc.judge, got, tc.raise)
		}
	}
}

func TestContrastCUSUMByHand(t *testing.T) {
	// Three groups of 10 values, SD 1. A is up by 2·√0.15 so that
	// z_A = 2 exactly and z_B = z_C = −1. With k = 0.5, h = 5: S⁺_A grows
	// by 1.5 per evaluation, crossing 5 at the 4th; S⁻_B and S⁻_C grow by
	// 0.5 and cross at the 10th.
	up := 2 * math.Sqrt(0.15)
	recent := []stats.Accumulator{accOf(10, up, 1), accOf(10, 0, 1), accOf(10, 0, 1)}
	for _, confirm := range []int{1, 2} {
		r := meansOnly(nil, []ContrastCUSUM{{K: 0.5, H: 5, Share: 1}})
		r.Confirm = confirm
		m, _ := NewMonitor(r)
		for e := 1; e <= 10; e++ {
			cs := m.Step(inputAt(e, []string{"A", "B", "C"}, nil, recent))
			want := Phase(0)
			switch {
			case e >= 3+confirm:
				want = PhaseRaise
			case e == 4 && confirm == 2:
				want = PhaseWatch
			}
			if got := phaseOf(cs, KindMeansDiverge); got != want {
				t.Errorf("confirm %d, evaluation %d: phase %v, want %v", confirm, e, got, want)
			}
			if e >= 4 && len(cs) == 1 {
				c := cs[0]
				wantGroups := 1
				if e >= 10 {
					wantGroups = 3
				}
				if c.Groups[0] != "A" || c.Direction != 1 || len(c.Groups) != wantGroups {
					t.Errorf("evaluation %d: groups %v direction %d, want A first, high, %d groups", e, c.Groups, c.Direction, wantGroups)
				}
				if c.Detector != "CUSUM k=0.5" {
					t.Errorf("detector %q", c.Detector)
				}
			}
		}
		g := m.group["A"]
		if !near(g.hi[0], 5, 1e-12) { // capped at h
			t.Errorf("S⁺_A = %v after 10 evaluations, want the cap 5", g.hi[0])
		}
	}
}

func TestMeansClearWithHysteresis(t *testing.T) {
	r := meansOnly([]WindowF{{Length: time.Minute, Share: 1}}, nil)
	r.Alpha, r.ClearAlpha, r.ClearAfter, r.Test = 1e-3, 0.1, 2, TestClassic
	m, _ := NewMonitor(r)
	// d = 1: p ≈ 3e-6, fires; d = 0.4: F = 4, p ≈ 0.048, between the
	// levels; d = 0: quiet.
	seq := []struct {
		d    float64
		want Phase
	}{{1, PhaseRaise}, {0, PhaseRaise}, {0.4, PhaseRaise}, {0, PhaseRaise}, {0, PhaseClear}, {0, 0}, {0.4, 0}}
	for i, s := range seq {
		cs := m.Step(inputAt(i, []string{"A", "B"}, twoGroups(s.d), nil))
		if got := phaseOf(cs, KindMeansDiverge); got != s.want {
			t.Errorf("evaluation %d (d = %v): phase %v, want %v", i, s.d, got, s.want)
		}
	}
}

func TestMinNAndMinGroups(t *testing.T) {
	r := meansOnly([]WindowF{{Length: time.Minute, Share: 1}}, nil)
	r.Alpha, r.ClearAlpha, r.MinN, r.MinGroups, r.Test = 1e-3, 0.1, 20, 3, TestClassic
	m, _ := NewMonitor(r)
	// The third group has too few values: two groups remain, below 3.
	span := append(twoGroups(2), accOf(10, 0, 1))
	if cs := m.Step(inputAt(0, []string{"A", "B", "C"}, span, nil)); len(cs) != 0 {
		t.Errorf("conditions %+v with two groups taking part, want none", cs)
	}
	span[2] = accOf(20, 0, 1)
	if cs := m.Step(inputAt(1, []string{"A", "B", "C"}, span, nil)); phaseOf(cs, KindMeansDiverge) != PhaseRaise {
		t.Errorf("conditions %+v with three groups, want a raise", cs)
	}
	// A silent group is left out.
	in := inputAt(2, []string{"A", "B", "C"}, span, nil)
	in.Silent = []string{"B"}
	m2, _ := NewMonitor(r)
	if cs := m2.Step(in); len(cs) != 0 {
		t.Errorf("conditions %+v with B silent, want none", cs)
	}
}

func TestMonitorShortInputsDoNotPanic(t *testing.T) {
	m, _ := NewMonitor(DefaultRule())
	ins := []Input{
		{},
		{Groups: []string{"A", "B"}},
		{Groups: []string{"A", "B"}, Spans: []Span{{Groups: []stats.Accumulator{accOf(10, 0, 1)}}}},
		{Groups: []string{"A"}, Recent: []stats.Accumulator{accOf(10, 0, 1), accOf(10, 5, 1), accOf(3, 1, 0)}},
		{Groups: []string{"A", "B"}, Report: &stats.Report{}, LastSeen: []time.Time{mt0}},
	}
	for _, in := range ins {
		m.Step(in)
	}
}

func TestSilentGroup(t *testing.T) {
	r := meansOnly(nil, []ContrastCUSUM{{K: 0.5, Share: 1}})
	r.SilentAfter, r.ClearAfter = 10*time.Minute, 1
	m, _ := NewMonitor(r)
	groups := []string{"A", "B", "C"}
	step := func(min int, last ...time.Duration) []Condition {
		in := Input{Time: mt0.Add(time.Duration(min) * time.Minute), Groups: groups, LastSeen: make([]time.Time, 3)}
		for i, l := range last {
			if l >= 0 {
				in.LastSeen[i] = mt0.Add(l)
			}
		}
		return m.Step(in)
	}
	if cs := step(5, -1, 5*time.Minute, 5*time.Minute); len(cs) != 0 {
		t.Errorf("A never seen: conditions %+v, want none", cs)
	}
	step(6, 6*time.Minute, 6*time.Minute, 6*time.Minute)
	// A last seen at 6 min; at 16 min it has been quiet 10 min.
	cs := step(16, -1, 16*time.Minute, 16*time.Minute)
	if len(cs) != 1 || cs[0].Kind != KindGroupSilent || cs[0].Key != "A" || cs[0].Phase != PhaseRaise {
		t.Fatalf("conditions %+v, want A silent", cs)
	}
	if !cs[0].From.Equal(mt0.Add(6 * time.Minute)) {
		t.Errorf("silent from %v, want the last seen time", cs[0].From)
	}
	// Everyone silent: no one goes on, so it is not a silent group but
	// a stopped line; A stays raised until it reports again.
	if cs := step(40, -1, -1, -1); phaseOf(cs, KindGroupSilent) != PhaseRaise || len(cs) != 1 {
		t.Errorf("all quiet: conditions %+v, want A still raised only", cs)
	}
	if cs := step(41, 41*time.Minute, 41*time.Minute, 41*time.Minute); phaseOf(cs, KindGroupSilent) != PhaseClear {
		t.Errorf("A back: conditions %+v, want a clear", cs)
	}
}

func TestInputRejected(t *testing.T) {
	r := meansOnly(nil, []ContrastCUSUM{{K: 0.5, Share: 1}})
	r.Reject, r.ClearAfter = RejectRule{Rate: 0.05, ClearRate: 0.02, MinCount: 100}, 1
	m, _ := NewMonitor(r)
	seq := []struct {
		acc, rej uint64
		want     Phase
	}{{90, 9, 0}, {900, 40, 0}, {900, 60, PhaseRaise}, {900, 30, PhaseRaise}, {900, 10, PhaseClear}}
	for i, s := range seq {
		cs := m.Step(Input{Time: mt0.Add(time.Duration(i) * time.Minute), Accepted: s.acc, Rejected: s.rej})
		if got := phaseOf(cs, KindInputRejected); got != s.want {
			t.Errorf("%d of %d rejected: phase %v, want %v", s.rej, s.acc+s.rej, got, s.want)
		}
		if s.want == PhaseRaise && !near(cs[0].RejectRate, float64(s.rej)/float64(s.acc+s.rej), 1e-12) {
			t.Errorf("reject rate %v", cs[0].RejectRate)
		}
	}
}

func TestSpreadDiverges(t *testing.T) {
	r := meansOnly(nil, []ContrastCUSUM{{K: 0.5, Share: 1}})
	r.Spread, r.ClearAfter = SpreadRule{Alpha: 1e-3, ClearAlpha: 0.05, MinRatio: 1.5}, 1
	m, _ := NewMonitor(r)
	rep := func(p, sdB float64) *stats.Report {
		return &stats.Report{
			Groups:        []stats.GroupSummary{{Name: "A", N: 50, SD: 1.3}, {Name: "B", N: 50, SD: sdB}},
			Table:         stats.Table{ResidualSD: 1.5},
			BrownForsythe: &stats.FTest{F: 30, P: p},
		}
	}
	seq := []struct {
		p, sdB float64
		want   Phase
	}{{1e-4, 1.2, 0}, {1e-4, 2.5, PhaseRaise}, {0.01, 2.5, PhaseRaise}, {0.2, 1, PhaseClear}}
	for i, s := range seq {
		cs := m.Step(Input{Time: mt0.Add(time.Duration(i) * time.Minute), Report: rep(s.p, s.sdB)})
		if got := phaseOf(cs, KindSpreadDiverge); got != s.want {
			t.Errorf("p %v, SD of B %v: phase %v, want %v", s.p, s.sdB, got, s.want)
		}
		if s.want == PhaseRaise && (cs[0].Groups[0] != "B" || !near(cs[0].Ratio, s.sdB/1.5, 1e-12)) {
			t.Errorf("named %v ratio %v, want B, %v", cs[0].Groups, cs[0].Ratio, s.sdB/1.5)
		}
	}
}

// TestMeansNamesOnlyPracticalGroups: with thousands of values, analysis of
// means names a second group that differs by a clear but negligible 0.06
// (B: deviation 0.04 from the mean of B, C, D, beyond limits of about
// ±0.03). Without a practical difference both are named; with one of 0.3
// only A, whose shift of 1.5 is worth an alert.
func TestMeansNamesOnlyPracticalGroups(t *testing.T) {
	span := []stats.Accumulator{accOf(4000, 1.5, 1), accOf(4000, 0.06, 1), accOf(4000, 0, 1), accOf(4000, 0, 1)}
	groups := []string{"A", "B", "C", "D"}
	for _, tc := range []struct {
		practical float64
		want      []string
		shift     float64 // A against the groups not named
	}{{0, []string{"A", "B"}, 1.5}, {0.3, []string{"A"}, 1.5 - 0.02}} {
		r := meansOnly([]WindowF{{Length: time.Minute, Share: 1}}, nil)
		r.Alpha, r.ClearAlpha, r.Test, r.Practical = 1e-4, 0.01, TestClassic, tc.practical
		m, _ := NewMonitor(r)
		cs := m.Step(inputAt(0, groups, span, nil))
		if len(cs) != 1 || cs[0].Phase != PhaseRaise {
			t.Fatalf("practical %v: conditions %+v, want one raise", tc.practical, cs)
		}
		if !slices.Equal(cs[0].Groups, tc.want) {
			t.Errorf("practical %v: named %v, want %v", tc.practical, cs[0].Groups, tc.want)
		}
		if !near(cs[0].Shift, tc.shift, 1e-9) {
			t.Errorf("practical %v: shift %v, want %v (A against the groups not named)", tc.practical, cs[0].Shift, tc.shift)
		}
	}
}
