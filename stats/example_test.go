package stats_test

import (
	"fmt"

	"github.com/lockstep-project/lockstep/stats"
)

// Two filling lines of 500 g bags: accumulate each line's values, then
// compare the lines with the one-way table. (R 4.2.2, anova(lm(y ~ g)) on
// the same values: SS 2.209 and 0.272, F 64.97059, p 4.1364e-05.)
func ExampleOneWay() {
	lines := map[string][]float64{
		"L1": {500.2, 499.8, 500.1, 500.3, 499.9},
		"L2": {500.9, 501.2, 500.8, 501.0, 501.1},
	}
	var groups []stats.Accumulator
	for _, name := range []string{"L1", "L2"} {
		var a stats.Accumulator
		for _, x := range lines[name] {
			a.Add(x)
		}
		groups = append(groups, a)
	}
	t, err := stats.OneWay(groups)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("SS between %.3f, SS within %.3f, F = %.2f on %g and %g df, p = %.2g\n",
		t.SSBetween, t.SSWithin, t.F, t.DFBetween, t.DFWithin, t.P)
	// Output:
	// SS between 2.209, SS within 0.272, F = 64.97 on 1 and 8 df, p = 4.1e-05
}

// A result that is not defined comes back as an error that says why.
func ExampleOneWay_notAvailable() {
	var a stats.Accumulator
	a.Add(182.4)
	a.Add(182.6)
	_, err := stats.OneWay([]stats.Accumulator{a})
	fmt.Println(err)
	// Output:
	// one-way F: not available: needs at least two groups with values, have 1
}

// Analyse centres decimal text on an exact reference and reports which
// group moved, which way and by how much. (Checked in R 4.2.2: H3's mean
// minus the pooled mean of the others is 0.0983, and the t interval on the
// pooled SD with 20 df runs from 0.0854 to 0.1112.)
func ExampleAnalyse() {
	d, _ := stats.ParseDecimal("2.10")
	ref := stats.NewReference(d)
	heads := []struct {
		name   string
		values []string
	}{
		{"H1", []string{"2.10", "2.12", "2.09", "2.11", "2.10", "2.08"}},
		{"H2", []string{"2.11", "2.09", "2.10", "2.12", "2.10", "2.09"}},
		{"H3", []string{"2.19", "2.21", "2.18", "2.20", "2.22", "2.19"}},
		{"H4", []string{"2.09", "2.10", "2.11", "2.10", "2.08", "2.11"}},
	}
	var groups []stats.Group
	for _, h := range heads {
		g := stats.Group{Name: h.name}
		for _, s := range h.values {
			x, _, err := ref.CentreString(s)
			if err != nil {
				fmt.Println(err)
				return
			}
			g.Acc.Add(x)
			g.Values = append(g.Values, x)
		}
		groups = append(groups, g)
	}
	r := stats.Analyse(ref, groups, stats.DefaultOptions())
	for _, d := range r.Verdict.Divergent {
		fmt.Printf("%s moved by %+.3f N·m (95%% CI %+.3f to %+.3f)\n", d.Name, d.Shift, d.Lower, d.Upper)
	}
	// Output:
	// H3 moved by +0.098 N·m (95% CI +0.085 to +0.111)
}
