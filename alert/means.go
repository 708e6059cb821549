package alert

import (
	"fmt"
	"math"
	"strings"

	"github.com/lockstep-project/lockstep/stats"
	"gonum.org/v1/gonum/stat/distuv"
)

// meansResult is one evaluation of the means detectors.
type meansResult struct {
	fired     bool // some detector fires
	quiet     bool // every detector is below its clearing level (or not available)
	practical bool // the named shift passes the practical test (true when off)
	cond      Condition
}

// fTest is one window F detector's result at one evaluation.
type fTest struct {
	ok     bool
	test   string
	f, p   float64
	effect float64
	table  stats.Table
}

// windowTest runs the test of equal means on accs (groups taking part).
func (m *Monitor) windowTest(accs []stats.Accumulator, rep *stats.Report) fTest {
	t, err := stats.OneWay(accs)
	if err != nil {
		return fTest{}
	}
	res := fTest{ok: true, test: "F", f: t.F, p: t.P, effect: t.Omega2, table: t}
	welch := m.rule.Test == TestWelch ||
		m.rule.Test == TestAuto && rep != nil && rep.BrownForsythe != nil && rep.BrownForsythe.P < m.rule.Spread.Alpha
	if welch {
		if w, err := stats.Welch(accs); err == nil {
			res.test, res.f, res.p = "Welch F", w.F, w.P
		}
	}
	return res
}

// meansStep runs every means detector and, when one fires or the condition
// is raised, works out its figures.
func (m *Monitor) meansStep(in *Input, silent []bool) meansResult {
	r := &m.rule
	res := meansResult{quiet: true, practical: true}
	var fired []string
	best, bestP := -1, math.Inf(1) // firing window with the smallest p
	longest := -1
	var tests []fTest
	for i, d := range r.Windows {
		var span []stats.Accumulator
		if i < len(in.Spans) {
			span = in.Spans[i].Groups
		}
		accs, k := m.spanAccs(span, silent)
		var ft fTest
		if k >= r.MinGroups {
			ft = m.windowTest(accs, in.Report)
		}
		tests = append(tests, ft)
		if !ft.ok {
			continue
		}
		if longest < 0 || d.Length > r.Windows[longest].Length {
			longest = i
		}
		if ft.p < d.Share*r.Alpha {
			fired = append(fired, ft.test+" "+durationName(d.Length))
			if ft.p < bestP {
				best, bestP = i, ft.p
			}
		}
		if ft.p < d.Share*r.ClearAlpha {
			res.quiet = false
		}
	}

	// Contrast CUSUMs.
	sp := 0.0
	var long []stats.Accumulator // the longest span's groups taking part
	if longest >= 0 {
		sp = tests[longest].table.ResidualSD
		l, _ := m.spanAccs(in.Spans[longest].Groups, silent)
		m.long = append(m.long[:0], l...)
		long = m.long
	}
	recent, k := m.spanAccs(in.Recent, silent)
	if sp <= 0 && k >= 2 {
		if t, err := stats.OneWay(recent); err == nil {
			sp = t.ResidualSD
		}
	}
	var cusumGroups []int
	var cusumDir []int
	if k >= r.MinGroups && sp > 0 && len(r.CUSUMs) > 0 {
		var all stats.Accumulator
		for _, a := range recent {
			all.Merge(a)
		}
		zs := contrastZ(recent, all, long, sp, r.Test != TestClassic)
		for j, c := range r.CUSUMs {
			h := m.threshold(j, c, c.Share*r.Alpha, k, false)
			hc := m.threshold(j, c, c.Share*r.ClearAlpha, k, true)
			name := "CUSUM k=" + trimFloat(c.K)
			fire := false
			for i, a := range recent {
				if a.N == 0 {
					continue
				}
				g := m.gs[i]
				g.hi[j], g.lo[j] = cusumStep(g.hi[j], g.lo[j], zs[i], c.K, h)
				if g.hi[j] >= h || g.lo[j] >= h {
					fire = true
					if !containsInt(cusumGroups, i) {
						cusumGroups = append(cusumGroups, i)
						dir := 1
						if g.lo[j] > g.hi[j] {
							dir = -1
						}
						cusumDir = append(cusumDir, dir)
					}
				}
			}
			for i := range recent {
				if i < len(m.gs) && (m.gs[i].hi[j] >= hc || m.gs[i].lo[j] >= hc) {
					res.quiet = false
				}
			}
			if fire {
				fired = append(fired, name)
			}
		}
	}
	res.fired = len(fired) > 0
	if !res.fired && !m.means.raised {
		return res
	}

	// Figures: the firing window with the smallest p, or else the longest.
	fig := best
	if fig < 0 {
		fig = longest
	}
	c := Condition{Detector: strings.Join(fired, ", ")}
	var accs []stats.Accumulator
	welch := r.Test != TestClassic // the interval's form: Welch's or pooled
	if fig >= 0 {
		accs, _ = m.spanAccs(in.Spans[fig].Groups, silent)
		ft := tests[fig]
		c.Test, c.F, c.P, c.Effect = ft.test, ft.f, ft.p, ft.effect
		c.From, c.To = in.Spans[fig].From, in.Spans[fig].To
		welch = ft.test == "Welch F"
	} else {
		accs, _ = m.spanAccs(in.Recent, silent)
		c.From, c.To = in.RecentFrom, in.Time
	}
	named, dirs := cusumGroups, cusumDir
	if best >= 0 || len(named) == 0 {
		named, dirs = m.nameByMeans(accs, in.Report, in.Groups)
	}
	if len(named) == 0 {
		c.Reason = "means differ but no single group stands out"
		res.cond = c
		return res
	}
	if r.Practical > 0 && len(named) > 1 {
		// Name only the groups whose own shift is worth an alert: with
		// thousands of values, analysis of means also names groups that
		// differ by a statistically clear but negligible amount. Each is
		// judged against the groups not named, as the first one is.
		keep, kdirs := named[:1:1], dirs[:1:1]
		for k, i := range named[1:] {
			if sh, l, h, ok := shiftOf(accs, named, i, r.Confidence, welch); ok && r.worthIt(sh, l, h) {
				keep, kdirs = append(keep, i), append(kdirs, dirs[k+1])
			}
		}
		named, dirs = keep, kdirs
	}
	shift, lo, hi, ok := shiftOf(accs, named, named[0], r.Confidence, welch)
	for _, i := range named {
		c.Groups = append(c.Groups, in.Groups[i])
	}
	c.Direction = dirs[0]
	if ok {
		c.Shift, c.Lower, c.Upper = shift, lo, hi
		if shift > 0 {
			c.Direction = 1
		} else if shift < 0 {
			c.Direction = -1
		}
	}
	if r.Practical > 0 {
		res.practical = ok && r.worthIt(shift, lo, hi)
	}
	word := "high"
	if c.Direction < 0 {
		word = "low"
	}
	c.Reason = fmt.Sprintf("group %q runs %s by %.3g %s [%.3g, %.3g] against the others (%s)",
		in.Groups[named[0]], word, shift, in.Unit, lo, hi, c.Detector)
	if len(named) > 1 {
		c.Reason += fmt.Sprintf("; %d groups named", len(named))
	}
	if !res.practical {
		c.Reason += fmt.Sprintf("; below the practical difference %.3g %s", r.Practical, in.Unit)
	}
	res.cond = c
	return res
}

// contrastZ returns each taking-part group's standardized contrast
// against the others for the CUSUMs (see Monitor): the group's recent mean
// minus the n-weighted mean of the other groups' recent values, over its
// standard error. all is the recent values of every group together.
//
// With welch false the standard error is s_p·√(1/n_i + 1/n_rest) on the
// pooled within-group SD sp, which assumes equal spreads. With welch true
// each group has its own variance, as in Welch's (1951) test (B. L. Welch,
// "On the comparison of several mean values: an alternative approach",
// Biometrika 38, 330–336):
//
//	SE_i² = v_i/n_i + Σ_{j≠i} n_j·v_j / n_rest²,
//
// the variance of the contrast when the groups' values are independent
// with variances v_j (with equal n_j it is v_i/n_i + Σ_{j≠i} v_j/n_j/(k−1)²).
// v_j is the larger of group j's variance over long (the longest window
// span: about 30 times the values of one evaluation, so it is stable) and
// over its recent values. The recent one covers the minutes after a spread
// grows, while the long span still holds mostly values of the old spread
// (with the long span alone, the test TestSpreadChangeRaisesNoMeansAlert
// raised in 29 runs of 60). Taking the larger keeps z at about N(0, 1), or
// narrower, when a group's spread changes but its mean does not; in
// control it makes the CUSUMs fire less often than their share, so the
// default Alpha is twice the pooled form's for the same false raises, at
// which `lockstep calibrate` measures the same times to raise (see the
// README). A group without values in long (too few, or no span) uses sp²
// there.
func contrastZ(recent []stats.Accumulator, all stats.Accumulator, long []stats.Accumulator, sp float64, welch bool) []float64 {
	zs := make([]float64, len(recent))
	var v []float64
	if welch {
		v = make([]float64, len(recent))
		for j, a := range recent {
			if a.N == 0 {
				continue
			}
			v[j] = sp * sp
			if j < len(long) && long[j].N >= 2 {
				v[j] = long[j].Variance()
			}
			if a.N >= 2 {
				v[j] = math.Max(v[j], a.Variance())
			}
		}
	}
	// Σ_j n_j·v_j over every taking-part group, for the rest's variance.
	var nv float64
	for j, a := range recent {
		if welch && a.N > 0 {
			nv += float64(a.N) * v[j]
		}
	}
	for i, a := range recent {
		if a.N == 0 || all.N <= a.N {
			continue
		}
		// mean of the rest: (N·mean − n_i·mean_i) / (N − n_i)
		nr := float64(all.N - a.N)
		restMean := (float64(all.N)*all.Mean - float64(a.N)*a.Mean) / nr
		var se float64
		if welch {
			se = math.Sqrt(v[i]/float64(a.N) + (nv-float64(a.N)*v[i])/(nr*nr))
		} else {
			se = sp * math.Sqrt(1/float64(a.N)+1/nr)
		}
		if se > 0 {
			zs[i] = (a.Mean - restMean) / se
		}
	}
	return zs
}

// threshold returns the CUSUM detector j's h at level alpha for g groups.
func (m *Monitor) threshold(j int, c ContrastCUSUM, alpha float64, g int, clear bool) float64 {
	key := hKey{det: j, g: g, clear: clear}
	if h, ok := m.hCache[key]; ok {
		return h
	}
	h := cusumH(c, alpha, g)
	if clear && c.H > 0 {
		// A fixed h: clear at the h of the looser level relative to the
		// derived one.
		h = c.H * cusumH(ContrastCUSUM{K: c.K}, alpha, g) / cusumH(ContrastCUSUM{K: c.K}, c.Share*m.rule.Alpha, g)
	}
	m.hCache[key] = h
	return h
}

// nameByMeans names the groups that stand out by a step-down analysis of
// means (Ott 1967) at level 1 − Confidence: the group furthest outside its
// limits is named and set aside, and the analysis repeated on the rest while
// three or more remain. When none is outside, it names the group furthest
// from the grand mean relative to its limit; when the analysis is not
// available it falls back on the report's divergent groups.
func (m *Monitor) nameByMeans(accs []stats.Accumulator, rep *stats.Report, names []string) ([]int, []int) {
	alpha := 1 - m.rule.Confidence
	active := append([]stats.Accumulator(nil), accs...)
	var named, dirs []int
	for {
		ma, err := stats.AnalysisOfMeans(active, alpha)
		if err != nil {
			break
		}
		bi, bx, bd, dev := -1, 0.0, 0, 0.0
		for _, d := range ma.Groups {
			x := math.Abs(d.Deviation) / d.HalfWidth
			if (d.Direction != 0 || len(named) == 0) && x > bx {
				bi, bx, bd, dev = d.Group, x, d.Direction, d.Deviation
			}
		}
		if bi < 0 || bd == 0 && len(named) > 0 {
			break
		}
		inside := bd == 0
		if inside {
			// None outside its limits: name the most outlying group alone.
			bd = 1
			if dev < 0 {
				bd = -1
			}
		}
		named = append(named, bi)
		dirs = append(dirs, bd)
		active[bi] = stats.Accumulator{}
		if inside || len(ma.Groups) <= 3 {
			break
		}
	}
	if len(named) == 0 && rep != nil {
		for _, d := range rep.Verdict.Divergent {
			for i, n := range names {
				if n == d.Name {
					named = append(named, i)
					dirs = append(dirs, d.Direction)
				}
			}
		}
	}
	return named, dirs
}

// shiftOf returns the mean of group g minus the pooled mean of the groups
// not named, with a t interval at the given confidence. With welch false it
// rests on the pooled within-group SD of all groups taking part (N − k df).
// With welch true (the Welch F was the test, or the CUSUMs' per-group
// standard error was used) it rests on each group's own variance, as in
// Welch's (1951) test: SE² = s_g²/n_g + Σ_rest n_j·s_j²/n_rest², with the
// Welch–Satterthwaite degrees of freedom SE⁴ / Σ_j (c_j²·s_j²/n_j)²/(n_j − 1),
// c_j the contrast's weights (1 for g, n_j/n_rest for the rest); a group
// whose spread grew then gets an interval as wide as its values warrant.
func shiftOf(accs []stats.Accumulator, named []int, g int, confidence float64, welch bool) (shift, lo, hi float64, ok bool) {
	t, err := stats.OneWay(accs)
	if err != nil || g >= len(accs) || accs[g].N == 0 {
		return 0, 0, 0, false
	}
	var rest stats.Accumulator
	for i, a := range accs {
		if !containsInt(named, i) {
			rest.Merge(a)
		}
	}
	if rest.N == 0 {
		return 0, 0, 0, false
	}
	shift = accs[g].Mean - rest.Mean
	se := t.ResidualSD * math.Sqrt(1/float64(accs[g].N)+1/float64(rest.N))
	df := t.DFWithin
	if welch && accs[g].N >= 2 {
		ng := float64(accs[g].N)
		vg := accs[g].Variance() / ng
		se2, den := vg, vg*vg/(ng-1)
		nr := float64(rest.N)
		for i, a := range accs {
			if containsInt(named, i) || a.N < 2 {
				continue
			}
			n := float64(a.N)
			v := n * a.Variance() / (nr * nr)
			se2 += v
			den += v * v / (n - 1)
		}
		if se2 > 0 && den > 0 {
			se, df = math.Sqrt(se2), se2*se2/den
		}
	}
	q := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: df}.Quantile(1 - (1-confidence)/2)
	h := q * se
	return shift, shift - h, shift + h, true
}

// worthIt tells whether a shift with interval [lo, hi] passes the
// practical difference, as Judge says: its point estimate, or its whole
// interval, beyond ±Practical.
func (r *Rule) worthIt(shift, lo, hi float64) bool {
	if r.Judge == JudgeEstimate {
		return math.Abs(shift) >= r.Practical
	}
	return lo >= r.Practical || hi <= -r.Practical
}

func containsInt(xs []int, x int) bool {
	for _, y := range xs {
		if y == x {
			return true
		}
	}
	return false
}

// trimFloat formats x shortly: 0.5, 0.35, 4.
func trimFloat(x float64) string { return fmt.Sprintf("%g", x) }
