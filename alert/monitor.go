package alert

import (
	"fmt"
	"math"
	"strings"
	"time"

	"github.com/lockstep-project/lockstep/stats"
)

// Monitor turns each evaluation's Input of one characteristic into
// Conditions. It runs the means detectors (window F at several lengths,
// between-group contrast CUSUMs), the spread, silent-group and
// input-rejected conditions, and does the confirmation and the clearing
// with hysteresis. A Monitor is not safe for concurrent use.
//
// The contrast CUSUM of group i (Page 1954, "Continuous inspection
// schemes", Biometrika 41, 100–115) takes at each evaluation the values
// since the previous one and forms
//
//	z_i = (mean_i − mean_rest) / SE_i,
//
// mean_rest the mean of the other taking part groups' values together and
// SE_i the contrast's standard error, so that z_i is about N(0, 1) in
// control. With Rule.Test classic, SE_i = s_p·√(1/n_i + 1/n_rest) on the
// pooled within-group SD s_p of the longest window span (of Recent when
// there is no span). Otherwise (auto, welch) each group has its own
// variance v_j, as in Welch's (1951) test:
//
//	SE_i² = v_i/n_i + Σ_{j≠i} n_j·v_j / n_rest²,
//
// with equal n_j the familiar v_i/n_i + Σ_{j≠i} v_j/n_j / (k−1)², and v_j
// the larger of group j's variance over the longest window span and over
// its recent values (see contrastZ). The pooled s_p would let a group whose
// spread grew, with its mean unchanged, produce z values wider than
// N(0, 1) and set off the CUSUMs: a spread change is the spread condition's
// business, not the means condition's. Then
// S⁺_i = max(0, S⁺_i + z_i − k) and S⁻_i = max(0, S⁻_i − z_i − k), and the
// detector fires while some S ≥ h. Like the F test it is blind to a drift
// that moves every group together. Sums are capped at h (see cusumStep),
// so that once a shift is over they fall below the clearing level within
// about (h − h_clear)/k evaluations, however long the shift lasted; when
// the means condition clears, every sum restarts at zero.
type Monitor struct {
	rule  Rule
	names []string
	group map[string]*groupState
	gs    []*groupState // aligned with names

	means, spread, reject tracker

	hCache map[hKey]float64
	// scratch
	accs, long []stats.Accumulator
}

type hKey struct {
	det   int
	g     int
	clear bool
}

// groupState is what the monitor keeps per group, by name.
type groupState struct {
	name     string
	lastSeen time.Time
	silent   tracker
	hi, lo   []float64 // per CUSUM detector
}

// tracker is the confirmation and clearing of one condition.
type tracker struct {
	hold   int  // consecutive evaluations the condition held, before raising
	raised bool // raised and not yet cleared
	quiet  int  // consecutive quiet evaluations while raised
}

// step takes one evaluation and returns the condition's phase, 0 when it is
// absent.
func (t *tracker) step(holds, quiet bool, confirm, clearAfter int) Phase {
	if !t.raised {
		if !holds {
			t.hold = 0
			return 0
		}
		t.hold++
		if t.hold < confirm {
			return PhaseWatch
		}
		t.raised, t.hold, t.quiet = true, 0, 0
		return PhaseRaise
	}
	if quiet && !holds {
		t.quiet++
		if t.quiet >= clearAfter {
			*t = tracker{}
			return PhaseClear
		}
	} else {
		t.quiet = 0
	}
	return PhaseRaise
}

// NewMonitor returns a monitor for rule, or the rule's validation error.
func NewMonitor(rule Rule) (*Monitor, error) {
	if err := rule.Validate(); err != nil {
		return nil, err
	}
	r := rule
	r.Windows = append([]WindowF(nil), rule.Windows...)
	r.CUSUMs = append([]ContrastCUSUM(nil), rule.CUSUMs...)
	return &Monitor{rule: r, group: make(map[string]*groupState), hCache: make(map[hKey]float64)}, nil
}

// Rule returns the monitor's rule.
func (m *Monitor) Rule() Rule { return m.rule }

// align makes m.gs follow names.
func (m *Monitor) align(names []string) {
	same := len(names) == len(m.names)
	for i := 0; same && i < len(names); i++ {
		same = names[i] == m.names[i]
	}
	if same {
		return
	}
	m.names = append(m.names[:0], names...)
	m.gs = m.gs[:0]
	for _, n := range names {
		g := m.group[n]
		if g == nil {
			g = &groupState{name: n}
			m.group[n] = g
		}
		if len(g.hi) != len(m.rule.CUSUMs) {
			g.hi = make([]float64, len(m.rule.CUSUMs))
			g.lo = make([]float64, len(m.rule.CUSUMs))
		}
		m.gs = append(m.gs, g)
	}
}

// Step takes one evaluation and returns the conditions in watch, raised or
// just cleared: the means condition first, then spread, the silent groups
// in the window's group order, and input rejected. It never panics on
// short or inconsistent slices in the input: what is missing counts as
// empty.
func (m *Monitor) Step(in Input) []Condition {
	m.align(in.Groups)
	r := &m.rule
	var out []Condition
	silent := make([]bool, len(in.Groups))
	for i, n := range in.Groups {
		for _, s := range in.Silent {
			if s == n {
				silent[i] = true
			}
		}
	}

	mr := m.meansStep(&in, silent)
	holds := mr.fired && mr.practical
	if ph := m.means.step(holds, mr.quiet, r.Confirm, r.ClearAfter); ph != 0 {
		c := mr.cond
		c.Kind, c.Phase = KindMeansDiverge, ph
		if ph == PhaseClear {
			c.Reason = "means agree again: every detector quiet for " + plural(r.ClearAfter, "evaluation")
			// The CUSUMs start afresh, so that sums still near the clearing
			// level do not make the next raise come sooner than in control.
			for _, g := range m.group {
				clear(g.hi)
				clear(g.lo)
			}
		}
		out = append(out, c)
	}

	if c, holds, quiet := m.spreadCheck(&in); true {
		if ph := m.spread.step(holds, quiet, r.Confirm, r.ClearAfter); ph != 0 {
			c.Kind, c.Phase = KindSpreadDiverge, ph
			if ph == PhaseClear {
				c.Reason = "spreads agree again"
			}
			out = append(out, c)
		}
	}

	out = m.silentStep(&in, out)

	if c, holds, quiet := m.rejectCheck(&in); true {
		if ph := m.reject.step(holds, quiet, r.Confirm, r.ClearAfter); ph != 0 {
			c.Kind, c.Phase = KindInputRejected, ph
			if ph == PhaseClear {
				c.Reason = "reject rate back to normal"
			}
			out = append(out, c)
		}
	}
	return out
}

// spanAccs returns the accumulators of span s taking part in a means test:
// groups not silent and with at least MinN values; the others are empty.
// It returns how many take part.
func (m *Monitor) spanAccs(src []stats.Accumulator, silent []bool) ([]stats.Accumulator, int) {
	m.accs = append(m.accs[:0], make([]stats.Accumulator, len(silent))...)
	k := 0
	for i := range silent {
		if i < len(src) && !silent[i] && src[i].N >= m.rule.MinN {
			m.accs[i] = src[i]
			k++
		}
	}
	return m.accs, k
}

// silentStep runs the silent-group condition of every group.
func (m *Monitor) silentStep(in *Input, out []Condition) []Condition {
	r := &m.rule
	for i, g := range m.gs {
		if i < len(in.LastSeen) && in.LastSeen[i].After(g.lastSeen) {
			g.lastSeen = in.LastSeen[i]
		}
	}
	if r.SilentAfter <= 0 {
		return out
	}
	isSilent := func(g *groupState) bool {
		return !g.lastSeen.IsZero() && in.Time.Sub(g.lastSeen) >= r.SilentAfter
	}
	live := 0
	for _, g := range m.gs {
		if !g.lastSeen.IsZero() && !isSilent(g) {
			live++
		}
	}
	for _, g := range m.gs {
		s := isSilent(g)
		holds := s && live > 0
		ph := g.silent.step(holds, !s, r.Confirm, r.ClearAfter)
		if ph == 0 {
			continue
		}
		c := Condition{Kind: KindGroupSilent, Phase: ph, Key: g.name, Groups: []string{g.name},
			From: g.lastSeen, To: in.Time, Detector: "silence"}
		if ph == PhaseClear {
			c.Reason = fmt.Sprintf("group %q reports again", g.name)
		} else {
			c.Reason = fmt.Sprintf("group %q has sent nothing for %v while %s go on", g.name,
				in.Time.Sub(g.lastSeen).Round(time.Second), plural(live, "other group"))
		}
		out = append(out, c)
	}
	return out
}

// rejectCheck evaluates the input-rejected condition.
func (m *Monitor) rejectCheck(in *Input) (Condition, bool, bool) {
	r := &m.rule.Reject
	if r.Off {
		return Condition{}, false, true
	}
	total := in.Accepted + in.Rejected
	if total < r.MinCount {
		return Condition{Detector: "reject rate", From: in.RecentFrom, To: in.Time,
			Reason: fmt.Sprintf("too few messages (%d) to judge the reject rate", total)}, false, true
	}
	rate := float64(in.Rejected) / float64(total)
	c := Condition{Detector: "reject rate", RejectRate: rate, From: in.RecentFrom, To: in.Time,
		Reason: fmt.Sprintf("%d of %d messages rejected (%.1f %%), above %.1f %%: check the sensor or gateway",
			in.Rejected, total, 100*rate, 100*r.Rate)}
	return c, rate > r.Rate, rate <= r.ClearRate
}

// spreadCheck evaluates the spread condition on the main window's report.
func (m *Monitor) spreadCheck(in *Input) (Condition, bool, bool) {
	s := &m.rule.Spread
	rep := in.Report
	if s.Off || rep == nil || rep.BrownForsythe == nil || rep.Table.ResidualSD <= 0 {
		return Condition{}, false, true
	}
	best, far := -1, 0.0
	for i, g := range rep.Groups {
		if g.N < m.rule.MinN {
			continue
		}
		if d := math.Abs(math.Log(g.SD / rep.Table.ResidualSD)); best < 0 || d > far {
			best, far = i, d
		}
	}
	if best < 0 {
		return Condition{}, false, true
	}
	bf := rep.BrownForsythe
	ratio := rep.Groups[best].SD / rep.Table.ResidualSD
	word := "more"
	if ratio < 1 {
		word = "less"
	}
	c := Condition{Detector: "Brown–Forsythe", Groups: []string{rep.Groups[best].Name}, Test: "Brown–Forsythe",
		F: bf.F, P: bf.P, Ratio: ratio, From: in.ReportFrom, To: in.ReportTo,
		Reason: fmt.Sprintf("group %q varies %s than the others: SD %.3g %s, %.2f × the pooled SD (Brown–Forsythe p = %.2g)",
			rep.Groups[best].Name, word, rep.Groups[best].SD, in.Unit, ratio, bf.P)}
	holds := bf.P < s.Alpha && far >= math.Log(s.MinRatio)
	return c, holds, bf.P >= s.ClearAlpha
}

func plural(n int, word string) string {
	if n == 1 {
		return "1 " + word
	}
	return fmt.Sprintf("%d %ss", n, word)
}

// durationName writes a span length compactly: 1m, 30m, 1h30m, 45s.
func durationName(d time.Duration) string {
	s := d.String()
	if strings.HasSuffix(s, "m0s") {
		s = strings.TrimSuffix(s, "0s")
	}
	if strings.HasSuffix(s, "h0m") {
		s = strings.TrimSuffix(s, "0m")
	}
	return s
}
