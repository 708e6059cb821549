package stats

// FTest is a test statistic referred to an F distribution: the statistic F,
// its numerator and denominator degrees of freedom and the upper-tail
// p-value P(F(DF1, DF2) > F).
type FTest struct{ F, DF1, DF2, P float64 }

// ChiSquareTest is a test statistic referred to a chi-square distribution
// with DF degrees of freedom; P is the upper-tail p-value.
type ChiSquareTest struct{ Statistic, DF, P float64 }

// Welch returns Welch's (1951) heteroscedastic F test of equal means
// (B. L. Welch, "On the comparison of several mean values: an alternative
// approach", Biometrika 38, 330–336), computed from the per-group sums. With
// weights w_i = n_i / s_i², W = Σ w_i and the weighted mean m = Σ w_i·mean_i / W,
//
//	Λ  = Σ (1 − w_i/W)² / (n_i − 1)
//	F  = [Σ w_i (mean_i − m)² / (k − 1)] / [1 + 2(k − 2)·Λ / (k² − 1)]
//	df1 = k − 1,  df2 = (k² − 1) / (3Λ),  p = P(F(df1, df2) > F).
//
// This is what R's oneway.test(var.equal = FALSE) computes. Groups with no
// values are left out. Every remaining group needs at least two values and a
// positive variance; otherwise, and with fewer than two groups, the error
// wraps ErrNotAvailable and names the group by its 1-based position in
// groups.
func Welch(groups []Accumulator) (FTest, error) {
	const what = "Welch F"
	k := 0
	var sumW float64
	for i, g := range groups {
		if g.N == 0 {
			continue
		}
		if g.N < 2 {
			return FTest{}, notAvailable(what, "group %d has a single value; every group needs at least two", i+1)
		}
		if g.M2 <= 0 {
			return FTest{}, notAvailable(what, "group %d has zero variance (all its values are equal)", i+1)
		}
		k++
		sumW += float64(g.N) / g.Variance()
	}
	if k < 2 {
		return FTest{}, notAvailable(what, "needs at least two groups with values, have %d", k)
	}
	var m float64 // weighted mean
	for _, g := range groups {
		if g.N > 0 {
			m += float64(g.N) / g.Variance() / sumW * g.Mean
		}
	}
	var a, lambda float64
	for _, g := range groups {
		if g.N == 0 {
			continue
		}
		w := float64(g.N) / g.Variance()
		d := g.Mean - m
		a += w * d * d
		r := 1 - w/sumW
		lambda += r * r / float64(g.N-1)
	}
	kf := float64(k)
	df1 := kf - 1
	f := (a / df1) / (1 + 2*(kf-2)*lambda/(kf*kf-1))
	df2 := (kf*kf - 1) / (3 * lambda)
	return FTest{F: f, DF1: df1, DF2: df2, P: FSurvival(f, df1, df2)}, nil
}
