package stats

import (
	"cmp"
	"slices"
)

// KruskalWallis returns the Kruskal–Wallis (1952) rank test of equal
// distributions (W. H. Kruskal and W. A. Wallis, "Use of ranks in
// one-criterion variance analysis", J. Amer. Statist. Assoc. 47, 583–621).
// All N values are ranked together, tied values getting the mean of the ranks
// they span (mid-ranks); with R_i the rank sum of group i,
//
//	H = 12 / (N(N + 1)) · Σ n_i (R_i/n_i − (N + 1)/2)²  /  (1 − Σ (t³ − t) / (N³ − N)),
//
// the sum in the correction running over the groups of t tied values, and p
// from chi-square with k − 1 degrees of freedom. The first factor is the
// textbook 12/(N(N+1)) Σ R_i²/n_i − 3(N + 1), written without its
// cancellation. This is R's kruskal.test. The values are sorted once, in a
// copy; the caller's slices are not modified. Groups with no values are left
// out. The error wraps ErrNotAvailable when fewer than two groups have
// values, a value is not finite, or all values are tied.
func KruskalWallis(samples [][]float64) (ChiSquareTest, error) {
	const what = "Kruskal–Wallis test"
	if err := checkFiniteGroups(what, samples); err != nil {
		return ChiSquareTest{}, err
	}
	type obs struct {
		x     float64
		group int
	}
	var all []obs
	k := 0
	for i, xs := range samples {
		if len(xs) > 0 {
			k++
		}
		for _, x := range xs {
			all = append(all, obs{x, i})
		}
	}
	slices.SortFunc(all, func(a, b obs) int { return cmp.Compare(a.x, b.x) })

	// Twice the rank sums, so that mid-ranks stay integers: ranks i+1..j of a
	// run of tied values have mid-rank (i + 1 + j)/2.
	rankSum2 := make([]float64, len(samples))
	n := float64(len(all))
	var ties float64 // Σ (t³ − t)
	for i := 0; i < len(all); {
		j := i + 1
		for j < len(all) && all[j].x == all[i].x {
			j++
		}
		mid2 := float64(i + 1 + j)
		for _, o := range all[i:j] {
			rankSum2[o.group] += mid2
		}
		t := float64(j - i)
		ties += t*t*t - t
		i = j
	}
	c := 1 - ties/(n*n*n-n)
	if c <= 0 {
		return ChiSquareTest{}, notAvailable(what, "all values are tied")
	}
	var s float64
	for i, xs := range samples {
		if len(xs) == 0 {
			continue
		}
		ni := float64(len(xs))
		d := rankSum2[i] - ni*(n+1) // 2·(R_i − n_i(N + 1)/2), exact
		s += d * d / (4 * ni)
	}
	h := 12 / (n * (n + 1)) * s / c
	df := float64(k - 1)
	return ChiSquareTest{Statistic: h, DF: df, P: ChiSquareSurvival(h, df)}, nil
}
