package stats

import (
	"math"
	"slices"
	"testing"
)

func TestBartlettReference(t *testing.T) {
	ref := readReference(t)
	maxErr := newErrorLog(rSource)
	for _, s := range allScenarios() {
		_, values := readScenario(t, s)
		got, err := Bartlett(groupAccumulators(values))
		if err != nil {
			t.Errorf("%s: %v", s, err)
			continue
		}
		// R 4.2.2 bartlett.test, testdata/reference/make.R. The statistic is
		// a sum of logs of variance ratios: 1e-10 relative (see tolStatistic).
		maxErr.check(t, "bartlett_statistic", s, got.Statistic, ref.get(t, s, "bartlett_statistic", "", ""), tolStatistic)
		maxErr.check(t, "bartlett_df", s, got.DF, ref.get(t, s, "bartlett_df", "", ""), 0)
		maxErr.check(t, "bartlett_p", s, got.P, ref.get(t, s, "bartlett_p", "", ""), tolP)
	}
	maxErr.report(t)
}

func TestLeveneBrownForsytheReference(t *testing.T) {
	ref := readReference(t)
	maxErr := newErrorLog(rSource)
	tests := []struct {
		prefix string
		fn     func([][]float64) (FTest, error)
	}{{"levene", Levene}, {"brown_forsythe", BrownForsythe}}
	for _, s := range allScenarios() {
		_, values := readScenario(t, s)
		for _, tt := range tests {
			got, err := tt.fn(values)
			if err != nil {
				t.Errorf("%s, %s: %v", s, tt.prefix, err)
				continue
			}
			// R 4.2.2 anova(lm(abs(value − ave(value, group, FUN = mean or
			// median)) ~ group)), testdata/reference/make.R. The absolute
			// deviations carry the rounding of the centre (an ulp of the
			// data, about 1e-13 relative to a deviation here), and F is smooth
			// in them: 1e-10 relative.
			q := tt.prefix + "_"
			maxErr.check(t, q+"f", s, got.F, ref.get(t, s, q+"f", "", ""), tolStatistic)
			maxErr.check(t, q+"df1", s, got.DF1, ref.get(t, s, q+"df1", "", ""), 0)
			maxErr.check(t, q+"df2", s, got.DF2, ref.get(t, s, q+"df2", "", ""), 0)
			maxErr.check(t, q+"p", s, got.P, ref.get(t, s, q+"p", "", ""), tolP)
		}
	}
	maxErr.report(t)
}

func TestBartlettNotAvailable(t *testing.T) {
	acc := func(xs ...float64) Accumulator { return groupAccumulators([][]float64{xs})[0] }
	cases := []struct {
		name   string
		groups []Accumulator
		want   string
	}{
		{"no groups", nil, "at least two groups"},
		{"one group among empties", []Accumulator{{}, acc(1, 2, 3)}, "at least two groups"},
		{"single value", []Accumulator{acc(5), acc(1, 2, 3)}, "group 1 has a single value"},
		{"zero variance", []Accumulator{acc(1, 2, 3), {}, acc(4, 4, 4)}, "group 3 has zero variance"},
	}
	for _, c := range cases {
		got, err := Bartlett(c.groups)
		checkUnavailable(t, c.name, "Bartlett test", got, err, c.want)
	}
}

// Equal sample variances give a statistic of exactly 0 (not a rounding
// residue below it) and p = 1.
func TestBartlettEqualVariances(t *testing.T) {
	got, err := Bartlett(groupAccumulators([][]float64{{1, 2, 3}, {11, 12, 13}, {-4, -3, -2}}))
	if err != nil {
		t.Fatal(err)
	}
	if got.Statistic != 0 || got.P != 1 || got.DF != 2 {
		t.Errorf("got %+v, want statistic 0, df 2, p 1", got)
	}
}

func TestLeveneBrownForsytheNotAvailable(t *testing.T) {
	cases := []struct {
		name    string
		samples [][]float64
		want    string
	}{
		{"no groups", nil, "at least two groups"},
		{"one group among empties", [][]float64{{}, {1, 2, 3}, nil}, "at least two groups"},
		{"single values", [][]float64{{1}, {2}, {5}}, "every group has a single value"},
		{"constant groups", [][]float64{{1, 1, 1}, {2, 2}}, "do not vary within any group"},
		// Two values always lie at the same distance from their mean and median.
		{"pairs", [][]float64{{1, 3}, {2, 10}, {}, {4, 4.5}}, "do not vary within any group"},
		{"NaN", [][]float64{{1, 2, 3}, {4, math.NaN(), 6}}, "value 2 of group 2 is not a finite number"},
		{"Inf", [][]float64{{math.Inf(-1), 2, 3}, {4, 5, 6}}, "value 1 of group 1 is not a finite number"},
	}
	tests := []struct {
		name string
		fn   func([][]float64) (FTest, error)
	}{{"Levene test", Levene}, {"Brown–Forsythe test", BrownForsythe}}
	for _, tt := range tests {
		for _, c := range cases {
			got, err := tt.fn(c.samples)
			checkUnavailable(t, tt.name+", "+c.name, tt.name, got, err, c.want)
		}
	}
}

// BrownForsythe and Levene take medians and means of the caller's slices
// without reordering them, and leave empty groups out.
func TestSpreadTestsKeepInput(t *testing.T) {
	_, values := readScenario(t, "seal_temperature")
	orig := make([][]float64, len(values))
	for i, xs := range values {
		orig[i] = slices.Clone(xs)
	}
	withEmpty := append([][]float64{nil}, values...)
	withEmpty = append(withEmpty, []float64{})
	for _, fn := range []func([][]float64) (FTest, error){Levene, BrownForsythe} {
		want, err := fn(values)
		if err != nil {
			t.Fatal(err)
		}
		got, err := fn(withEmpty)
		if err != nil {
			t.Fatal(err)
		}
		if got != want {
			t.Errorf("with empty groups %+v, without %+v", got, want)
		}
	}
	for i := range values {
		if !slices.Equal(values[i], orig[i]) {
			t.Errorf("group %d was modified", i+1)
		}
	}
}

// The median of an even count is the midpoint of the two middle values.
func TestCentreMedian(t *testing.T) {
	cases := []struct {
		xs   []float64
		want float64
	}{
		{[]float64{3}, 3},
		{[]float64{5, 1}, 3},
		{[]float64{2.5, -1, 7}, 2.5},
		{[]float64{4, 1, 3, 2}, 2.5},
		{[]float64{1.8, 1.7, 1.8, 1.9, 1.8, 1.7}, 1.8},
	}
	for _, c := range cases {
		if got := centreMedian(c.xs); got != c.want {
			t.Errorf("median(%v) = %v, want %v", c.xs, got, c.want)
		}
	}
}
