package stats

import "math"

// DetectableShift is the minimum detectable shift of the classic one-way F
// test: how far one group alone must move, in the data's units, for the test
// at level Alpha to detect it with probability Power.
type DetectableShift struct {
	Alpha, Power float64
	// Lambda is the noncentrality at which the F test reaches Power.
	Lambda float64
	// PerGroup[i] is the shift of group i alone that gives noncentrality
	// Lambda; 0 for groups without values.
	PerGroup []float64
	// Largest is the largest entry of PerGroup: a shift of this size in any
	// one group is detected with at least Power.
	Largest float64
}

// MinimumDetectableShift returns the smallest shift of a single group that
// the classic F test at level alpha detects with the given power, taking the
// within-group SD as σ = √MS within. When group i alone moves by δ, the
// noncentrality of F is
//
//	λ = δ² · n_i · (N − n_i) / (N · σ²),
//
// and the power is P(F'(k−1, N−k, λ) > F crit) with F crit the 1 − α quantile
// of the central F (noncentral F: NoncentralFSurvival). λ is found by
// bracketing and bisection to a relative 1e-12, then δ_i = σ·√(λ·N / (n_i·(N − n_i))).
func MinimumDetectableShift(groups []Accumulator, alpha, power float64) (DetectableShift, error) {
	const what = "minimum detectable shift"
	if !(alpha > 0 && alpha < 1) || !(power > alpha && power < 1) {
		return DetectableShift{}, notAvailable(what, "needs 0 < significance level < power < 1, have %g and %g", alpha, power)
	}
	t, err := OneWay(groups)
	if err != nil {
		return DetectableShift{}, notAvailable(what, "%s", reason(err))
	}
	d1, d2 := t.DFBetween, t.DFWithin
	fcrit := FQuantile(1-alpha, d1, d2)
	pow := func(lambda float64) float64 { return NoncentralFSurvival(fcrit, d1, d2, lambda) }
	lo, hi := 0.0, 1.0
	for pow(hi) < power {
		lo, hi = hi, 2*hi
		if hi > 1e7 {
			return DetectableShift{}, notAvailable(what, "the test cannot reach power %g", power)
		}
	}
	for hi-lo > 1e-12*hi {
		mid := lo + (hi-lo)/2
		if pow(mid) < power {
			lo = mid
		} else {
			hi = mid
		}
	}
	lambda := lo + (hi-lo)/2
	s := DetectableShift{Alpha: alpha, Power: power, Lambda: lambda, PerGroup: make([]float64, len(groups))}
	n := float64(t.N)
	for i, g := range groups {
		if g.N == 0 {
			continue
		}
		ni := float64(g.N)
		s.PerGroup[i] = t.ResidualSD * math.Sqrt(lambda*n/(ni*(n-ni)))
		s.Largest = math.Max(s.Largest, s.PerGroup[i])
	}
	return s, nil
}
