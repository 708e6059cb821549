package stats

import (
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// GroupDeviation is one group's line in the analysis of means.
type GroupDeviation struct {
	Group     int     // index into the groups passed in
	Deviation float64 // mean_i − grand mean, in the data's units
	HalfWidth float64 // decision limit: the group is out when |Deviation| > HalfWidth
	Direction int     // +1 above the upper limit, −1 below the lower limit, 0 within
}

// MeansAnalysis is the analysis of means (Ott 1967): each group's mean
// against the grand mean, with decision limits, so that the group that is out
// and its direction can be named.
type MeansAnalysis struct {
	Alpha  float64 // family-wise significance level of the limits
	H      float64 // critical value multiplying s·√((N − n_i)/(N·n_i))
	Groups []GroupDeviation
}

// AnalysisOfMeans compares each group's mean with the grand mean of all
// values (Ott 1967; Nelson 1982, J. Quality Technology 14, for unequal n).
// Under equal means, mean_i − grand mean has variance σ²(N − n_i)/(N·n_i);
// the decision limits are
//
//	grand mean ± h · s · √((N − n_i) / (N · n_i)),  s = √MS within,
//
// with h the Šidák-adjusted Student t quantile
//
//	h = t(1 − α*/2; N − k),  α* = 1 − (1 − α)^(1/k),
//
// which holds the family-wise false-alarm rate at or below α for any k (it is
// slightly conservative against the exact multivariate-t limits tabled for
// equal n). Groups with no values are skipped. It returns an error wrapping
// ErrNotAvailable when there are fewer than two groups, no within-group
// degrees of freedom or no within-group variation.
func AnalysisOfMeans(groups []Accumulator, alpha float64) (MeansAnalysis, error) {
	if !(alpha > 0 && alpha < 1) {
		return MeansAnalysis{}, notAvailable("analysis of means", "significance level %g is not between 0 and 1", alpha)
	}
	t, err := OneWay(groups)
	if t.K < 2 || t.DFWithin < 1 || t.SSWithin <= 0 {
		return MeansAnalysis{}, notAvailable("analysis of means", "%v", reason(err))
	}
	k := float64(t.K)
	aStar := -math.Expm1(math.Log1p(-alpha) / k)
	h := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: t.DFWithin}.Quantile(1 - aStar/2)
	m := MeansAnalysis{Alpha: alpha, H: h}
	n := float64(t.N)
	for i, g := range groups {
		if g.N == 0 {
			continue
		}
		ni := float64(g.N)
		d := GroupDeviation{
			Group:     i,
			Deviation: g.Mean - t.GrandMean,
			HalfWidth: h * t.ResidualSD * math.Sqrt((n-ni)/(n*ni)),
		}
		switch {
		case d.Deviation > d.HalfWidth:
			d.Direction = 1
		case d.Deviation < -d.HalfWidth:
			d.Direction = -1
		}
		m.Groups = append(m.Groups, d)
	}
	return m, nil
}
