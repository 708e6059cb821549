package stats

import (
	"math"

	"gonum.org/v1/gonum/mathext"
)

// FSurvival returns P(F > f) for the F distribution with d1 and d2 degrees of
// freedom, computed as the complement of the regularized incomplete beta
// function
//
//	P(F > f) = 1 − I_y(d1/2, d2/2) = I_x(d2/2, d1/2),
//	y = d1·f/(d1·f + d2),  x = 1 − y = d2/(d1·f + d2),
//
// by RegIncBetaComplement, which never forms 1 − CDF, so that the relative
// accuracy holds far into the upper tail (p down to about 1e-300) instead of
// flooring near 1e-16 as distuv.F.Survival does. x and y are each formed
// by one division, neither as 1 minus the other. f ≤ 0 gives 1; f = +Inf
// gives 0.
func FSurvival(f, d1, d2 float64) float64 {
	switch {
	case math.IsNaN(f) || d1 <= 0 || d2 <= 0:
		return math.NaN()
	case f <= 0:
		return 1
	case math.IsInf(f, 1):
		return 0
	}
	var x, y float64
	if u := d1 * f; !math.IsInf(u, 1) {
		t := u + d2
		x, y = d2/t, u/t
	} else { // d1·f overflows; x = q/(1+q) with q = d2/(d1·f) tiny
		q := d2 / d1 / f
		x, y = q/(1+q), 1/(1+q)
	}
	return RegIncBetaComplement(d1/2, d2/2, y, x)
}

// FQuantile returns the f with P(F ≤ f) = p for the F distribution with d1
// and d2 degrees of freedom, by inverting the regularized incomplete beta.
func FQuantile(p, d1, d2 float64) float64 {
	if p < 0 || p > 1 || d1 <= 0 || d2 <= 0 {
		return math.NaN()
	}
	if p < 0.5 {
		// Lower quantiles: P(F ≤ f) = I_y(d1/2, d2/2), y = d1 f/(d1 f + d2);
		// solving for y keeps the digits that 1 − x would lose.
		y := mathext.InvRegIncBeta(d1/2, d2/2, p)
		if y >= 1 {
			return math.Inf(1)
		}
		return d2 * y / (d1 * (1 - y))
	}
	// Upper quantiles: P(F > f) = I_x(d2/2, d1/2), x = d2/(d2 + d1 f).
	x := mathext.InvRegIncBeta(d2/2, d1/2, 1-p)
	if x <= 0 {
		return math.Inf(1)
	}
	return d2 * (1 - x) / (d1 * x)
}

// ChiSquareSurvival returns P(X > x) for the chi-square distribution with df
// degrees of freedom, as the regularized upper incomplete gamma function
// Q(df/2, x/2) computed directly (not as 1 − CDF).
func ChiSquareSurvival(x, df float64) float64 {
	switch {
	case math.IsNaN(x) || df <= 0:
		return math.NaN()
	case x <= 0:
		return 1
	case math.IsInf(x, 1):
		return 0
	}
	return mathext.GammaIncRegComp(df/2, x/2)
}

// NoncentralFSurvival returns P(F' > f) for the noncentral F distribution
// with d1, d2 degrees of freedom and noncentrality λ, as the Poisson mixture
// of central beta tails (e.g. Johnson, Kotz & Balakrishnan, Continuous
// Univariate Distributions, vol. 2, ch. 30):
//
//	P(F' > f) = Σ_j e^(−λ/2) (λ/2)^j / j! · I_x(d2/2, d1/2 + j),  x = d2/(d2 + d1·f).
//
// The sum starts at the Poisson mode and runs outwards in both directions
// until the Poisson weights fall below 1e-17, so its cost
// grows like √λ. λ = 0 gives the central FSurvival.
func NoncentralFSurvival(f, d1, d2, lambda float64) float64 {
	switch {
	case math.IsNaN(f) || math.IsNaN(lambda) || d1 <= 0 || d2 <= 0 || lambda < 0:
		return math.NaN()
	case lambda == 0:
		return FSurvival(f, d1, d2)
	case f <= 0:
		return 1
	case math.IsInf(f, 1):
		return 0
	}
	x := d2 / (d2 + d1*f)
	h := lambda / 2
	mode := math.Floor(h)
	lg, _ := math.Lgamma(mode + 1)
	wMode := math.Exp(-h + mode*math.Log(h) - lg)
	term := func(j, w float64) float64 { return w * RegIncBeta(d2/2, d1/2+j, x) }
	sum := term(mode, wMode)
	// Upwards from the mode.
	w := wMode
	for j := mode + 1; ; j++ {
		w *= h / j
		sum += term(j, w)
		if w < 1e-17 {
			break
		}
	}
	// Downwards from the mode.
	w = wMode
	for j := mode - 1; j >= 0; j-- {
		w *= (j + 1) / h
		sum += term(j, w)
		if w < 1e-17 {
			break
		}
	}
	return math.Min(1, sum)
}
