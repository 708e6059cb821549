package alert

import (
	"math"
)

// SiegmundARL returns Siegmund's (1985) approximation of the average run
// length of a one-sided CUSUM S_t = max(0, S_{t−1} + z_t − k), signalling at
// S_t > h, when the increments z_t are independent N(μ, 1) (D. Siegmund,
// Sequential Analysis: Tests and Confidence Intervals, Springer 1985, p. 27;
// in the form given by D. C. Montgomery, Introduction to Statistical Quality
// Control, ch. 9):
//
//	ARL ≈ (exp(−2Δb) + 2Δb − 1) / (2Δ²),  Δ = μ − k,  b = h + 1.166,
//
// and b² when Δ = 0. The two-sided chart's run length follows from the two
// one-sided ones as 1/ARL = 1/ARL⁺ + 1/ARL⁻.
func SiegmundARL(mu, k, h float64) float64 {
	d := mu - k
	b := h + 1.166
	if math.Abs(d) < 1e-9 {
		return b * b
	}
	x := 2 * d * b
	return (math.Exp(-x) + x - 1) / (2 * d * d)
}

// CUSUMThreshold returns the decision interval h at which a one-sided CUSUM
// with reference k has the in-control average run length arl0 by
// SiegmundARL (μ = 0), found by bisection; 0 when arl0 is at most the run
// length of h = 0.
func CUSUMThreshold(k, arl0 float64) float64 {
	if !(arl0 > SiegmundARL(0, k, 0)) {
		return 0
	}
	lo, hi := 0.0, 1.0
	for SiegmundARL(0, k, hi) < arl0 {
		hi *= 2
		if hi > 1e6 {
			return hi
		}
	}
	for range 100 {
		mid := (lo + hi) / 2
		if SiegmundARL(0, k, mid) < arl0 {
			lo = mid
		} else {
			hi = mid
		}
	}
	return (lo + hi) / 2
}

// cusumH returns the decision interval of one contrast CUSUM detector at
// the per-evaluation level alpha (its share of the budget) for g groups:
// 2g one-sided charts each with in-control run length 2g/alpha, so that
// their signals add up to alpha per evaluation.
func cusumH(c ContrastCUSUM, alpha float64, g int) float64 {
	if c.H > 0 {
		return c.H
	}
	return CUSUMThreshold(c.K, 2*float64(g)/alpha)
}

// cusumStep advances the two one-sided sums of one group by the
// standardized increment z, capped at limit so that a long shift does not
// take ever longer to clear once it is over (Page 1954's sums are
// unbounded; the cap changes nothing up to the first signal when
// limit ≥ h, and the monitor passes h).
func cusumStep(hi, lo, z, k, limit float64) (float64, float64) {
	hi = math.Min(math.Max(0, hi+z-k), limit)
	lo = math.Min(math.Max(0, lo-z-k), limit)
	return hi, lo
}
