package stats

import (
	"math"
	"slices"
	"testing"
)

func TestKruskalWallisReference(t *testing.T) {
	ref := readReference(t)
	maxErr := newErrorLog(rSource)
	for _, s := range allScenarios() {
		_, values := readScenario(t, s)
		got, err := KruskalWallis(values)
		if err != nil {
			t.Errorf("%s: %v", s, err)
			continue
		}
		// R 4.2.2 kruskal.test, testdata/reference/make.R. Ranks are exact;
		// R forms 12/(N(N+1)) Σ R_i²/n_i − 3(N+1), which cancels to about
		// 1e-14 relative here: 1e-10 relative. wall_thickness has heavy ties
		// (gauge resolution 0.1 mm), so the tie correction is tested.
		maxErr.check(t, "kruskal_wallis_h", s, got.Statistic, ref.get(t, s, "kruskal_wallis_h", "", ""), tolStatistic)
		maxErr.check(t, "kruskal_wallis_df", s, got.DF, ref.get(t, s, "kruskal_wallis_df", "", ""), 0)
		maxErr.check(t, "kruskal_wallis_p", s, got.P, ref.get(t, s, "kruskal_wallis_p", "", ""), tolP)
	}
	maxErr.report(t)
}

func TestKruskalWallisNotAvailable(t *testing.T) {
	cases := []struct {
		name    string
		samples [][]float64
		want    string
	}{
		{"no groups", nil, "at least two groups"},
		{"one group among empties", [][]float64{nil, {1, 2, 3}, {}}, "at least two groups"},
		{"all tied", [][]float64{{1.8, 1.8}, {}, {1.8}, {1.8, 1.8, 1.8}}, "all values are tied"},
		{"NaN", [][]float64{{1, 2}, {3, math.NaN()}}, "value 2 of group 2 is not a finite number"},
	}
	for _, c := range cases {
		got, err := KruskalWallis(c.samples)
		checkUnavailable(t, c.name, "Kruskal–Wallis test", got, err, c.want)
	}
}

// The caller's slices are not reordered, and empty groups are left out
// (they count neither as a group in df nor in N).
func TestKruskalWallisKeepsInput(t *testing.T) {
	_, values := readScenario(t, "wall_thickness")
	orig := make([][]float64, len(values))
	for i, xs := range values {
		orig[i] = slices.Clone(xs)
	}
	want, err := KruskalWallis(values)
	if err != nil {
		t.Fatal(err)
	}
	got, err := KruskalWallis([][]float64{values[0], {}, values[1], nil, values[2]})
	if err != nil {
		t.Fatal(err)
	}
	if got != want {
		t.Errorf("with empty groups %+v, without %+v", got, want)
	}
	for i := range values {
		if !slices.Equal(values[i], orig[i]) {
			t.Errorf("group %d was modified", i+1)
		}
	}
}
