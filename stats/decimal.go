package stats

import (
	"errors"
	"math"
	"math/bits"
	"strconv"
	"unicode/utf8"
)

// Errors reported by ParseDecimal and Reference.Centre, always wrapped in a
// *DecimalError that names the text.
var (
	// ErrSyntax: the text is not plain decimal text.
	ErrSyntax = errors.New("not a decimal number")
	// ErrNotFinite: the text is NaN or an infinity.
	ErrNotFinite = errors.New("not a finite number")
	// ErrOutOfRange: the value is nonzero and its nearest float64 is zero or
	// infinite, or a centred difference overflows float64.
	ErrOutOfRange = errors.New("out of the range of float64")
)

// DecimalError reports a text that ParseDecimal or Reference.Centre refused.
type DecimalError struct {
	// Text is the refused text; input longer than 64 bytes is cut to its
	// first 64 bytes (less, to end on a whole UTF-8 sequence) and marked
	// with a trailing "...".
	Text string
	// Err is ErrSyntax, ErrNotFinite or ErrOutOfRange.
	Err error
}

// Error returns a message such as
// `parse decimal "12,5": not a decimal number`.
func (e *DecimalError) Error() string {
	err := e.Err
	if err == nil {
		err = ErrSyntax
	}
	return "parse decimal " + strconv.Quote(e.Text) + ": " + err.Error()
}

// Unwrap returns Err, so that errors.Is finds the sentinel.
func (e *DecimalError) Unwrap() error { return e.Err }

// decMaxErrText is the longest input kept whole in a DecimalError.
const decMaxErrText = 64

// decError wraps err in a *DecimalError for text. It copies text, so a
// caller's buffer is not retained.
func decError[T string | []byte](text T, err error) error {
	if len(text) <= decMaxErrText {
		return &DecimalError{Text: string(text), Err: err}
	}
	n := decMaxErrText
	for n > 0 && !utf8.RuneStart(text[n]) {
		n--
	}
	return &DecimalError{Text: string(text[:n]) + "...", Err: err}
}

// Decimal is an exact decimal number parsed from text.
//
// A Decimal holds ±c·10^e with an integer coefficient c that has neither
// leading nor trailing zeros (so "1.50", "1.5" and "15e-1" are the same
// Decimal). A coefficient below 2^128 (every coefficient of up to 38 digits
// and most of 39) is held as two 64-bit words; a wider one is held as its
// canonical text, which keeps it exact but takes it off the fixed-width
// arithmetic of Reference.Centre. The value of every Decimal lies in the
// range of float64: it is zero, or its nearest float64 is neither zero nor
// infinite (ParseDecimal refuses other values with ErrOutOfRange).
//
// The zero value is the number 0. Decimals of the same value compare equal
// with ==.
type Decimal struct {
	hi, lo uint64 // coefficient c = hi·2^64 + lo, when long is empty
	exp    int32  // exponent e, when long is empty
	neg    bool   // sign; false for zero
	long   string // canonical text when c ≥ 2^128
}

// ParseDecimal parses plain decimal text: an optional sign (+ or -), digits
// with an optional '.' (at least one digit in all, as in "5", "5.", ".5"),
// and an optional exponent: e or E, an optional sign and digits. Nothing
// else is allowed: no spaces, no hexadecimal, no digit separators.
//
// Every error is a *DecimalError. "NaN", "Inf" and "Infinity" in any case,
// with or without a sign, give one that wraps ErrNotFinite; a well-formed
// text whose value is nonzero but would round to zero or overflow as a
// float64 (such as "1e400" or "1e-400") wraps ErrOutOfRange; any other
// malformed text wraps ErrSyntax. The text may have any number of digits;
// the result is exact.
func ParseDecimal(s string) (Decimal, error) {
	var p decParts
	if err := decParse(s, &p); err != nil {
		return Decimal{}, decError(s, err)
	}
	p.stripZeros()
	if p.nd == 0 {
		return Decimal{}, nil
	}
	if p.surelyOutOfRange() {
		return Decimal{}, decError(s, ErrOutOfRange)
	}
	d := Decimal{neg: p.neg}
	if p.long {
		d.long = decLongText(s, &p)
	} else {
		d.hi, d.lo, d.exp = p.hi, p.lo, int32(p.exp)
	}
	if p.nearRangeLimit() {
		if f := d.Float64(); f == 0 || math.IsInf(f, 0) {
			return Decimal{}, decError(s, ErrOutOfRange)
		}
	}
	return d, nil
}

// String returns the canonical text of d, which ParseDecimal reads back as
// d: "0" for zero; otherwise a '-' for negative numbers and the coefficient's
// digits, written as an integer ("120") when the exponent is not negative and
// the number is below 10^21, with a decimal point ("1000000000001.4",
// "0.00012") when the exponent is negative and the number is at least 10^-7,
// and in scientific notation ("1.5e+21", "-3e-8") otherwise.
func (d Decimal) String() string {
	if d.long != "" {
		return d.long
	}
	var cb [40]byte
	var tb [64]byte
	return string(decAppendText(tb[:0], d.neg, decAppendCoef(cb[:0], d.hi, d.lo), int64(d.exp)))
}

// Float64 returns the float64 nearest d (ties to even). The result is never
// infinite, and zero only when d is zero.
//
// When the coefficient is below 2^53 and the exponent within ±22, both the
// coefficient and the power of ten are exact float64s, and one IEEE-754
// division or multiplication rounds their quotient or product once, which is
// correct rounding. Otherwise the exact digits are handed to
// strconv.ParseFloat, which rounds correctly too.
func (d Decimal) Float64() float64 {
	if d.long != "" {
		f, _ := strconv.ParseFloat(d.long, 64)
		return f
	}
	return decToFloat(d.neg, d.hi, d.lo, int64(d.exp))
}

// IsZero reports whether d is zero.
func (d Decimal) IsZero() bool { return d.long == "" && d.hi == 0 && d.lo == 0 }

// decParts is the result of scanning a decimal text: ±c·10^exp, where c has
// nd digits and no leading zeros. A text of at most 19 digits keeps its
// trailing zeros in c (see stripZeros); a longer one has them dropped.
type decParts struct {
	hi, lo uint64 // c = hi·2^64 + lo, unless long
	exp    int64  // 0 for zero
	nd     int64  // digits in c; 0 for zero
	neg    bool   // false for zero
	long   bool   // c ≥ 2^128; hi and lo are then meaningless
}

// adjusted returns the exponent of the leading digit: a nonzero value lies
// in [10^a, 10^(a+1)).
func (p *decParts) adjusted() int64 { return p.exp + p.nd - 1 }

// surelyOutOfRange reports, for a nonzero value, that it is at least 10^309
// (above math.MaxFloat64) or below 10^-324 (below half the smallest positive
// float64, so it rounds to zero).
func (p *decParts) surelyOutOfRange() bool {
	a := p.adjusted()
	return a > 308 || a < -324
}

// nearRangeLimit reports, for a nonzero value not surelyOutOfRange, that
// only its rounded float64 can tell whether it is in range. Values with a
// leading digit at 10^-307 … 10^307 are normal float64 numbers.
func (p *decParts) nearRangeLimit() bool {
	a := p.adjusted()
	return a >= 308 || a <= -308
}

// decExpCap bounds the magnitude of an exponent while it is read. A larger
// exponent puts any nonzero value written in fewer than 2^39 bytes out of
// range, and the cap keeps all exponent arithmetic far from int64 overflow.
const decExpCap = 1 << 40

// stripZeros removes the trailing zeros of a one-word coefficient and
// reports whether there were any. Coefficients of more than one word never
// have trailing zeros.
func (p *decParts) stripZeros() bool {
	if p.long || p.hi != 0 || p.lo == 0 || p.lo%10 != 0 {
		return false
	}
	for p.lo%10 == 0 {
		p.lo /= 10
		p.exp++
		p.nd--
	}
	return true
}

// decParse scans decimal text (see ParseDecimal for the syntax). It returns
// a bare sentinel error, so that it never allocates.
func decParse[T string | []byte](s T, p *decParts) error {
	*p = decParts{}
	i, n := 0, len(s)
	if i < n && (s[i] == '+' || s[i] == '-') {
		p.neg = s[i] == '-'
		i++
	}
	start, dotAt := i, -1
	// Up to 19 digits fit in one word whatever they are: accumulate them
	// without looking further; longer mantissas are scanned again below.
	var lo uint64
	for ; i < n; i++ {
		d := s[i] - '0'
		if d > 9 {
			if s[i] == '.' && dotAt < 0 {
				dotAt = i
				continue
			}
			break
		}
		lo = lo*10 + uint64(d)
	}
	mantEnd := i
	digits, frac := mantEnd-start, 0
	if dotAt >= 0 {
		digits--
		frac = mantEnd - dotAt - 1
	}
	if digits == 0 {
		if i == start && (decFold(s[start:], "nan") || decFold(s[start:], "inf") || decFold(s[start:], "infinity")) {
			return ErrNotFinite
		}
		return ErrSyntax
	}
	var e int64
	if i < n && (s[i] == 'e' || s[i] == 'E') {
		i++
		eneg := false
		if i < n && (s[i] == '+' || s[i] == '-') {
			eneg = s[i] == '-'
			i++
		}
		if i == n {
			return ErrSyntax
		}
		for ; i < n && s[i] >= '0' && s[i] <= '9'; i++ {
			if e <= decExpCap {
				e = e*10 + int64(s[i]-'0')
			}
		}
		if eneg {
			e = -e
		}
	}
	if i != n {
		return ErrSyntax
	}
	if digits <= 19 {
		if lo == 0 {
			p.neg = false
			return nil
		}
		p.lo, p.nd, p.exp = lo, decDigits64(lo), e-int64(frac)
		return nil
	}
	zeros := decScanWide(s[:mantEnd], start, dotAt, p)
	if p.nd == 0 {
		p.neg = false
		return nil
	}
	p.exp = e - int64(frac) + int64(zeros)
	return nil
}

// decScanWide sets p.hi, p.lo, p.long and p.nd from the mantissa s[start:]
// (digits and at most one point, at dotAt or -1), dropping leading and
// trailing zeros, and returns the number of trailing zeros.
func decScanWide[T string | []byte](s T, start, dotAt int, p *decParts) (zeros int) {
	// Indices of the first and last nonzero digits, and the coefficient so
	// far, up to the last nonzero digit.
	firstNZ, lastNZ := -1, -1
	var hi, lo uint64
	long := false
	for i := start; i < len(s); i++ {
		d := s[i] - '0'
		if d == 0 || d > 9 {
			continue
		}
		switch {
		case lastNZ < 0:
			firstNZ = i
			lo = uint64(d)
		case long:
		default:
			// c ← c·10^k + d, with k−1 zeros since the last nonzero digit.
			k := i - lastNZ
			if lastNZ < dotAt && dotAt < i {
				k--
			}
			var ok bool
			if hi, lo, ok = decMulAdd(hi, lo, int64(k), uint64(d)); !ok {
				long = true
			}
		}
		lastNZ = i
	}
	if lastNZ < 0 {
		return 0
	}
	zeros = len(s) - lastNZ - 1
	if dotAt > lastNZ {
		zeros--
	}
	nd := lastNZ - firstNZ + 1
	if firstNZ < dotAt && dotAt < lastNZ {
		nd--
	}
	p.hi, p.lo, p.long, p.nd = hi, lo, long, int64(nd)
	return zeros
}

// decDigits64 returns the number of decimal digits of x > 0.
func decDigits64(x uint64) int64 {
	// 1233/4096 is just above log10(2), so n is the count or one less
	// (n ≤ 19).
	n := bits.Len64(x) * 1233 >> 12
	if x >= decPow10[n][1] {
		n++
	}
	return int64(n)
}

// decFold reports whether s equals the lower-case ASCII word w, ignoring case.
func decFold[T string | []byte](s T, w string) bool {
	if len(s) != len(w) {
		return false
	}
	for i := range len(w) {
		if s[i]|0x20 != w[i] {
			return false
		}
	}
	return true
}

// decLongText returns the canonical text of the value p scanned from s,
// whose coefficient is too wide for two words.
func decLongText(s string, p *decParts) string {
	digits := make([]byte, 0, p.nd)
	for i := 0; i < len(s) && int64(len(digits)) < p.nd; i++ {
		c := s[i]
		if c < '0' || c > '9' || (c == '0' && len(digits) == 0) {
			continue
		}
		digits = append(digits, c)
	}
	return string(decAppendText(nil, p.neg, digits, p.exp))
}

// decAppendText appends the canonical text (see Decimal.String) of
// ±digits·10^exp; digits has no leading or trailing zeros, or is empty for 0.
func decAppendText(b []byte, neg bool, digits []byte, exp int64) []byte {
	if len(digits) == 0 {
		return append(b, '0')
	}
	if neg {
		b = append(b, '-')
	}
	n := int64(len(digits))
	adj := exp + n - 1
	switch {
	case exp >= 0 && adj < 21:
		b = append(b, digits...)
		for range exp {
			b = append(b, '0')
		}
	case exp < 0 && adj >= 0:
		k := n + exp
		b = append(b, digits[:k]...)
		b = append(b, '.')
		b = append(b, digits[k:]...)
	case exp < 0 && adj >= -7:
		b = append(b, '0', '.')
		for range -adj - 1 {
			b = append(b, '0')
		}
		b = append(b, digits...)
	default:
		b = append(b, digits[0])
		if n > 1 {
			b = append(b, '.')
			b = append(b, digits[1:]...)
		}
		b = append(b, 'e')
		if adj >= 0 {
			b = append(b, '+')
		}
		b = strconv.AppendInt(b, adj, 10)
	}
	return b
}

// decPow10 holds 10^k as 128-bit words {hi, lo}, k = 0 … 38.
var decPow10 = [39][2]uint64{
	{0x0, 0x1},                              // 1e0
	{0x0, 0xa},                              // 1e1
	{0x0, 0x64},                             // 1e2
	{0x0, 0x3e8},                            // 1e3
	{0x0, 0x2710},                           // 1e4
	{0x0, 0x186a0},                          // 1e5
	{0x0, 0xf4240},                          // 1e6
	{0x0, 0x989680},                         // 1e7
	{0x0, 0x5f5e100},                        // 1e8
	{0x0, 0x3b9aca00},                       // 1e9
	{0x0, 0x2540be400},                      // 1e10
	{0x0, 0x174876e800},                     // 1e11
	{0x0, 0xe8d4a51000},                     // 1e12
	{0x0, 0x9184e72a000},                    // 1e13
	{0x0, 0x5af3107a4000},                   // 1e14
	{0x0, 0x38d7ea4c68000},                  // 1e15
	{0x0, 0x2386f26fc10000},                 // 1e16
	{0x0, 0x16345785d8a0000},                // 1e17
	{0x0, 0xde0b6b3a7640000},                // 1e18
	{0x0, 0x8ac7230489e80000},               // 1e19
	{0x5, 0x6bc75e2d63100000},               // 1e20
	{0x36, 0x35c9adc5dea00000},              // 1e21
	{0x21e, 0x19e0c9bab2400000},             // 1e22
	{0x152d, 0x2c7e14af6800000},             // 1e23
	{0xd3c2, 0x1bcecceda1000000},            // 1e24
	{0x84595, 0x161401484a000000},           // 1e25
	{0x52b7d2, 0xdcc80cd2e4000000},          // 1e26
	{0x33b2e3c, 0x9fd0803ce8000000},         // 1e27
	{0x204fce5e, 0x3e25026110000000},        // 1e28
	{0x1431e0fae, 0x6d7217caa0000000},       // 1e29
	{0xc9f2c9cd0, 0x4674edea40000000},       // 1e30
	{0x7e37be2022, 0xc0914b2680000000},      // 1e31
	{0x4ee2d6d415b, 0x85acef8100000000},     // 1e32
	{0x314dc6448d93, 0x38c15b0a00000000},    // 1e33
	{0x1ed09bead87c0, 0x378d8e6400000000},   // 1e34
	{0x13426172c74d82, 0x2b878fe800000000},  // 1e35
	{0xc097ce7bc90715, 0xb34b9f1000000000},  // 1e36
	{0x785ee10d5da46d9, 0xf436a000000000},   // 1e37
	{0x4b3b4ca85a86c47a, 0x98a224000000000}, // 1e38
}

// decFloatPow10 holds 10^k, k = 0 … 22, the powers of ten that float64
// represents exactly.
var decFloatPow10 = [23]float64{
	1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11,
	1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
}

// decMulAdd returns c·10^k + d for c = hi·2^64 + lo, and false when the
// result does not fit in 128 bits.
func decMulAdd(hi, lo uint64, k int64, d uint64) (uint64, uint64, bool) {
	if k > 38 {
		return 0, 0, false
	}
	hi, lo, ok := decMul128(hi, lo, decPow10[k][0], decPow10[k][1])
	if !ok {
		return 0, 0, false
	}
	var c uint64
	lo, c = bits.Add64(lo, d, 0)
	hi, c = bits.Add64(hi, 0, c)
	return hi, lo, c == 0
}

// decMul128 returns the 128-bit product a·b, and false when it does not fit.
func decMul128(ah, al, bh, bl uint64) (uint64, uint64, bool) {
	if ah != 0 && bh != 0 {
		return 0, 0, false
	}
	h, l := bits.Mul64(al, bl)
	h1, l1 := bits.Mul64(ah, bl)
	h2, l2 := bits.Mul64(al, bh)
	var c1, c2 uint64
	h, c1 = bits.Add64(h, l1, 0)
	h, c2 = bits.Add64(h, l2, 0)
	if h1|h2|c1|c2 != 0 {
		return 0, 0, false
	}
	return h, l, true
}

// decAppendCoef appends the decimal digits of hi·2^64 + lo ("0" for zero).
func decAppendCoef(b []byte, hi, lo uint64) []byte {
	if hi == 0 {
		return strconv.AppendUint(b, lo, 10)
	}
	const e19 = 1e19
	// hi·2^64 + lo = q·10^19 + r0 with q = q1·2^64 + q0 (q1 is 0 or 1),
	// and q = q2·10^19 + r1.
	q1 := hi / e19
	q0, r0 := bits.Div64(hi%e19, lo, e19)
	q2, r1 := bits.Div64(q1, q0, e19)
	if q2 != 0 {
		b = strconv.AppendUint(b, q2, 10)
		b = decAppend19(b, r1)
	} else {
		b = strconv.AppendUint(b, r1, 10)
	}
	return decAppend19(b, r0)
}

// decAppend19 appends v < 10^19 as exactly 19 digits.
func decAppend19(b []byte, v uint64) []byte {
	var t [20]byte
	d := strconv.AppendUint(t[:0], v, 10)
	for range 19 - len(d) {
		b = append(b, '0')
	}
	return append(b, d...)
}

// decToFloat returns the float64 nearest ±(hi·2^64 + lo)·10^exp, ties to
// even; +0 for a zero coefficient, ±Inf when the value overflows.
func decToFloat(neg bool, hi, lo uint64, exp int64) float64 {
	var f float64
	if hi == 0 && lo < 1<<53 && exp >= -22 && exp <= 22 {
		// Both operands are exact; the one IEEE operation rounds once.
		f = float64(lo)
		if exp < 0 {
			f /= decFloatPow10[-exp]
		} else {
			f *= decFloatPow10[exp]
		}
	} else {
		var buf [64]byte
		b := decAppendCoef(buf[:0], hi, lo)
		b = append(b, 'e')
		b = strconv.AppendInt(b, exp, 10)
		// The text is well-formed; a range error comes with ±Inf or 0,
		// which the callers check.
		f, _ = strconv.ParseFloat(string(b), 64)
	}
	if neg && f != 0 {
		f = -f
	}
	return f
}
