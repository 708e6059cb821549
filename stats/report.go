package stats

import (
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// Group is one group's data for an analysis: the running sums of all its
// values and, for the tests that need the values themselves (Levene,
// Brown–Forsythe, Kruskal–Wallis), all of them or a bounded sample. Both
// hold values centred on the analysis' Reference.
type Group struct {
	Name   string
	Acc    Accumulator
	Values []float64
}

// Options are the levels an analysis works at.
type Options struct {
	Alpha      float64 // significance level of tests, decision limits and the verdict; default 0.05
	Confidence float64 // confidence level of intervals; default 0.95
	Power      float64 // power for the minimum detectable shift; default 0.9
}

// DefaultOptions returns α = 0.05, 95 % intervals and 90 % power.
func DefaultOptions() Options { return Options{Alpha: 0.05, Confidence: 0.95, Power: 0.9} }

// GroupSummary describes one group in the data's units.
type GroupSummary struct {
	Name         string
	N            int64
	Mean, SD     float64
	Lower, Upper float64 // confidence interval of the mean (t-based); valid when CIErr is nil
	CIErr        error
	Min, Max     float64
}

// Divergence names a group that moved (see Report.divergent), with its
// shift against the pooled mean of the groups that did not.
type Divergence struct {
	Group        int
	Name         string
	Direction    int     // +1 high, −1 low
	Shift        float64 // mean_i − pooled mean of the groups not named, in the data's units
	Lower, Upper float64 // confidence interval of Shift (pooled SD, N − k df)
}

// SpreadFinding names the group whose spread stands out when the
// Brown–Forsythe test rejects equal spreads.
type SpreadFinding struct {
	Group int
	Name  string
	Ratio float64 // SD of the group / pooled within-group SD
	P     float64 // Brown–Forsythe p-value
}

// Verdict is the analysis in one decision.
type Verdict struct {
	// Test is the test that decides: "F" (classic, equal spreads) or
	// "Welch F" (chosen when the Brown–Forsythe test rejects equal spreads
	// at Alpha and Welch is available).
	Test         string
	F, P         float64
	Available    bool // false when no test of means could be made
	Differ       bool // P < Alpha
	Divergent    []Divergence
	Spread       *SpreadFinding
	NotAvailable string // why, when Available is false
}

// Report is everything one analysis says. Means and limits are in the data's
// units; differences and SDs need no reference. A nil result is not
// available and its reason is in Notes.
type Report struct {
	Options       Options
	Reference     Reference
	Groups        []GroupSummary
	GrandMean     float64
	Table         Table // sums of squares; its GrandMean is on the centred scale
	TableErr      error // F and p not available when non-nil
	Welch         *FTest
	Bartlett      *ChiSquareTest
	Levene        *FTest
	BrownForsythe *FTest
	KruskalWallis *ChiSquareTest
	Pairs         []PairComparison
	Means         *MeansAnalysis
	Shift         *DetectableShift
	Verdict       Verdict
	Notes         []string
}

// Analyse runs the whole one-way analysis of groups whose values are centred
// on ref. Zero fields of opt take their defaults.
func Analyse(ref Reference, groups []Group, opt Options) Report {
	def := DefaultOptions()
	if opt.Alpha == 0 {
		opt.Alpha = def.Alpha
	}
	if opt.Confidence == 0 {
		opt.Confidence = def.Confidence
	}
	if opt.Power == 0 {
		opt.Power = def.Power
	}
	r := Report{Options: opt, Reference: ref}
	accs := make([]Accumulator, len(groups))
	samples := make([][]float64, len(groups))
	for i, g := range groups {
		accs[i] = g.Acc
		samples[i] = g.Values
	}
	note := func(err error) {
		if err == nil {
			return
		}
		s := err.Error()
		for _, n := range r.Notes {
			if n == s {
				return
			}
		}
		r.Notes = append(r.Notes, s)
	}
	for _, g := range groups {
		r.Groups = append(r.Groups, summarise(ref, g, opt.Confidence))
		note(r.Groups[len(r.Groups)-1].CIErr)
	}
	r.Table, r.TableErr = OneWay(accs)
	r.GrandMean = ref.Uncentre(r.Table.GrandMean)
	note(r.TableErr)
	if w, err := Welch(accs); err == nil {
		r.Welch = &w
	} else {
		note(err)
	}
	if b, err := Bartlett(accs); err == nil {
		r.Bartlett = &b
	} else {
		note(err)
	}
	if l, err := Levene(samples); err == nil {
		r.Levene = &l
	} else {
		note(err)
	}
	if l, err := BrownForsythe(samples); err == nil {
		r.BrownForsythe = &l
	} else {
		note(err)
	}
	if h, err := KruskalWallis(samples); err == nil {
		r.KruskalWallis = &h
	} else {
		note(err)
	}
	r.Pairs = Pairs(accs, opt.Confidence)
	for _, p := range r.Pairs {
		note(p.TukeyErr)
		note(p.GamesHowellErr)
	}
	if m, err := AnalysisOfMeans(accs, opt.Alpha); err == nil {
		r.Means = &m
	} else {
		note(err)
	}
	if s, err := MinimumDetectableShift(accs, opt.Alpha, opt.Power); err == nil {
		r.Shift = &s
	} else {
		note(err)
	}
	r.Verdict = r.decide(accs)
	return r
}

func summarise(ref Reference, g Group, confidence float64) GroupSummary {
	s := GroupSummary{
		Name: g.Name, N: g.Acc.N, SD: g.Acc.SD(),
		Mean: ref.Uncentre(g.Acc.Mean),
		Min:  ref.Uncentre(g.Acc.Min), Max: ref.Uncentre(g.Acc.Max),
	}
	switch {
	case g.Acc.N < 2:
		s.CIErr = notAvailable("confidence interval of "+quoteName(g.Name), "needs at least two values")
	case !(confidence > 0 && confidence < 1):
		s.CIErr = notAvailable("confidence interval of "+quoteName(g.Name), "confidence level %g is not between 0 and 1", confidence)
	default:
		t := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: float64(g.Acc.N - 1)}.Quantile(1 - (1-confidence)/2)
		h := t * s.SD / math.Sqrt(float64(g.Acc.N))
		s.Lower, s.Upper = s.Mean-h, s.Mean+h
	}
	return s
}

func quoteName(name string) string { return "group " + `"` + name + `"` }

func (r *Report) decide(accs []Accumulator) Verdict {
	v := Verdict{Test: "F"}
	if r.TableErr != nil {
		v.NotAvailable = reason(r.TableErr)
		return v
	}
	v.Available, v.F, v.P = true, r.Table.F, r.Table.P
	bf := r.BrownForsythe
	if bf != nil && bf.P < r.Options.Alpha {
		if r.Welch != nil {
			v.Test, v.F, v.P = "Welch F", r.Welch.F, r.Welch.P
		}
		v.Spread = r.spreadFinding(accs, bf.P)
	}
	v.Differ = v.P < r.Options.Alpha
	if v.Differ {
		v.Divergent = r.divergent(accs)
	}
	return v
}

// divergent names the groups that moved, by a step-down analysis of means:
// among the groups not yet named, the one furthest outside its limits
// (largest |deviation| / half-width) is named and set aside, and the
// analysis is repeated on the rest until none is out or fewer than three
// remain. Setting the named group aside matters: one group far out drags
// the grand mean, so that a single analysis of means would also flag the
// groups that did not move, on the other side. Each named group's shift is
// against the pooled mean of the groups that remain, with a t interval on
// the pooled within-group SD of all groups (N − k df). With two groups only,
// the second is named against the first.
func (r *Report) divergent(accs []Accumulator) []Divergence {
	active := make([]Accumulator, len(accs))
	copy(active, accs)
	var named []int
	for {
		remaining := 0
		for _, a := range active {
			if a.N > 0 {
				remaining++
			}
		}
		if remaining < 2 || remaining < 3 && len(named) > 0 {
			break
		}
		m, err := AnalysisOfMeans(active, r.Options.Alpha)
		if err != nil {
			break
		}
		best, worst := -1, 1.0
		for _, d := range m.Groups {
			if x := math.Abs(d.Deviation) / d.HalfWidth; d.Direction != 0 && x > worst {
				best, worst = d.Group, x
			}
		}
		if best < 0 {
			break
		}
		if remaining == 2 {
			// Two groups: the later one is named against the earlier.
			for i := len(active) - 1; i >= 0; i-- {
				if active[i].N > 0 {
					best = i
					break
				}
			}
		}
		named = append(named, best)
		active[best] = Accumulator{}
	}
	if len(named) == 0 {
		return nil
	}
	var rest Accumulator
	for _, a := range active {
		rest.Merge(a)
	}
	t := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: r.Table.DFWithin}.Quantile(1 - (1-r.Options.Confidence)/2)
	out := make([]Divergence, 0, len(named))
	for _, i := range named {
		g := accs[i]
		shift := g.Mean - rest.Mean
		h := t * r.Table.ResidualSD * math.Sqrt(1/float64(g.N)+1/float64(rest.N))
		d := Divergence{Group: i, Name: r.Groups[i].Name, Direction: 1, Shift: shift, Lower: shift - h, Upper: shift + h}
		if shift < 0 {
			d.Direction = -1
		}
		out = append(out, d)
	}
	return out
}

func (r *Report) spreadFinding(accs []Accumulator, p float64) *SpreadFinding {
	if r.Table.ResidualSD <= 0 {
		return nil
	}
	best, far := -1, 0.0
	for i, g := range accs {
		if g.N < 2 {
			continue
		}
		ratio := g.SD() / r.Table.ResidualSD
		if d := math.Abs(math.Log(ratio)); best < 0 || d > far {
			best, far = i, d
		}
	}
	if best < 0 {
		return nil
	}
	return &SpreadFinding{Group: best, Name: r.Groups[best].Name, Ratio: accs[best].SD() / r.Table.ResidualSD, P: p}
}
