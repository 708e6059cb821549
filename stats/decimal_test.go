package stats

import (
	"errors"
	"fmt"
	"math"
	"math/big"
	"math/rand/v2"
	"strconv"
	"strings"
	"testing"
	"unicode/utf8"
)

// decTestRat returns the exact value of plain decimal text, computed by
// math/big, independently of the code under test.
func decTestRat(t testing.TB, s string) *big.Rat {
	t.Helper()
	x, ok := new(big.Rat).SetString(s)
	if !ok {
		t.Fatalf("big.Rat cannot read %q", s)
	}
	return x
}

// decTestFloat returns the float64 nearest the exact value of s (math/big).
func decTestFloat(t testing.TB, s string) float64 {
	t.Helper()
	f, _ := decTestRat(t, s).Float64()
	return f
}

// decTestDiff returns the float64 nearest text − ref, computed exactly with
// math/big and rounded once.
func decTestDiff(t testing.TB, text, ref string) float64 {
	t.Helper()
	x := decTestRat(t, text)
	x.Sub(x, decTestRat(t, ref))
	f, _ := x.Float64()
	return f
}

// decTestSplit reads plain decimal text with strings and math/big into
// sign·coef·10^exp, where coef has no trailing zeros (zero for 0). It is a
// second, independent reading used to predict when Centre must be exact.
func decTestSplit(s string) (neg bool, coef *big.Int, exp int64, ok bool) {
	if s != "" && (s[0] == '+' || s[0] == '-') {
		neg = s[0] == '-'
		s = s[1:]
	}
	if k := strings.IndexAny(s, "eE"); k >= 0 {
		e, err := strconv.ParseInt(s[k+1:], 10, 64)
		if err != nil {
			return false, nil, 0, false
		}
		exp = e
		s = s[:k]
	}
	if k := strings.IndexByte(s, '.'); k >= 0 {
		exp -= int64(len(s) - k - 1)
		s = s[:k] + s[k+1:]
	}
	s = strings.TrimLeft(s, "0")
	trimmed := strings.TrimRight(s, "0")
	exp += int64(len(s) - len(trimmed))
	coef = new(big.Int)
	if trimmed == "" {
		return false, coef, 0, true
	}
	if _, ok := coef.SetString(trimmed, 10); !ok {
		return false, nil, 0, false
	}
	return neg, coef, exp, true
}

// decTestExpectExact predicts, from the documented conditions, whether
// Centre of text on ref is exact: both coefficients below 2^128, both still
// below 2^128 when aligned to the smaller exponent, and for opposite signs
// the sum of the aligned magnitudes below 2^128.
func decTestExpectExact(t testing.TB, text, ref string) bool {
	t.Helper()
	vn, vc, ve, ok1 := decTestSplit(text)
	rn, rc, re, ok2 := decTestSplit(ref)
	if !ok1 || !ok2 {
		t.Fatalf("cannot split %q or %q", text, ref)
	}
	if vc.BitLen() > 128 || rc.BitLen() > 128 {
		return false
	}
	switch {
	case vc.Sign() == 0:
		ve = re
	case rc.Sign() == 0:
		re = ve
	}
	e := min(ve, re)
	scale := func(c *big.Int, by int64) (*big.Int, bool) {
		if c.Sign() != 0 && by > 40 { // 10^41 > 2^128 already
			return nil, false
		}
		p := new(big.Int).Exp(big.NewInt(10), big.NewInt(by), nil)
		p.Mul(p, c)
		return p, p.BitLen() <= 128
	}
	av, okv := scale(vc, ve-e)
	ar, okr := scale(rc, re-e)
	if !okv || !okr {
		return false
	}
	if vc.Sign() != 0 && rc.Sign() != 0 && vn != rn {
		return new(big.Int).Add(av, ar).BitLen() <= 128
	}
	return true
}

func TestParseDecimal(t *testing.T) {
	tests := []struct {
		in, want string // want: canonical String()
	}{
		{"0", "0"},
		{"-0", "0"},
		{"+0.000e12", "0"},
		{"00000", "0"},
		{"1", "1"},
		{"+1", "1"},
		{"-1", "-1"},
		{"1.50", "1.5"},
		{"15e-1", "1.5"},
		{"0.15E1", "1.5"},
		{"5.", "5"},
		{".5", "0.5"},
		{"-.5e-3", "-0.0005"},
		{"100", "100"},
		{"100.000", "100"},
		{"1e2", "100"},
		{"1e20", "100000000000000000000"},
		{"1e21", "1e+21"},
		{"12.5e20", "1.25e+21"},
		{"0.0000001", "0.0000001"},
		{"0.00000001", "1e-8"},
		{"-123.456e-10", "-1.23456e-8"},
		{"1000000000001.4", "1000000000001.4"}, // NIST StRD SmLs07–09
		{"107.8681568", "107.8681568"},         // NIST StRD AtmWtAg
		{"0000107.86815680000", "107.8681568"},
		{"340282366920938463463374607431768211455", "3.40282366920938463463374607431768211455e+38"},  // 2^128 − 1: two words
		{"340282366920938463463374607431768211456", "3.40282366920938463463374607431768211456e+38"},  // 2^128: long form
		{"1234567890123456789012345678901234567890.5", "1234567890123456789012345678901234567890.5"}, // long form
		{"-0.000000000000000000000000000000000000000001234567890123456789012345678901234567890", "-1.23456789012345678901234567890123456789e-42"},
		{"1797693134862315807937289714053034150799e269", "1.797693134862315807937289714053034150799e+308"}, // just below the overflow threshold
		{"4.9406564584124654e-324", "4.9406564584124654e-324"},                                             // smallest subnormal
		{"2.4703282292062328e-324", "2.4703282292062328e-324"},                                             // just above half of it: rounds up
		{"1e-320", "1e-320"},
		{"1e308", "1e+308"},
	}
	for _, tc := range tests {
		d, err := ParseDecimal(tc.in)
		if err != nil {
			t.Errorf("ParseDecimal(%q): %v", tc.in, err)
			continue
		}
		if got := d.String(); got != tc.want {
			t.Errorf("ParseDecimal(%q).String() = %q, want %q", tc.in, got, tc.want)
		}
		if got, want := d.Float64(), decTestFloat(t, tc.in); got != want {
			t.Errorf("ParseDecimal(%q).Float64() = %v, want %v (math/big)", tc.in, got, want)
		}
		if got, want := d.IsZero(), decTestRat(t, tc.in).Sign() == 0; got != want {
			t.Errorf("ParseDecimal(%q).IsZero() = %v, want %v", tc.in, got, want)
		}
	}
}

func TestDecDigits64(t *testing.T) {
	check := func(x uint64) {
		if got, want := decDigits64(x), int64(len(strconv.FormatUint(x, 10))); got != want {
			t.Errorf("decDigits64(%d) = %d, want %d", x, got, want)
		}
	}
	for k := range 64 {
		check(uint64(1) << k)
		check(uint64(1)<<k + 1)
		check(uint64(1)<<(k+1) - 1)
	}
	p := uint64(1)
	for k := range 20 {
		check(p)
		check(p + 1)
		if k > 0 {
			check(p - 1)
		}
		if k < 19 {
			p *= 10
		}
	}
	check(math.MaxUint64)
}

func TestParseDecimalZeroExponent(t *testing.T) {
	// math/big cannot read this; any exponent of zero is zero.
	d, err := ParseDecimal("-0e999999999999999999999999")
	if err != nil || !d.IsZero() || d.String() != "0" || d.Float64() != 0 || math.Signbit(d.Float64()) {
		t.Errorf("ParseDecimal(-0e999…) = %v, %v", d, err)
	}
}

func TestParseDecimalErrors(t *testing.T) {
	tests := []struct {
		in   string
		want error
	}{
		{"", ErrSyntax},
		{"+", ErrSyntax},
		{"-", ErrSyntax},
		{".", ErrSyntax},
		{"-.", ErrSyntax},
		{"e5", ErrSyntax},
		{".e5", ErrSyntax},
		{"1e", ErrSyntax},
		{"1e+", ErrSyntax},
		{"1e-", ErrSyntax},
		{"1e5.0", ErrSyntax},
		{"1.2.3", ErrSyntax},
		{"12,5", ErrSyntax},
		{"1_000", ErrSyntax},
		{"0x1p3", ErrSyntax},
		{" 1", ErrSyntax},
		{"1 ", ErrSyntax},
		{"++1", ErrSyntax},
		{"+-1", ErrSyntax},
		{"1e++5", ErrSyntax},
		{"١", ErrSyntax}, // Arabic-Indic digit one
		{"infinit", ErrSyntax},
		{"nanx", ErrSyntax},
		{"NaN", ErrNotFinite},
		{"nan", ErrNotFinite},
		{"-nan", ErrNotFinite},
		{"Inf", ErrNotFinite},
		{"+Inf", ErrNotFinite},
		{"-Inf", ErrNotFinite},
		{"INF", ErrNotFinite},
		{"Infinity", ErrNotFinite},
		{"-infinity", ErrNotFinite},
		{"1e309", ErrOutOfRange},
		{"1.8e308", ErrOutOfRange},
		{"-1797693134862315807937289714053034150800e269", ErrOutOfRange}, // rounds to -Inf
		{"1e-400", ErrOutOfRange},
		{"2.4703282292062327e-324", ErrOutOfRange}, // below half the smallest subnormal: rounds to 0
		{"1e99999999999999999999999999", ErrOutOfRange},
		{"-1e-99999999999999999999999999", ErrOutOfRange},
	}
	for _, tc := range tests {
		d, err := ParseDecimal(tc.in)
		if !errors.Is(err, tc.want) {
			t.Errorf("ParseDecimal(%q) = %v, %v; want error %v", tc.in, d, err, tc.want)
			continue
		}
		var de *DecimalError
		if !errors.As(err, &de) || de.Text != tc.in {
			t.Errorf("ParseDecimal(%q): error %#v is not a *DecimalError naming the text", tc.in, err)
		}
		if d != (Decimal{}) {
			t.Errorf("ParseDecimal(%q) returned %v with an error", tc.in, d)
		}
	}
}

func TestDecimalErrorMessage(t *testing.T) {
	_, err := ParseDecimal("12,5")
	if got, want := err.Error(), `parse decimal "12,5": not a decimal number`; got != want {
		t.Errorf("message %q, want %q", got, want)
	}
	long := strings.Repeat("7", 60) + "€€€€" + strings.Repeat("x", 1000)
	_, err = ParseDecimal(long)
	var de *DecimalError
	if !errors.As(err, &de) {
		t.Fatalf("error %v is not a *DecimalError", err)
	}
	if len(de.Text) > decMaxErrText+3 || !strings.HasSuffix(de.Text, "...") ||
		!strings.HasPrefix(long, strings.TrimSuffix(de.Text, "...")) || !utf8.ValidString(de.Text) {
		t.Errorf("Text %q is not a short, valid prefix of the input", de.Text)
	}
	if len(err.Error()) > 120 {
		t.Errorf("message of %d bytes for long input", len(err.Error()))
	}
	if (&DecimalError{Text: "x"}).Error() == "" {
		t.Error("empty message for a DecimalError without Err")
	}
}

// decTestText returns random plain decimal text: a sign, integer digits,
// a fraction and an exponent, each sometimes absent, with leading and
// trailing zeros, and now and then more digits than 128 bits hold.
func decTestText(rng *rand.Rand) string {
	var b strings.Builder
	switch rng.IntN(4) {
	case 0:
		b.WriteByte('-')
	case 1:
		b.WriteByte('+')
	}
	maxDigits := 20
	if rng.IntN(8) == 0 {
		maxDigits = 50
	}
	digits := func(n int) {
		for range n {
			if rng.IntN(4) == 0 {
				b.WriteByte('0')
			} else {
				b.WriteByte(byte('0' + rng.IntN(10)))
			}
		}
	}
	intDigits, fracDigits := rng.IntN(maxDigits+1), rng.IntN(maxDigits+1)
	if rng.IntN(10) == 0 {
		b.WriteString("000")
	}
	digits(intDigits)
	if fracDigits > 0 || rng.IntN(5) == 0 {
		b.WriteByte('.')
		digits(fracDigits)
	}
	if intDigits+fracDigits == 0 {
		b.WriteByte(byte('0' + rng.IntN(10)))
	}
	if rng.IntN(3) == 0 {
		b.WriteString([]string{"e", "E", "e+", "e-", "E-"}[rng.IntN(5)])
		b.WriteString(strconv.Itoa(rng.IntN(45)))
	}
	return b.String()
}

// decTestNear returns text for a value close to the reference text ref, as
// production data are: the same exponent and leading digits, a few of the
// last digits changed, and sometimes more decimals.
func decTestNear(rng *rand.Rand, ref string) string {
	mant, exp := ref, ""
	if k := strings.IndexAny(ref, "eE"); k >= 0 {
		mant, exp = ref[:k], ref[k:]
	}
	b := []byte(mant)
	var pos []int
	for i, c := range b {
		if '0' <= c && c <= '9' {
			pos = append(pos, i)
		}
	}
	for n := rng.IntN(4) + 1; n > 0 && len(pos) > 0; n-- {
		i := pos[len(pos)-1-rng.IntN(min(len(pos), 4))]
		b[i] = byte('0' + rng.IntN(10))
	}
	if rng.IntN(4) == 0 {
		if !strings.Contains(mant, ".") {
			b = append(b, '.')
		}
		b = strconv.AppendInt(b, int64(rng.IntN(1000)), 10)
	}
	return string(b) + exp
}

func TestDecimalProperties(t *testing.T) {
	rng := rand.New(rand.NewPCG(20240601, 7))
	for range 20000 {
		s := decTestText(rng)
		d, err := ParseDecimal(s)
		if err != nil {
			t.Fatalf("ParseDecimal(%q): %v", s, err)
		}
		c := d.String()
		d2, err := ParseDecimal(c)
		if err != nil || d2 != d || d2.String() != c {
			t.Fatalf("%q: String %q does not round-trip (%v, %v)", s, c, d2, err)
		}
		if decTestRat(t, c).Cmp(decTestRat(t, s)) != 0 {
			t.Fatalf("%q: String %q has another value (math/big)", s, c)
		}
		if got, want := d.Float64(), decTestFloat(t, s); got != want {
			t.Fatalf("%q: Float64 = %v, want %v (math/big)", s, got, want)
		}
	}
}

func TestCentreProperties(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	counts := map[bool]int{}
	for i := range 40000 {
		refText := decTestText(rng)
		var text string
		if i%2 == 0 {
			text = decTestNear(rng, refText)
		} else {
			text = decTestText(rng)
		}
		ref, err := ParseDecimal(refText)
		if err != nil {
			t.Fatalf("ParseDecimal(%q): %v", refText, err)
		}
		r := NewReference(ref)
		v, exact, err := r.CentreString(text)
		if err != nil {
			t.Fatalf("CentreString(%q) on %q: %v", text, refText, err)
		}
		vb, exactb, errb := r.Centre([]byte(text))
		if math.Float64bits(vb) != math.Float64bits(v) || exactb != exact || errb != nil {
			t.Fatalf("Centre and CentreString differ on %q: %v %v %v vs %v %v", text, vb, exactb, errb, v, exact)
		}
		if want := decTestExpectExact(t, text, refText); exact != want {
			t.Fatalf("Centre(%q) on %q: exact = %v, want %v", text, refText, exact, want)
		}
		counts[exact]++
		var want float64
		if exact {
			want = decTestDiff(t, text, refText)
		} else {
			want = decTestFloat(t, text) - decTestFloat(t, refText)
		}
		if v != want {
			t.Fatalf("Centre(%q) on %q = %v (exact %v), want %v (math/big)", text, refText, v, exact, want)
		}
		if v == 0 && math.Signbit(v) {
			t.Fatalf("Centre(%q) on %q = -0", text, refText)
		}
	}
	if counts[true] < 10000 || counts[false] < 5000 {
		t.Errorf("generator covers the cases poorly: %v", counts)
	}
}

func TestCentreTable(t *testing.T) {
	tests := []struct {
		ref, text string
		want      float64
		exact     bool
	}{
		// NIST StRD SmLs07–09: the values are 1000000000001.2 … .6.
		{"1000000000001.3", "1000000000001.4", 0.1, true},
		{"1000000000001.4", "1000000000001.2", -0.2, true},
		{"1000000000001.4", "1000000000001.6", 0.2, true},
		{"1000000000001.4", "1000000000001.4", 0, true},
		// NIST StRD AtmWtAg, first value as reference.
		{"107.8681568", "107.8681465", -0.0000103, true},
		{"107.8681568", "107.8681903", 0.0000335, true},
		{"107.8681568", "107.8681079", -0.0000489, true},
		// Scales differ; signs differ; zeros.
		{"12.5", "12.5000000000000000001", 1e-19, true},
		{"-3", "2.25", 5.25, true},
		{"3", "-2.25", -5.25, true},
		{"0", "-7.5e-3", -0.0075, true},
		{"-7.5e-3", "0", 0.0075, true},
		{"0", "0", 0, true},
		{"1e300", "1e300", 0, true},
		{"1e-300", "3e-300", 2e-300, true},
		// A 38-digit difference: exact, through strconv.ParseFloat.
		{"0", "12345678901234567890123456789012345678", 12345678901234567890123456789012345678, true},
		{"1", "1e38", 1e38 - 1, true},
		// Exact only once the value's trailing zeros are dropped.
		{"12345678901234567890123456789012345678", "1.000000000000000000", 1 - 12345678901234567890123456789012345678, true},
		{"-12345678901234567890123456789012345678", "10.00000000000000000", 12345678901234567890123456789012345688, true},
		// Alignment overflows 128 bits: fallback.
		{"1e-20", "1e20", 1e20 - 1e-20, false},
		{"0.5", "1e38", 1e38, false},
		// More than 128 bits of coefficient: fallback.
		{"0", "1234567890123456789012345678901234567891", 1234567890123456789012345678901234567891, false},
		{"1234567890123456789012345678901234567891", "1", 1 - 1234567890123456789012345678901234567891.0, false},
		// 39 digits, but below 2^128 once the trailing zero is dropped.
		{"0", "1234567890123456789012345678901234567890", 1234567890123456789012345678901234567890, true},
	}
	for _, tc := range tests {
		ref, err := ParseDecimal(tc.ref)
		if err != nil {
			t.Fatal(err)
		}
		v, exact, err := NewReference(ref).CentreString(tc.text)
		if err != nil || v != tc.want || exact != tc.exact {
			t.Errorf("Centre(%q) on %q = %v, %v, %v; want %v, %v", tc.text, tc.ref, v, exact, err, tc.want, tc.exact)
		}
		// The constants above are exact decimal arithmetic rounded once by
		// the Go compiler; check them against math/big as well.
		if tc.exact {
			if want := decTestDiff(t, tc.text, tc.ref); want != tc.want {
				t.Errorf("table entry %q − %q: %v, math/big says %v", tc.text, tc.ref, tc.want, want)
			}
		}
	}
}

func TestCentreErrors(t *testing.T) {
	r := NewReference(Decimal{})
	huge, err := ParseDecimal("-1.7e308")
	if err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		r    Reference
		text string
		want error
	}{
		{r, "", ErrSyntax},
		{r, "1,5", ErrSyntax},
		{r, "--1", ErrSyntax},
		{r, "NaN", ErrNotFinite},
		{r, "-Inf", ErrNotFinite},
		{r, "1e400", ErrOutOfRange},
		{r, "1e-400", ErrOutOfRange},
		{r, "2e308", ErrOutOfRange},
		{NewReference(huge), "1.7e308", ErrOutOfRange}, // difference overflows
		{NewReference(huge), "1700000000000000000000000000000000000000000000001e260", ErrOutOfRange}, // overflows on the fallback path
	}
	for _, tc := range tests {
		v, exact, err := tc.r.CentreString(tc.text)
		if !errors.Is(err, tc.want) || v != 0 || exact {
			t.Errorf("CentreString(%q) = %v, %v, %v; want error %v", tc.text, v, exact, err, tc.want)
		}
		var de *DecimalError
		if !errors.As(err, &de) || de.Text != tc.text {
			t.Errorf("CentreString(%q): %v does not name the text", tc.text, err)
		}
		if _, _, errb := tc.r.Centre([]byte(tc.text)); errb == nil || errb.Error() != err.Error() {
			t.Errorf("Centre(%q) error %v, CentreString %v", tc.text, errb, err)
		}
	}
}

// decNISTSmLs describes the NIST StRD data sets SmLs07, SmLs08 and SmLs09
// (public domain): nine groups, each holding one value mid and k values each
// of lo and hi, where k is 10, 100 and 1000. The first value of each file is
// group 1's mid value.
var decNISTSmLs = [9][3]string{
	{"1000000000001.3", "1000000000001.4", "1000000000001.5"},
	{"1000000000001.2", "1000000000001.3", "1000000000001.4"},
	{"1000000000001.4", "1000000000001.5", "1000000000001.6"},
	{"1000000000001.2", "1000000000001.3", "1000000000001.4"},
	{"1000000000001.4", "1000000000001.5", "1000000000001.6"},
	{"1000000000001.2", "1000000000001.3", "1000000000001.4"},
	{"1000000000001.4", "1000000000001.5", "1000000000001.6"},
	{"1000000000001.2", "1000000000001.3", "1000000000001.4"},
	{"1000000000001.4", "1000000000001.5", "1000000000001.6"},
}

// decTestSS returns the between-group and within-group sums of squares of
// the groups, by two passes with compensated (Neumaier) summation, so that
// the sums add little error of their own to that of the values.
func decTestSS(groups [][]float64) (ssb, ssw float64) {
	var sum decTestSum
	n := 0
	means := make([]float64, len(groups))
	for g, xs := range groups {
		var s decTestSum
		for _, x := range xs {
			s.add(x)
			sum.add(x)
		}
		means[g] = s.value() / float64(len(xs))
		n += len(xs)
	}
	grand := sum.value() / float64(n)
	var b, w decTestSum
	for g, xs := range groups {
		d := means[g] - grand
		b.add(float64(len(xs)) * d * d)
		for _, x := range xs {
			w.add((x - means[g]) * (x - means[g]))
		}
	}
	return b.value(), w.value()
}

// decTestSum is Neumaier's compensated sum.
type decTestSum struct{ s, c float64 }

func (a *decTestSum) add(x float64) {
	t := a.s + x
	if math.Abs(a.s) >= math.Abs(x) {
		a.c += (a.s - t) + x
	} else {
		a.c += (x - t) + a.s
	}
	a.s = t
}

func (a *decTestSum) value() float64 { return a.s + a.c }

// decTestLRE returns the log relative error, the number of correct
// significant digits of got (16 when it is exact).
func decTestLRE(got, want float64) float64 {
	if got == want {
		return 16
	}
	return min(16, -math.Log10(math.Abs(got-want)/math.Abs(want)))
}

func TestCentreNIST(t *testing.T) {
	// Certified between-group and within-group sums of squares from NIST
	// StRD (SmLs07–09). The reference is the first value of each file; the
	// values are taken group by group, in an order other than the file's,
	// which the sums of squares do not depend on.
	const refText = "1000000000001.4"
	// Correct significant digits required of the sums of squares.
	const minDigits = 15
	sets := []struct {
		name     string
		k        int
		ssb, ssw float64
	}{
		{"SmLs07", 10, 1.68, 1.8},
		{"SmLs08", 100, 16.08, 18},
		{"SmLs09", 1000, 160.08, 180},
	}
	for _, set := range sets {
		ref, err := ParseDecimal(refText)
		if err != nil {
			t.Fatal(err)
		}
		r := NewReference(ref)
		// Centre every value and check it against math/big.
		centred := func(s string) float64 {
			v, exact, err := r.CentreString(s)
			if err != nil || !exact {
				t.Fatalf("%s: Centre(%q) = %v, %v, %v", set.name, s, v, exact, err)
			}
			if want := decTestDiff(t, s, refText); v != want {
				t.Fatalf("%s: Centre(%q) = %v, want %v (math/big)", set.name, s, v, want)
			}
			return v
		}
		// Each group's values with their counts, centred and, for
		// comparison, read straight into float64.
		var groups, raw [][]float64
		for _, vals := range decNISTSmLs {
			var xs, ys []float64
			for j, k := range []int{set.k, 1, set.k} {
				x := centred(vals[j])
				y, err := strconv.ParseFloat(vals[j], 64)
				if err != nil {
					t.Fatal(err)
				}
				for range k {
					xs, ys = append(xs, x), append(ys, y)
				}
			}
			groups, raw = append(groups, xs), append(raw, ys)
		}
		ssb, ssw := decTestSS(groups)
		rawB, rawW := decTestSS(raw)
		t.Logf("%s: correct digits of SS between, SS within: centred %.1f, %.1f; uncentred %.1f, %.1f", set.name,
			decTestLRE(ssb, set.ssb), decTestLRE(ssw, set.ssw), decTestLRE(rawB, set.ssb), decTestLRE(rawW, set.ssw))
		for _, c := range []struct {
			what      string
			got, want float64
		}{{"SS between", ssb, set.ssb}, {"SS within", ssw, set.ssw}} {
			if lre := decTestLRE(c.got, c.want); lre < minDigits {
				t.Errorf("%s %s = %.17g, certified %v: %.1f correct digits, want ≥ %v",
					set.name, c.what, c.got, c.want, lre, minDigits)
			}
		}
	}
}

func TestUncentre(t *testing.T) {
	tests := []struct {
		ref  string
		c    float64
		want string // exact sum, rounded once by math/big
	}{
		{"1000000000001.4", 0.1, ""},
		{"107.8681568", -0.0000103, ""},
		// 10000000000000001 is not a float64; adding its parts separately
		// to 1 would give 1e16 twice rounded.
		{"10000000000000001", 1, "10000000000000002"},
		{"0", 2.5, "2.5"},
		// The reference lies exactly halfway between two float64s, so the
		// sign of a tiny c decides the rounding: only the exact sum can.
		{"70837003800000000000", -3.5e-15, "70837003799999999999.9999999999999965"},
		{"70837003800000000000", 3.5e-15, "70837003800000000000.0000000000000035"},
		// The float64 1e300 is not 10^300: the sum is not 0.
		{"-1e300", 1e300, ""},
	}
	for _, tc := range tests {
		ref, err := ParseDecimal(tc.ref)
		if err != nil {
			t.Fatal(err)
		}
		x := decTestRat(t, tc.ref)
		x.Add(x, new(big.Rat).SetFloat64(tc.c))
		want, _ := x.Float64()
		if tc.want != "" && want != decTestFloat(t, tc.want) {
			t.Fatalf("table entry %q + %v: math/big says %v", tc.ref, tc.c, want)
		}
		if got := NewReference(ref).Uncentre(tc.c); got != want {
			t.Errorf("Uncentre(%v) on %q = %v, want %v (math/big)", tc.c, tc.ref, got, want)
		}
	}
	nistRef, err := ParseDecimal("1000000000001.4")
	if err != nil {
		t.Fatal(err)
	}
	nist := NewReference(nistRef)
	if n := testing.AllocsPerRun(100, func() { decSink = nist.Uncentre(0.1) }); n > 0 {
		t.Errorf("Uncentre: %v allocations", n)
	}
	if got := (Reference{}).Uncentre(-3.25); got != -3.25 {
		t.Errorf("zero Reference: Uncentre(-3.25) = %v", got)
	}
	if got := NewReference(Decimal{}).Decimal(); !got.IsZero() {
		t.Errorf("Decimal() = %v, want 0", got)
	}

	// Random references and centred values: compare with the exact sum.
	rng := rand.New(rand.NewPCG(3, 4))
	for range 20000 {
		refText := decTestText(rng)
		ref, err := ParseDecimal(refText)
		if err != nil {
			t.Fatal(err)
		}
		r := NewReference(ref)
		if r.Decimal() != ref {
			t.Fatalf("Decimal() = %v, want %v", r.Decimal(), ref)
		}
		c := (rng.Float64() - 0.5) * math.Pow(10, float64(rng.IntN(40)-20))
		if rng.IntN(4) == 0 { // cancel the reference
			c = -ref.Float64() * (1 + (rng.Float64()-0.5)*1e-10)
		}
		x := decTestRat(t, refText)
		x.Add(x, new(big.Rat).SetFloat64(c))
		want, _ := x.Float64()
		if got := r.Uncentre(c); got != want {
			t.Fatalf("Uncentre(%v) on %q = %v, want %v (math/big)", c, refText, got, want)
		}
	}
}

// decNISTTexts are values from NIST StRD data sets (public domain) for the
// benchmarks, each with its data set's first value as reference.
var decNISTTexts = []struct {
	name, ref string
	texts     []string
}{
	{"SmLs09", "1000000000001.4", []string{
		"1000000000001.4", "1000000000001.3", "1000000000001.5", "1000000000001.2", "1000000000001.6",
	}},
	{"AtmWtAg", "107.8681568", []string{
		"107.8681568", "107.8681465", "107.8681572", "107.8681785", "107.8681446",
		"107.8681903", "107.8681526", "107.8681494", "107.8681616", "107.8681587",
	}},
}

func TestCentreAllocs(t *testing.T) {
	tests := []struct{ ref, text string }{
		// Fast path: coefficient of the difference below 2^53.
		{"1000000000001.3", "1000000000001.4"}, // NIST StRD SmLs07–09
		{"1000000000001.3", "1000000000001.2"},
		{"107.8681568", "107.8681903"}, // NIST StRD AtmWtAg
		{"107.8681568", "-107.8681079"},
		{"0", "-12.5"},
		{"0", "0"},
		{"-2.5", "3.14159265358979"},
		{"25.4", "25.40000000000000000001"},   // scale 20
		{"25.4", "25.4000000000000000000001"}, // scale 22
		{"1.5e3", "1500.25"},
		// Coefficient of the difference from 2^53 up to 27 digits:
		// strconv.ParseFloat on at most 32 bytes.
		{"0", "1234567890123456789"},
		{"1000000000001.3", "1000000000001.40000001"},
		{"1000000000001.3", "1000000000001.4000000000000001"}, // 19 digits, scale 16
		{"25.4", "-25.4000000000000000001"},
		{"1e-10", "3.5e-30"},
		{"0", "-1234567.89012345678901234567"}, // 27 digits, scale 20
	}
	for _, tc := range tests {
		ref, err := ParseDecimal(tc.ref)
		if err != nil {
			t.Fatal(err)
		}
		r := NewReference(ref)
		b := []byte(tc.text)
		var exact bool
		if n := testing.AllocsPerRun(100, func() { _, exact, err = r.Centre(b) }); n > 0 || err != nil || !exact {
			t.Errorf("Centre(%q) on %q: %v allocations, exact %v, error %v", tc.text, tc.ref, n, exact, err)
		}
		if n := testing.AllocsPerRun(100, func() { _, exact, err = r.CentreString(tc.text) }); n > 0 || err != nil || !exact {
			t.Errorf("CentreString(%q) on %q: %v allocations, exact %v, error %v", tc.text, tc.ref, n, exact, err)
		}
	}
}

func ExampleReference_Centre() {
	nominal, err := ParseDecimal("1000000000001.3")
	if err != nil {
		panic(err)
	}
	r := NewReference(nominal)

	v, exact, err := r.CentreString("1000000000001.4")
	fmt.Println(v, exact, err)

	// The same difference taken after conversion to float64.
	a, _ := strconv.ParseFloat("1000000000001.4", 64)
	b, _ := strconv.ParseFloat("1000000000001.3", 64)
	fmt.Println(a - b)

	fmt.Println(r.Uncentre(v))
	// Output:
	// 0.1 true <nil>
	// 0.0999755859375
	// 1.0000000000014e+12
}

var decSink float64

// BenchmarkCentre centres NIST StRD values on their data set's first value.
// Compare with BenchmarkParseFloat, which reads the same texts.
func BenchmarkCentre(b *testing.B) {
	for _, set := range decNISTTexts {
		b.Run(set.name, func(b *testing.B) {
			ref, err := ParseDecimal(set.ref)
			if err != nil {
				b.Fatal(err)
			}
			r := NewReference(ref)
			texts := make([][]byte, len(set.texts))
			for i, s := range set.texts {
				texts[i] = []byte(s)
			}
			b.ReportAllocs()
			i := 0
			for b.Loop() {
				v, _, _ := r.Centre(texts[i])
				decSink += v
				if i++; i == len(texts) {
					i = 0
				}
			}
		})
	}
}

// BenchmarkParseFloat is the baseline: strconv.ParseFloat on the texts of
// BenchmarkCentre.
func BenchmarkParseFloat(b *testing.B) {
	for _, set := range decNISTTexts {
		b.Run(set.name, func(b *testing.B) {
			b.ReportAllocs()
			i := 0
			for b.Loop() {
				v, _ := strconv.ParseFloat(set.texts[i], 64)
				decSink += v
				if i++; i == len(set.texts) {
					i = 0
				}
			}
		})
	}
}

// BenchmarkParseDecimal parses the same texts into Decimals.
func BenchmarkParseDecimal(b *testing.B) {
	for _, set := range decNISTTexts {
		b.Run(set.name, func(b *testing.B) {
			b.ReportAllocs()
			i := 0
			for b.Loop() {
				d, _ := ParseDecimal(set.texts[i])
				decSink += d.Float64()
				if i++; i == len(set.texts) {
					i = 0
				}
			}
		})
	}
}
