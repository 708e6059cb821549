package stats

import (
	"testing"
)

// Tolerances against R (testdata/reference/make.R). R computes the group
// means and variances in two passes in long double, the Go code by Welford's
// update; the two agree to about 1e-14 relative on these data, and the
// statistics are smooth in them, so 1e-10 relative leaves a wide margin while
// still catching any formula slip. p-values add the relative error of the
// tail function and the error of the statistic times f·(density/tail), a
// factor of a few tens at most here: 1e-9 relative.
const (
	tolStatistic = 1e-10
	tolP         = 1e-9
)

func TestWelchReference(t *testing.T) {
	ref := readReference(t)
	maxErr := newErrorLog(rSource)
	for _, s := range allScenarios() {
		_, values := readScenario(t, s)
		got, err := Welch(groupAccumulators(values))
		if err != nil {
			t.Errorf("%s: %v", s, err)
			continue
		}
		// R 4.2.2 oneway.test(var.equal = FALSE), testdata/reference/make.R.
		maxErr.check(t, "welch_f", s, got.F, ref.get(t, s, "welch_f", "", ""), tolStatistic)
		maxErr.check(t, "welch_df1", s, got.DF1, ref.get(t, s, "welch_df1", "", ""), 0)
		maxErr.check(t, "welch_df2", s, got.DF2, ref.get(t, s, "welch_df2", "", ""), tolStatistic)
		maxErr.check(t, "welch_p", s, got.P, ref.get(t, s, "welch_p", "", ""), tolP)
	}
	maxErr.report(t)
}

// The undefined cases: each returns an error wrapping ErrNotAvailable that
// names the reason and the group, and a zero FTest.
func TestWelchNotAvailable(t *testing.T) {
	acc := func(xs ...float64) Accumulator { return groupAccumulators([][]float64{xs})[0] }
	cases := []struct {
		name   string
		groups []Accumulator
		want   string
	}{
		{"no groups", nil, "at least two groups"},
		{"one group", []Accumulator{acc(1, 2, 3)}, "at least two groups"},
		{"one group among empties", []Accumulator{{}, acc(1, 2, 3), {}}, "at least two groups"},
		{"single value", []Accumulator{acc(1, 2, 3), acc(5)}, "group 2 has a single value"},
		{"zero variance", []Accumulator{acc(1, 2, 3), acc(4, 4, 4)}, "group 2 has zero variance"},
		{"zero variance after an empty group", []Accumulator{acc(1, 2), {}, acc(7, 7)}, "group 3 has zero variance"},
	}
	for _, c := range cases {
		got, err := Welch(c.groups)
		checkUnavailable(t, c.name, "Welch F", got, err, c.want)
	}
}

// Empty groups are left out: inserting them changes nothing.
func TestWelchSkipsEmptyGroups(t *testing.T) {
	_, values := readScenario(t, "fill_weight")
	acc := groupAccumulators(values)
	want, err := Welch(acc)
	if err != nil {
		t.Fatal(err)
	}
	got, err := Welch([]Accumulator{{}, acc[0], acc[1], {}, acc[2], acc[3], {}})
	if err != nil {
		t.Fatal(err)
	}
	if got != want {
		t.Errorf("with empty groups %+v, without %+v", got, want)
	}
}
