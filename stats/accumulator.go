package stats

import "math"

// Accumulator holds the running sums of one group: count, mean, the sum of
// squared deviations from the mean (M2), minimum and maximum.
//
// Add uses Welford's (1962) update,
//
//	n ← n+1;  δ = x − mean;  mean ← mean + δ/n;  M2 ← M2 + δ·(x − mean),
//
// and Merge the pairwise combination of Chan, Golub & LeVeque (1979),
//
//	δ = mean_b − mean_a;  n = n_a + n_b;
//	mean = mean_a + δ·n_b/n;  M2 = M2_a + M2_b + δ²·n_a·n_b/n,
//
// so that accumulators built from parts of a data set merge to the
// accumulator of the whole, in any order, up to rounding. Both run in constant
// time and allocate nothing. The zero value is an empty accumulator.
//
// Values should be centred on a Reference first (see Reference.Centre): the
// update is exact to rounding in the centred values, whatever the offset of
// the raw data.
type Accumulator struct {
	N    int64   // number of values
	Mean float64 // arithmetic mean
	M2   float64 // Σ (x − mean)²
	Min  float64 // smallest value; meaningless when N == 0
	Max  float64 // largest value; meaningless when N == 0
}

// Add adds one value.
func (a *Accumulator) Add(x float64) {
	a.N++
	if a.N == 1 {
		a.Mean, a.M2, a.Min, a.Max = x, 0, x, x
		return
	}
	d := x - a.Mean
	a.Mean += d / float64(a.N)
	a.M2 += d * (x - a.Mean)
	if x < a.Min {
		a.Min = x
	}
	if x > a.Max {
		a.Max = x
	}
}

// Merge adds every value summarised by b to a.
func (a *Accumulator) Merge(b Accumulator) {
	switch {
	case b.N == 0:
		return
	case a.N == 0:
		*a = b
		return
	}
	na, nb := float64(a.N), float64(b.N)
	n := na + nb
	d := b.Mean - a.Mean
	a.Mean += d * (nb / n)
	a.M2 += b.M2 + d*d*(na*nb/n)
	a.N += b.N
	a.Min = math.Min(a.Min, b.Min)
	a.Max = math.Max(a.Max, b.Max)
}

// Variance returns the sample variance M2/(n−1), or 0 when n < 2.
func (a Accumulator) Variance() float64 {
	if a.N < 2 {
		return 0
	}
	return a.M2 / float64(a.N-1)
}

// SD returns the sample standard deviation, or 0 when n < 2.
func (a Accumulator) SD() float64 { return math.Sqrt(a.Variance()) }
