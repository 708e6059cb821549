package stats

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"
)

// OneWay against R's anova(lm(value ~ factor(group))) and summary(lm), with
// ω² from its formula on R's table (testdata/reference/make.R). R's sums of
// squares come from a QR decomposition of the model matrix, whose error is
// about an ulp of the raw data (≈ 500 g, 182 °C) relative to the scale of the
// effects; on these data that is below 1e-12 relative, so 1e-10 relative
// (tolStatistic) holds for every quantity of the table.
func TestOneWayReference(t *testing.T) {
	ref := readReference(t)
	maxErr := newErrorLog(rSource)
	var maxID float64
	for _, s := range allScenarios() {
		_, values := readScenario(t, s)
		tab, err := OneWay(groupAccumulators(values))
		if err != nil {
			t.Errorf("%s: %v", s, err)
			continue
		}
		if tab.K != len(values) {
			t.Errorf("%s: K = %d, want %d", s, tab.K, len(values))
		}
		get := func(q string) float64 { return ref.get(t, s, q, "", "") }
		// R 4.2.2, testdata/reference/make.R.
		maxErr.check(t, "ss_between", s, tab.SSBetween, get("ss_between"), tolStatistic)
		maxErr.check(t, "ss_within", s, tab.SSWithin, get("ss_within"), tolStatistic)
		maxErr.check(t, "ss_total", s, tab.SSTotal, get("ss_total"), tolStatistic)
		maxErr.check(t, "df_between", s, tab.DFBetween, get("df_between"), 0)
		maxErr.check(t, "df_within", s, tab.DFWithin, get("df_within"), 0)
		maxErr.check(t, "ms_between", s, tab.MSBetween, get("ms_between"), tolStatistic)
		maxErr.check(t, "ms_within", s, tab.MSWithin, get("ms_within"), tolStatistic)
		maxErr.check(t, "f", s, tab.F, get("f"), tolStatistic)
		maxErr.check(t, "p", s, tab.P, get("p"), tolP)
		maxErr.check(t, "r2", s, tab.R2, get("r2"), tolStatistic)
		maxErr.check(t, "adj_r2", s, tab.AdjR2, get("adj_r2"), tolStatistic)
		maxErr.check(t, "omega2", s, tab.Omega2, get("omega2"), tolStatistic)
		maxErr.check(t, "residual_sd", s, tab.ResidualSD, get("residual_sd"), tolStatistic)

		// SS total is computed independently of the other two (by merging
		// the accumulators): the identity holds to rounding, a few ulps.
		id := math.Abs(tab.SSTotal-tab.SSBetween-tab.SSWithin) / tab.SSTotal
		if id > 1e-13 || tab.IdentityError != id {
			t.Errorf("%s: |SST − SSB − SSW|/SST = %.3g, IdentityError = %.3g, want equal and ≤ 1e-13", s, id, tab.IdentityError)
		}
		maxID = math.Max(maxID, id)
	}
	maxErr.report(t)
	t.Logf("max |SST − SSB − SSW|/SST: %.3g", maxID)
}

// With two groups the F test is the pooled two-sample t test: F = t², with t
// from R's t.test(var.equal = TRUE) (testdata/reference/make.R); 1e-10
// relative as for the other statistics.
func TestOneWayTwoGroupsIsTSquared(t *testing.T) {
	ref := readReference(t)
	_, values := readScenario(t, "nozzle_flow")
	if len(values) != 2 {
		t.Fatalf("nozzle_flow has %d groups, want 2", len(values))
	}
	tab, err := OneWay(groupAccumulators(values))
	if err != nil {
		t.Fatal(err)
	}
	tp := ref.get(t, "nozzle_flow", "t_pooled", "", "")
	maxErr := newErrorLog(rSource)
	maxErr.check(t, "F = t_pooled²", "nozzle_flow", tab.F, tp*tp, tolStatistic)
	maxErr.report(t)
}

func TestOneWayNotAvailable(t *testing.T) {
	cases := []struct {
		name   string
		values [][]float64
	}{
		{"no groups", nil},
		{"one group", [][]float64{{1, 2, 3}, {}}},
		{"single values", [][]float64{{1}, {2}, {4}}},
		{"no variation within groups", [][]float64{{1, 1}, {2, 2, 2}}},
	}
	for _, c := range cases {
		_, err := OneWay(groupAccumulators(c.values))
		if !errors.Is(err, ErrNotAvailable) {
			t.Errorf("%s: err = %v, want one wrapping ErrNotAvailable", c.name, err)
		}
	}
}

// Permuting the values within each group and the order of the groups leaves
// every test unchanged up to rounding. The accumulators then sum in another
// order: a group mean moves by a few ulps of the data's level (≈ 1e-13 g at
// 500 g), which relative to between-group differences of 0.03 g and more is
// below 1e-11, and p-values scale that by f·density/tail, a few units here.
// So 1e-11 relative, a thousand times looser than rounding in the data's
// level but far tighter than any real change of result.
func TestPermutationInvariance(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	const tol = 1e-11
	maxErr := newErrorLog("the same data in the original order")
	for _, s := range allScenarios() {
		_, values := readScenario(t, s)
		results := func(v [][]float64) map[string]float64 {
			t.Helper()
			m := map[string]float64{}
			acc := groupAccumulators(v)
			tab, err := OneWay(acc)
			if err != nil {
				t.Fatalf("%s: %v", s, err)
			}
			m["oneway F"], m["oneway p"], m["oneway SS between"] = tab.F, tab.P, tab.SSBetween
			w, err := Welch(acc)
			if err != nil {
				t.Fatalf("%s: %v", s, err)
			}
			m["welch F"], m["welch df2"], m["welch p"] = w.F, w.DF2, w.P
			b, err := Bartlett(acc)
			if err != nil {
				t.Fatalf("%s: %v", s, err)
			}
			m["bartlett"], m["bartlett p"] = b.Statistic, b.P
			for name, fn := range map[string]func([][]float64) (FTest, error){"levene": Levene, "brown_forsythe": BrownForsythe} {
				r, err := fn(v)
				if err != nil {
					t.Fatalf("%s: %v", s, err)
				}
				m[name+" F"], m[name+" p"] = r.F, r.P
			}
			kw, err := KruskalWallis(v)
			if err != nil {
				t.Fatalf("%s: %v", s, err)
			}
			m["kruskal_wallis H"], m["kruskal_wallis p"] = kw.Statistic, kw.P
			return m
		}
		want := results(values)
		for range 5 {
			perm := make([][]float64, len(values))
			for i, j := range rng.Perm(len(values)) {
				perm[i] = append([]float64(nil), values[j]...)
				rng.Shuffle(len(perm[i]), func(a, b int) { perm[i][a], perm[i][b] = perm[i][b], perm[i][a] })
			}
			for q, g := range results(perm) {
				maxErr.check(t, q, s+" (permuted)", g, want[q], tol)
			}
		}
	}
	maxErr.report(t)
}
