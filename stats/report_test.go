package stats

import (
	"errors"
	"math"
	"math/rand/v2"
	"path/filepath"
	"strings"
	"testing"
)

// scenarioGroups reads a scenario as analysis input, centring each value's
// decimal text exactly on the first value, as lockstep check does.
func scenarioGroups(t *testing.T, name string) (Reference, []Group) {
	t.Helper()
	rows := readCSVFile(t, filepath.Join("..", "testdata", "scenarios", name+".csv"), "group", "value")
	d, err := ParseDecimal(rows[0][1])
	if err != nil {
		t.Fatal(err)
	}
	ref := NewReference(d)
	var groups []Group
	index := map[string]int{}
	for _, r := range rows {
		c, exact, err := ref.CentreString(r[1])
		if err != nil || !exact {
			t.Fatalf("%s: centre %q: exact %v, %v", name, r[1], exact, err)
		}
		i, ok := index[r[0]]
		if !ok {
			i = len(groups)
			index[r[0]] = i
			groups = append(groups, Group{Name: r[0]})
		}
		groups[i].Acc.Add(c)
		groups[i].Values = append(groups[i].Values, c)
	}
	return ref, groups
}

// TestAnalyseNamesTheLineThatMoved: in the fill-weight scenario (make.R)
// line L3 was generated about 1.2 g above the others. The verdict must name
// L3 alone, high, with a positive shift whose interval excludes zero —
// although a single analysis of means also puts L1 and L2 below their limits
// (L3 drags the grand mean up), which is why the verdict steps down.
func TestAnalyseNamesTheLineThatMoved(t *testing.T) {
	ref, groups := scenarioGroups(t, "fill_weight")
	r := Analyse(ref, groups, Options{})
	v := r.Verdict
	if !v.Available || !v.Differ || v.Test != "F" {
		t.Fatalf("verdict %+v: want the classic F to find a difference", v)
	}
	if len(v.Divergent) != 1 || v.Divergent[0].Name != "L3" || v.Divergent[0].Direction != 1 || !(v.Divergent[0].Lower > 0) {
		t.Fatalf("divergent %+v: want L3 alone, high, interval above zero", v.Divergent)
	}
	// The shift is L3's mean against the pooled mean of the other three lines.
	var rest Accumulator
	for _, g := range groups {
		if g.Name != "L3" {
			rest.Merge(g.Acc)
		}
	}
	var l3 Accumulator
	for _, g := range groups {
		if g.Name == "L3" {
			l3 = g.Acc
		}
	}
	if want := l3.Mean - rest.Mean; math.Abs(v.Divergent[0].Shift-want) > 1e-12 {
		t.Errorf("shift %.15g, want %.15g", v.Divergent[0].Shift, want)
	}
	if len(r.Notes) != 0 {
		t.Errorf("unexpected notes: %v", r.Notes)
	}
}

// TestAnalyseSpreadChoosesWelch: in the seal-temperature scenario jaw J4
// scatters about three times as much as the others (make.R); the
// Brown–Forsythe test must reject equal spreads, Welch's F decide, and J4
// be named as the spread that stands out.
func TestAnalyseSpreadChoosesWelch(t *testing.T) {
	ref, groups := scenarioGroups(t, "seal_temperature")
	r := Analyse(ref, groups, Options{})
	if r.Verdict.Test != "Welch F" || r.Verdict.Spread == nil || r.Verdict.Spread.Name != "J4" || !(r.Verdict.Spread.Ratio > 1.5) {
		t.Fatalf("verdict %+v spread %+v: want Welch F and J4 named with a large SD ratio", r.Verdict, r.Verdict.Spread)
	}
	if r.Verdict.P != r.Welch.P {
		t.Errorf("verdict p %g is not Welch's %g", r.Verdict.P, r.Welch.P)
	}
}

// TestAnalyseDegenerate: inputs for which almost nothing is defined give
// explicit reasons and no NaN anywhere, never a panic.
func TestAnalyseDegenerate(t *testing.T) {
	one := func(xs ...float64) Group {
		var g Group
		for _, x := range xs {
			g.Acc.Add(x)
			g.Values = append(g.Values, x)
		}
		return g
	}
	cases := map[string][]Group{
		"one group":             {one(1, 2, 3)},
		"single values":         {one(1), one(2), one(3)},
		"no variation anywhere": {one(2, 2), one(2, 2, 2)},
		"no variation within":   {one(1, 1), one(2, 2)},
		"empty groups":          {{}, {}},
		"nothing":               nil,
	}
	ref := NewReference(Decimal{})
	for name, groups := range cases {
		t.Run(name, func(t *testing.T) {
			for i := range groups {
				groups[i].Name = "G" + string(rune('1'+i))
			}
			r := Analyse(ref, groups, Options{})
			if r.Verdict.Available && r.TableErr != nil {
				t.Errorf("verdict available although the F test is not")
			}
			if !r.Verdict.Available && r.Verdict.NotAvailable == "" {
				t.Errorf("no reason given for the missing verdict")
			}
			if r.TableErr == nil {
				t.Errorf("F available for degenerate input: %+v", r.Table)
			} else if !errors.Is(r.TableErr, ErrNotAvailable) || len(r.Notes) == 0 {
				t.Errorf("TableErr %v, notes %v: want ErrNotAvailable and a note", r.TableErr, r.Notes)
			}
			for _, n := range r.Notes {
				if !strings.Contains(n, "not available") {
					t.Errorf("note %q does not say what is not available", n)
				}
			}
		})
	}
}

// TestAnalyseMergeInvariance: a report built from accumulators merged from
// random parts equals, to rounding, the report from sequential updates.
func TestAnalyseMergeInvariance(t *testing.T) {
	ref, groups := scenarioGroups(t, "cap_torque")
	rng := rand.New(rand.NewPCG(5, 6))
	merged := make([]Group, len(groups))
	for i, g := range groups {
		merged[i] = Group{Name: g.Name, Values: g.Values}
		xs := append([]float64(nil), g.Values...)
		rng.Shuffle(len(xs), func(a, b int) { xs[a], xs[b] = xs[b], xs[a] })
		for len(xs) > 0 {
			n := 1 + rng.IntN(len(xs))
			var part Accumulator
			for _, x := range xs[:n] {
				part.Add(x)
			}
			merged[i].Acc.Merge(part)
			xs = xs[n:]
		}
	}
	a, b := Analyse(ref, groups, Options{}), Analyse(ref, merged, Options{})
	for _, c := range []struct {
		name string
		x, y float64
	}{
		{"SS between", a.Table.SSBetween, b.Table.SSBetween},
		{"SS within", a.Table.SSWithin, b.Table.SSWithin},
		{"F", a.Table.F, b.Table.F},
		{"p", a.Table.P, b.Table.P},
		{"Welch F", a.Welch.F, b.Welch.F},
		{"Bartlett", a.Bartlett.Statistic, b.Bartlett.Statistic},
	} {
		if e := relErr(c.x, c.y); e > 1e-10 {
			t.Errorf("%s: %.15g vs %.15g after merging parts (relative %g)", c.name, c.x, c.y, e)
		}
	}
}

func benchGroups(k, n int, withValues bool) []Group {
	rng := rand.New(rand.NewPCG(7, 8))
	groups := make([]Group, k)
	for i := range groups {
		groups[i].Name = "H" + string(rune('A'+i))
		for range n {
			x := rng.NormFloat64() + float64(i%3)*0.1
			groups[i].Acc.Add(x)
			if withValues {
				groups[i].Values = append(groups[i].Values, x)
			}
		}
	}
	return groups
}

var sinkReport Report

// BenchmarkOneWay16 is the baseline: the one-way table alone for 16 groups
// from their accumulators.
func BenchmarkOneWay16(b *testing.B) {
	groups := benchGroups(16, 100, false)
	accs := make([]Accumulator, len(groups))
	for i, g := range groups {
		accs[i] = g.Acc
	}
	b.ReportAllocs()
	for b.Loop() {
		sinkReport.Table, _ = OneWay(accs)
	}
}

// BenchmarkAnalyse16 is one full analysis of 16 groups from accumulators
// (the tests that need values are then not available).
func BenchmarkAnalyse16(b *testing.B) {
	groups := benchGroups(16, 100, false)
	ref := NewReference(Decimal{})
	b.ReportAllocs()
	for b.Loop() {
		sinkReport = Analyse(ref, groups, Options{})
	}
}

// BenchmarkAnalyse16Values adds 100 kept values per group, so Levene,
// Brown–Forsythe and Kruskal–Wallis run too.
func BenchmarkAnalyse16Values(b *testing.B) {
	groups := benchGroups(16, 100, true)
	ref := NewReference(Decimal{})
	b.ReportAllocs()
	for b.Loop() {
		sinkReport = Analyse(ref, groups, Options{})
	}
}
