package stats

import "math"

// Table is the one-way analysis of variance of k groups: the classic
// decomposition of the total sum of squares into a between-group and a
// within-group part, with the F test of equal means.
//
//	SS between = Σ n_i (mean_i − grand mean)²     df = k − 1
//	SS within  = Σ M2_i                           df = N − k
//	SS total   = M2 of all values together        df = N − 1
//	F = MS between / MS within,  MS = SS / df,  p = P(F(k−1, N−k) > F)
//	R² = SS between / SS total
//	adjusted R² = 1 − MS within / (SS total / (N − 1))
//	ω² = (SS between − (k − 1)·MS within) / (SS total + MS within)   (Hays 1963)
//	residual SD = √MS within
//
// SS total is computed independently of the other two, by merging the group
// accumulators (Chan, Golub & LeVeque 1979); IdentityError is
// |SS total − SS between − SS within| / SS total, which stays at the level of
// rounding when the sums are sound.
type Table struct {
	K         int     // groups with at least one value
	N         int64   // values in those groups
	GrandMean float64 // mean of all values, on the accumulators' (centred) scale

	SSBetween, SSWithin, SSTotal float64
	DFBetween, DFWithin, DFTotal float64
	MSBetween, MSWithin          float64

	F, P          float64 // valid only when OneWay returns no error
	R2, AdjR2     float64
	Omega2        float64
	ResidualSD    float64
	IdentityError float64
}

// OneWay computes the one-way table from per-group accumulators. Groups with
// no values are left out. It returns an error wrapping ErrNotAvailable when
// the F test is not defined: fewer than two groups, no within-group degrees
// of freedom (every group has one value), or no within-group variation. The
// sums of squares and degrees of freedom are still filled in where they are
// defined, so a caller can print the table with F and p marked not available.
func OneWay(groups []Accumulator) (Table, error) {
	var t Table
	var all Accumulator
	for _, g := range groups {
		if g.N == 0 {
			continue
		}
		t.K++
		all.Merge(g)
	}
	t.N = all.N
	t.GrandMean = all.Mean
	if t.K < 2 {
		return t, notAvailable("one-way F", "needs at least two groups with values, have %d", t.K)
	}
	for _, g := range groups {
		if g.N == 0 {
			continue
		}
		d := g.Mean - all.Mean
		t.SSBetween += float64(g.N) * d * d
		t.SSWithin += g.M2
	}
	t.SSTotal = all.M2
	t.DFBetween = float64(t.K - 1)
	t.DFWithin = float64(t.N) - float64(t.K)
	t.DFTotal = float64(t.N - 1)
	t.MSBetween = t.SSBetween / t.DFBetween
	if t.SSTotal > 0 {
		t.IdentityError = math.Abs(t.SSTotal-t.SSBetween-t.SSWithin) / t.SSTotal
		t.R2 = t.SSBetween / t.SSTotal
	}
	if t.DFWithin < 1 {
		return t, notAvailable("one-way F", "no within-group degrees of freedom: every group has a single value")
	}
	t.MSWithin = t.SSWithin / t.DFWithin
	t.ResidualSD = math.Sqrt(t.MSWithin)
	if t.SSTotal > 0 {
		t.AdjR2 = 1 - t.MSWithin/(t.SSTotal/t.DFTotal)
		t.Omega2 = (t.SSBetween - t.DFBetween*t.MSWithin) / (t.SSTotal + t.MSWithin)
	}
	if t.SSWithin <= 0 {
		return t, notAvailable("one-way F", "no variation within any group")
	}
	t.F = t.MSBetween / t.MSWithin
	t.P = FSurvival(t.F, t.DFBetween, t.DFWithin)
	return t, nil
}
