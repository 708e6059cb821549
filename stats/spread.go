package stats

import (
	"math"
	"slices"
)

// Bartlett returns Bartlett's (1937) test of equal variances (M. S. Bartlett,
// "Properties of sufficiency and statistical tests", Proc. R. Soc. Lond. A
// 160, 268–282), computed from the per-group sums. With ν_i = n_i − 1,
// ν = N − k and the pooled variance s_p² = Σ ν_i s_i² / ν,
//
//	K² = Σ ν_i ln(s_p² / s_i²) / C,  C = 1 + (Σ 1/ν_i − 1/ν) / (3(k − 1)),
//
// referred to chi-square with k − 1 degrees of freedom; the numerator is the
// usual ν ln s_p² − Σ ν_i ln s_i², summed as ratios so that nearly equal
// variances lose no digits. This is R's bartlett.test. Groups with no values
// are left out. The test is refused, not run on the rest, when a group has a
// single value or zero variance (the log of its variance is not defined), and
// when fewer than two groups have values: the error wraps ErrNotAvailable and
// names the group by its 1-based position in groups. The test assumes normal
// data and is sensitive to heavy tails; Levene and BrownForsythe are robust
// alternatives.
func Bartlett(groups []Accumulator) (ChiSquareTest, error) {
	const what = "Bartlett test"
	k := 0
	var nu, m2 float64
	for i, g := range groups {
		if g.N == 0 {
			continue
		}
		if g.N < 2 {
			return ChiSquareTest{}, notAvailable(what, "group %d has a single value; every group needs at least two", i+1)
		}
		if g.M2 <= 0 {
			return ChiSquareTest{}, notAvailable(what, "group %d has zero variance (all its values are equal)", i+1)
		}
		k++
		nu += float64(g.N - 1)
		m2 += g.M2
	}
	if k < 2 {
		return ChiSquareTest{}, notAvailable(what, "needs at least two groups with values, have %d", k)
	}
	sp2 := m2 / nu
	var num, inv float64
	for _, g := range groups {
		if g.N == 0 {
			continue
		}
		nui := float64(g.N - 1)
		num += nui * math.Log(sp2/g.Variance())
		inv += 1 / nui
	}
	df := float64(k - 1)
	c := 1 + (inv-1/nu)/(3*df)
	// num ≥ 0 exactly (the log of a weighted arithmetic over geometric mean);
	// rounding can leave it a few ulps below 0 when all variances are equal.
	stat := math.Max(0, num/c)
	return ChiSquareTest{Statistic: stat, DF: df, P: ChiSquareSurvival(stat, df)}, nil
}

// Levene returns Levene's (1960) test of equal variances (H. Levene, "Robust
// tests for equality of variances", in I. Olkin et al. (eds.), Contributions
// to Probability and Statistics, Stanford University Press, 278–292): the
// classic one-way F test (OneWay) applied to the absolute deviations from the
// group means,
//
//	z_ij = |x_ij − mean_i|,  F = MS between(z) / MS within(z),
//	df1 = k − 1,  df2 = N − k.
//
// This is car::leveneTest(center = mean) in R. The caller's slices are not
// modified. Groups with no values are left out. The error wraps
// ErrNotAvailable when fewer than two groups have values, a value is not
// finite, or the absolute deviations do not vary within any group (for
// instance when every group has at most two values).
func Levene(samples [][]float64) (FTest, error) {
	return absDevTest("Levene test", "means", samples, centreMean)
}

// BrownForsythe returns the Brown–Forsythe (1974) test of equal variances
// (M. B. Brown and A. B. Forsythe, "Robust tests for the equality of
// variances", J. Amer. Statist. Assoc. 69, 364–367): Levene's one-way F test
// applied to the absolute deviations from the group medians,
//
//	z_ij = |x_ij − median_i|,  F = MS between(z) / MS within(z),
//	df1 = k − 1,  df2 = N − k,
//
// which keeps its level under skewed and heavy-tailed data better than the
// mean-centred version. This is car::leveneTest(center = median) in R. The
// medians are taken on a sorted copy; the caller's slices are not modified.
// Groups with no values are left out. The error wraps ErrNotAvailable when
// fewer than two groups have values, a value is not finite, or the absolute
// deviations do not vary within any group (for instance when every group has
// at most two values).
func BrownForsythe(samples [][]float64) (FTest, error) {
	return absDevTest("Brown–Forsythe test", "medians", samples, centreMedian)
}

// absDevTest runs OneWay on the absolute deviations of each group's values
// from centre(group); centres names the centre in messages.
func absDevTest(what, centres string, samples [][]float64, centre func([]float64) float64) (FTest, error) {
	if err := checkFiniteGroups(what, samples); err != nil {
		return FTest{}, err
	}
	acc := make([]Accumulator, len(samples))
	for i, xs := range samples {
		if len(xs) == 0 {
			continue
		}
		c := centre(xs)
		for _, x := range xs {
			acc[i].Add(math.Abs(x - c))
		}
	}
	t, err := OneWay(acc)
	switch {
	case err == nil:
		return FTest{F: t.F, DF1: t.DFBetween, DF2: t.DFWithin, P: t.P}, nil
	case t.DFWithin < 1:
		return FTest{}, notAvailable(what, "every group has a single value")
	default:
		return FTest{}, notAvailable(what, "the absolute deviations from the group %s do not vary within any group", centres)
	}
}

// checkFiniteGroups reports fewer than two non-empty groups or a value that is
// not a finite number.
func checkFiniteGroups(what string, samples [][]float64) error {
	k := 0
	for i, xs := range samples {
		if len(xs) > 0 {
			k++
		}
		for j, x := range xs {
			if math.IsNaN(x) || math.IsInf(x, 0) {
				return notAvailable(what, "value %d of group %d is not a finite number", j+1, i+1)
			}
		}
	}
	if k < 2 {
		return notAvailable(what, "needs at least two groups with values, have %d", k)
	}
	return nil
}

// centreMean returns the mean of xs (len(xs) > 0), with one correction pass so
// that it is good to about an ulp.
func centreMean(xs []float64) float64 {
	n := float64(len(xs))
	var s float64
	for _, x := range xs {
		s += x
	}
	m := s / n
	var r float64
	for _, x := range xs {
		r += x - m
	}
	return m + r/n
}

// centreMedian returns the median of xs (len(xs) > 0) from a sorted copy.
func centreMedian(xs []float64) float64 {
	s := slices.Clone(xs)
	slices.Sort(s)
	h := len(s) / 2
	if len(s)%2 == 1 {
		return s[h]
	}
	return s[h-1] + (s[h]-s[h-1])/2
}
