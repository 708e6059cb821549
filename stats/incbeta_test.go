package stats

import (
	"cmp"
	"fmt"
	"math"
	"math/big"
	"slices"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mathext"
)

// pbetaSource names where the reference values of TestRegIncBetaR come from.
const pbetaSource = "R 4.2.2 pbeta, testdata/reference/pbeta.R"

// ulp2 is 2^-53, the unit roundoff of float64.
const ulp2 = 0x1p-53

// betaCheck collects comparisons of RegIncBeta or RegIncBetaComplement with a
// reference, each with its own tolerance.
type betaCheck struct {
	what   string // the reference, for messages
	worst  float64
	worstN float64 // largest error / tolerance
	where  string
	bad    []string
	n      int
}

// check records one comparison: got against want with relative tolerance tol.
func (c *betaCheck) check(where string, got, want, tol float64) {
	c.n++
	e := refRelErr(got, want)
	if e > c.worst {
		c.worst = e
	}
	if r := e / tol; r > c.worstN || math.IsNaN(r) {
		c.worstN, c.where = r, where
	}
	if !(e <= tol) {
		c.bad = append(c.bad, fmt.Sprintf("  %s: got %.17g, want %.17g, relative error %.3g > %.3g", where, got, want, e, tol))
	}
}

// report logs the largest errors and fails the test on any case beyond its
// tolerance, listing the first few.
func (c *betaCheck) report(t *testing.T) {
	t.Helper()
	if c.n == 0 {
		t.Fatalf("%s: no cases", c.what)
	}
	t.Logf("%s: %d comparisons, max relative error %.3g; max error/tolerance %.3g at %s", c.what, c.n, c.worst, c.worstN, c.where)
	if len(c.bad) > 0 {
		slices.SortFunc(c.bad, cmp.Compare)
		t.Errorf("%s: %d of %d comparisons out of tolerance:\n%s", c.what, len(c.bad), c.n, strings.Join(c.bad[:min(15, len(c.bad))], "\n"))
	}
}

// lnTol returns units·2^-53·(1 + |ln v|): an error of a few roundings of the
// result plus the absolute rounding error that the exponent ln v of a tiny
// result carries (ln v reaches −690 near 1e-300).
func lnTol(units, v float64) float64 {
	return units * ulp2 * (1 + math.Abs(math.Log(v)))
}

// RegIncBeta and RegIncBetaComplement against R's pbeta (TOMS 708) over a and
// b in {0.5, 1, 2.5, 10, 100, 5000, 50000, 500000} and x from the far lower to
// the far upper tail (values from 1 down to 5.6e-302; see pbeta.R).
//
// Tolerance: 64·2^-53·(1 + |ln v| + |λ|) relative, λ = a − (a+b)x. R's own
// error has three parts: a few 1e-15 in the bulk (its series and continued
// fractions stop at a relative change of 1e-15); the absolute rounding error
// of the exponent ln v, which grows with |ln v|, as here; and the rounding of
// (a+b)·x in bratio's λ = a − (a+b)·x (or (a+b)·y − b), an absolute error of
// up to 2^-53·(a+b)·min(x, y), which the front factor, whose logarithmic
// derivative in λ is λ/((a+b)xy), turns into up to 2^-53·|λ|/max(x, y)
// ≤ 2^-52·|λ| relative. This code forms λ exactly (fused multiply-add), so
// that term is R's alone; it reaches 1.5e-12 at a = b = 5e5, x = 0.517,
// where λ = -1.7e4. Measured during development against a 60-digit
// evaluation, R's largest error is 33 of these units and this code's 2.4e-13
// relative (3 units); the tests below against exact identities hold this code
// to 8·2^-53·(1 + |ln v|) on their own.
func TestRegIncBetaR(t *testing.T) {
	c := betaCheck{what: "RegIncBeta against " + pbetaSource}
	for _, r := range readNumbers(t, "pbeta.csv", "a", "b", "x", "p", "q") {
		a, b, x, p, q := r[0], r[1], r[2], r[3], r[4]
		lambda := math.Abs(math.FMA(-(a + b), x, a))
		tolP := 64 * ulp2 * (1 + math.Abs(math.Log(p)) + lambda)
		tolQ := 64 * ulp2 * (1 + math.Abs(math.Log(q)) + lambda)
		where := fmt.Sprintf("a=%g b=%g x=%.17g", a, b, x)
		c.check("I_x(a,b), "+where, RegIncBeta(a, b, x), p, tolP)
		c.check("1 − I_x(a,b), "+where, RegIncBetaComplement(a, b, x, 1-x), q, tolQ)
		// The same values through the mirrored call, with x passed as the
		// exact complementary variable: 1 − I_(1−x)(b, a) = I_x(a, b).
		c.check("1 − I_(1−x)(b,a), "+where, RegIncBetaComplement(b, a, 1-x, x), p, tolP)
	}
	c.report(t)
}

// Exact identities with powers, from the definition (B(a, 1) = 1/a):
// I_x(a, 1) = x^a and 1 − I_x(1, b) = (1 − x)^b. With x, resp. 1 − x, a power
// of two 2^-k and k·a an integer, the value 2^(-k·a) is exact; the
// complement 1 − 2^(-k·a) is then a single rounding. For the large parameters
// the power is taken as exp(a·log1p(−2^-k)), x = 1 − 2^-k, which is good to
// 2^-53·(2 + |ln v|). Tolerance 8·2^-53·(1 + |ln v|).
func TestRegIncBetaPowers(t *testing.T) {
	c := betaCheck{what: "RegIncBeta against exact powers"}
	for _, a := range []float64{0.5, 1, 2.5, 10, 100, 1000} {
		for _, k := range []int{1, 2, 4, 8, 10, 20, 50, 100, 200, 400, 1000} {
			ka := float64(k) * a
			if ka != math.Trunc(ka) || ka > 1022 {
				continue
			}
			v := math.Ldexp(1, -int(ka))
			d := math.Ldexp(1, -k)
			where := fmt.Sprintf("a=%g, 2^-%d", a, k)
			// I_x(a, 1) = x^a, x = 2^-k.
			c.check("I_x(a,1), x = "+where, RegIncBeta(a, 1, d), v, lnTol(8, v))
			c.check("1 − I_x(a,1), x = "+where, RegIncBetaComplement(a, 1, d, 1-d), 1-v, lnTol(8, 1-v))
			// 1 − I_x(1, b) = y^b, y = 1 − x = 2^-k passed exactly, also
			// where x = 1 − 2^-k rounds to 1 (k > 53).
			c.check("1 − I_x(1,b), y = "+where, RegIncBetaComplement(1, a, 1-d, d), v, lnTol(8, v))
			if k <= 53 { // 1 − 2^-k exact
				c.check("I_x(1,b), y = "+where, RegIncBeta(1, a, 1-d), 1-v, lnTol(8, 1-v))
			}
		}
	}
	for _, a := range []float64{5000, 50000, 500000, 3e6} {
		for k := 1; k <= 40; k++ {
			d := math.Ldexp(1, -k)
			v := math.Exp(a * math.Log1p(-d)) // (1 − 2^-k)^a
			if v < 0x1p-1022 || v > 0.999 {
				continue
			}
			where := fmt.Sprintf("a=%g, 1 − 2^-%d", a, k)
			c.check("I_x(a,1), x = "+where, RegIncBeta(a, 1, 1-d), v, lnTol(8, v))
			c.check("1 − I_x(a,1), x = "+where, RegIncBetaComplement(a, 1, 1-d, d), -math.Expm1(a*math.Log1p(-d)), lnTol(8, 1-v))
			c.check("1 − I_x(1,b), x = 2^-k, b="+where, RegIncBetaComplement(1, a, d, 1-d), v, lnTol(8, v))
		}
	}
	c.report(t)
}

// The arcsine law I_x(1/2, 1/2) = (2/π)·arcsin(√x) (t = sin²θ in the
// integral, B(1/2, 1/2) = π), evaluated as (2/π)·atan2(√x, √(1−x)), which is good to a few
// roundings on all of (0, 1) (arcsin itself is ill-conditioned near 1), down
// to the smallest subnormal x; the complement is (2/π)·atan2(√(1−x), √x).
// Tolerance 8·2^-53·(1 + |ln v|).
func TestRegIncBetaArcsine(t *testing.T) {
	c := betaCheck{what: "RegIncBeta(1/2, 1/2) against (2/π)·arcsin(√x)"}
	for _, x := range []float64{5e-324, 1e-320, 1e-310, 1e-300, 1e-100, 1e-20, 1e-5, 0.01, 0.1, 0.25, 0.5, 0.7, 0.9, 0.999, 1 - 0x1p-30, 1 - 0x1p-53} {
		y := 1 - x
		p := 2 / math.Pi * math.Atan2(math.Sqrt(x), math.Sqrt(y))
		q := 2 / math.Pi * math.Atan2(math.Sqrt(y), math.Sqrt(x))
		c.check(fmt.Sprintf("I_x, x=%g", x), RegIncBeta(0.5, 0.5, x), p, lnTol(8, p))
		c.check(fmt.Sprintf("1 − I_x, x=%g", x), RegIncBetaComplement(0.5, 0.5, x, y), q, lnTol(8, q))
	}
	c.report(t)
}

// For integers a, b ≥ 1 the binomial identity (DLMF §8.17(i); the
// probability of at least a successes in n Bernoulli(x) trials)
//
//	I_x(a, b) = Σ_{j=a}^{n} C(n, j) x^j (1−x)^(n−j),  n = a + b − 1,
//
// summed in exact rational arithmetic (math/big) at dyadic x, where 1 − x is
// exact too, and rounded once to float64. This covers all three forms of the
// front factor (both parameters below 8, one below and one above, both above)
// and both sides of the mean. Tolerance 8·2^-53·(1 + |ln v|).
func TestRegIncBetaBinomial(t *testing.T) {
	c := betaCheck{what: "RegIncBeta against the binomial sum in exact arithmetic"}
	ints := []int{1, 2, 3, 5, 8, 9, 13, 21, 40, 77}
	xs := [][2]int64{{1, 1 << 20}, {1, 1024}, {1, 64}, {1, 8}, {1, 4}, {3, 8}, {1, 2}, {5, 8}, {3, 4}, {7, 8}, {63, 64}, {1023, 1024}, {1<<20 - 1, 1 << 20}}
	for _, a := range ints {
		for _, b := range ints {
			n := a + b - 1
			for _, xr := range xs {
				x := big.NewRat(xr[0], xr[1])
				y := new(big.Rat).Sub(big.NewRat(1, 1), x)
				lower, upper := new(big.Rat), new(big.Rat) // Σ_{j<a}, Σ_{j≥a}
				for j := 0; j <= n; j++ {
					term := new(big.Rat).SetInt(new(big.Int).Binomial(int64(n), int64(j)))
					term.Mul(term, ratPow(x, j))
					term.Mul(term, ratPow(y, n-j))
					if j < a {
						lower.Add(lower, term)
					} else {
						upper.Add(upper, term)
					}
				}
				p, _ := upper.Float64()
				q, _ := lower.Float64()
				xf, _ := x.Float64()
				yf, _ := y.Float64()
				where := fmt.Sprintf("a=%d b=%d x=%d/%d", a, b, xr[0], xr[1])
				if p >= 0x1p-1022 {
					c.check("I_x, "+where, RegIncBeta(float64(a), float64(b), xf), p, lnTol(8, p))
				}
				if q >= 0x1p-1022 {
					c.check("1 − I_x, "+where, RegIncBetaComplement(float64(a), float64(b), xf, yf), q, lnTol(8, q))
				}
			}
		}
	}
	c.report(t)
}

// ratPow returns x^k for k ≥ 0.
func ratPow(x *big.Rat, k int) *big.Rat {
	num := new(big.Int).Exp(x.Num(), big.NewInt(int64(k)), nil)
	den := new(big.Int).Exp(x.Denom(), big.NewInt(int64(k)), nil)
	return new(big.Rat).SetFrac(num, den)
}

// The symmetry I_x(a, b) = 1 − I_(1−x)(b, a) (DLMF §8.17(i)), for a, b in
// the grid of TestRegIncBetaR and 3e6, and x across (0, 1): the mirrored call
// RegIncBetaComplement(b, a, 1−x, x) must agree with RegIncBeta(a, b, x),
// and I plus its complement must be 1 to 2 roundings. At a = b and x = 1/2,
// where the mirrored call is the same call, it says I_(1/2)(a, a) = 1/2.
// Tolerance 16·2^-53·(1 + |ln v|): the continued fraction takes about
// 5.5·a^(1/3) terms at the mean (440 at a = 5e5), whose roundings add up to
// about 2e-15.
func TestRegIncBetaSymmetry(t *testing.T) {
	c := betaCheck{what: "RegIncBeta symmetry"}
	params := []float64{0.5, 1, 2.5, 10, 100, 5000, 50000, 500000, 3e6}
	for _, a := range params {
		for _, b := range params {
			mean := a / (a + b)
			for _, x := range []float64{1e-300, 1e-10, 0.5 * mean, 0.9 * mean, mean, 1.01 * mean, 0.5, 0.9, 1 - 1e-10} {
				if !(x > 0 && x < 1) {
					continue
				}
				where := fmt.Sprintf("a=%g b=%g x=%.17g", a, b, x)
				w := RegIncBeta(a, b, x)
				w1 := RegIncBetaComplement(a, b, x, 1-x)
				switch {
				case a == b && x == 0.5: // the mirrored call is this one
					c.check("I_(1/2)(a,a) = 1/2, "+where, w, 0.5, lnTol(16, 0.5))
				case w >= 0x1p-1022:
					c.check("I_x(a,b) vs 1 − I_(1−x)(b,a), "+where, RegIncBetaComplement(b, a, 1-x, x), w, lnTol(16, w))
				}
				c.check("I + (1 − I), "+where, w+w1, 1, 2*ulp2)
			}
		}
	}
	c.report(t)
}

// The ends of the range and the domain.
func TestRegIncBetaDomain(t *testing.T) {
	nan := math.NaN()
	cases := []struct {
		name      string
		got, want float64
	}{
		{"I_0", RegIncBeta(2, 3, 0), 0},
		{"I_1", RegIncBeta(2, 3, 1), 1},
		{"1 − I_0", RegIncBetaComplement(2, 3, 0, 1), 1},
		{"1 − I_1", RegIncBetaComplement(2, 3, 1, 0), 0},
		{"a = 0", RegIncBeta(0, 3, 0.5), nan},
		{"b < 0", RegIncBeta(2, -1, 0.5), nan},
		{"a = +Inf", RegIncBeta(math.Inf(1), 3, 0.5), nan},
		{"a NaN", RegIncBeta(nan, 3, 0.5), nan},
		{"x < 0", RegIncBeta(2, 3, -0.1), nan},
		{"x > 1", RegIncBeta(2, 3, 1.1), nan},
		{"x NaN", RegIncBeta(2, 3, nan), nan},
		{"x + y ≠ 1", RegIncBetaComplement(2, 3, 0.5, 0.6), nan},
	}
	for _, c := range cases {
		if !(c.got == c.want || math.IsNaN(c.got) && math.IsNaN(c.want)) {
			t.Errorf("%s = %v, want %v", c.name, c.got, c.want)
		}
	}
}

// benchBeta evaluates f over the (a, b, x) of a reference file in turn.
func benchBeta(b *testing.B, f func(a, b, x float64) float64) {
	for _, set := range []struct {
		name string
		args func(r []float64) (a, b, x float64)
		file string
		cols []string
	}{
		// pbeta.csv: a, b from 0.5 to 5e5, x across both tails.
		{"pbeta", func(r []float64) (float64, float64, float64) { return r[0], r[1], r[2] },
			"pbeta.csv", []string{"a", "b", "x", "p", "q"}},
		// pf_tail.csv: the F tail P(F > f) = I_x(d2/2, d1/2), x = d2/(d2 + d1 f).
		{"pf_tail", func(r []float64) (float64, float64, float64) { return r[2] / 2, r[1] / 2, r[2] / (r[2] + r[1]*r[0]) },
			"pf_tail.csv", []string{"f", "df1", "df2", "p"}},
	} {
		b.Run(set.name, func(b *testing.B) {
			var args [][3]float64
			for _, r := range readNumbers(b, set.file, set.cols...) {
				a, bb, x := set.args(r)
				args = append(args, [3]float64{a, bb, x})
			}
			var sink float64
			for i := 0; b.Loop(); i++ {
				r := args[i%len(args)]
				sink += f(r[0], r[1], r[2])
			}
			if math.IsNaN(sink) {
				b.Fatal("NaN")
			}
		})
	}
}

// BenchmarkRegIncBeta and BenchmarkGonumRegIncBeta time the same inputs, for
// the ratio: go test ./stats/ -run '^$' -bench 'RegIncBeta' -count 5.
func BenchmarkRegIncBeta(b *testing.B) { benchBeta(b, RegIncBeta) }

func BenchmarkGonumRegIncBeta(b *testing.B) { benchBeta(b, mathext.RegIncBeta) }
