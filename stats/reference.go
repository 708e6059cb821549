package stats

import (
	"math"
	"math/big"
	"math/bits"
	"strconv"
)

// Reference is the exact decimal a characteristic's values are centred on:
// its nominal, say, or the first value seen. Centring in decimal before
// converting to float64 keeps the digits that a large common offset would
// otherwise take from sums of squares.
//
// A Reference is a value that is never modified, so it may be copied and
// used from many goroutines at once. The zero value centres on 0.
type Reference struct {
	d Decimal
	// hi is d rounded to float64 and lo is d − hi rounded to float64, so
	// that hi + lo carries d to about 106 bits, for Uncentre.
	hi, lo float64
}

// NewReference returns the Reference for d.
func NewReference(d Decimal) Reference {
	r := Reference{d: d, hi: d.Float64()}
	if d.IsZero() {
		return r
	}
	if x, ok := new(big.Rat).SetString(d.String()); ok {
		x.Sub(x, new(big.Rat).SetFloat64(r.hi))
		r.lo, _ = x.Float64()
	}
	return r
}

// Decimal returns the reference value.
func (r Reference) Decimal() Decimal { return r.d }

// Centre returns value − reference for the decimal text (syntax as for
// ParseDecimal), computed exactly in decimal and then rounded to float64.
//
// Method: the text is scanned into ±c·10^e with an integer coefficient c of
// at most 128 bits, leading and trailing zeros dropped. The coefficient with
// the larger exponent is multiplied by the power of ten that brings it to the
// smaller exponent (the larger scale), and the two are added or subtracted
// as 128-bit integers. All of this is exact integer arithmetic with overflow
// checks. The one rounding comes last: if the difference's coefficient is
// below 2^53 and its exponent within ±22, a single IEEE-754 division (or
// multiplication) by an exactly represented power of ten; otherwise the
// exact digits are formatted into a stack buffer and read by
// strconv.ParseFloat. Both round correctly, so when exact is true, v is the
// float64 nearest the exact difference (ties to even). Zero differences are
// +0.
//
// exact is false, and v is float64(value) − float64(reference) with each
// operand correctly rounded, in exactly these cases:
//   - the value's or the reference's coefficient (its significant digits,
//     without leading and trailing zeros) is 2^128 or more: more than 38
//     digits, or 39 digits above 340282366920938463463374607431768211455;
//   - after alignment, the scaled coefficient of the value or of the
//     reference is 2^128 or more (a zero is never scaled);
//   - value and reference have opposite signs and the sum of their aligned
//     magnitudes is 2^128 or more.
//
// So the result is exact whenever both numbers, written out from their
// leading digit down to the finer of the two scales, have at most 38 digits:
// 1000000000001.3 against values with up to 25 decimals, say.
//
// Errors are *DecimalError values, and v is then 0: ErrSyntax and
// ErrNotFinite as for ParseDecimal; ErrOutOfRange when ParseDecimal would
// refuse the value as out of range, or when the difference (exact or not)
// overflows float64. Centre does not retain text.
//
// Centre does not allocate, except on errors and in two rare cases where it
// may: on the strconv.ParseFloat path when the coefficient of the difference
// has more than 27 digits (its text may then exceed the runtime's 32-byte
// stack buffer for temporary strings), and in the fallback for a text whose
// coefficient is 2^128 or more.
func (r Reference) Centre(text []byte) (v float64, exact bool, err error) {
	return decCentre(r, text)
}

// CentreString is Centre for text held in a string.
func (r Reference) CentreString(s string) (v float64, exact bool, err error) {
	return decCentre(r, s)
}

// Uncentre returns reference + c as the float64 nearest the exact sum (ties
// to even), for display of centred results such as means.
//
// The reference is carried as hi + lo, the float64 nearest it and the
// float64 nearest the remainder, and added to c with Knuth's error-free
// TwoSum. The result R and the exact residual of its last rounding are
// known, as is a bound on the two roundings before it (half an ulp of lo
// and of the correction term); when the residual plus that bound is less
// than half the gap to R's neighbours, R is the correctly rounded sum.
// Otherwise the sum lies within a relative 2^-100 or so of a rounding
// boundary; it is then formed exactly with math/big and rounded once.
// A NaN c gives NaN; a sum beyond the float64 range gives ±Inf.
func (r Reference) Uncentre(c float64) float64 {
	if r.d.IsZero() {
		return c
	}
	s, e := decTwoSum(r.hi, c)
	if math.IsInf(s, 0) || math.IsNaN(s) {
		return s
	}
	t := e + r.lo
	res, err2 := decTwoSum(s, t)
	if math.IsInf(res, 0) {
		return res
	}
	margin := decUlp(r.lo) + decUlp(t)
	gap := min(math.Nextafter(res, math.Inf(1))-res, res-math.Nextafter(res, math.Inf(-1)))
	if math.Abs(err2)+margin < gap/2 {
		return res
	}
	x, ok := new(big.Rat).SetString(r.d.String())
	if !ok {
		return res
	}
	x.Add(x, new(big.Rat).SetFloat64(c))
	f, _ := x.Float64()
	return f
}

// decTwoSum returns s = a + b rounded and e with s + e = a + b exactly
// (Knuth's TwoSum; valid when s does not overflow).
func decTwoSum(a, b float64) (s, e float64) {
	s = a + b
	bv := s - a
	e = (a - (s - bv)) + (b - bv)
	return s, e
}

// decUlp returns the gap from |x| to the next larger float64.
func decUlp(x float64) float64 {
	x = math.Abs(x)
	return math.Nextafter(x, math.Inf(1)) - x
}

// decCentre implements Centre and CentreString.
func decCentre[T string | []byte](r Reference, text T) (float64, bool, error) {
	var p decParts
	if err := decParse(text, &p); err != nil {
		return 0, false, decError(text, err)
	}
	if p.nd != 0 {
		if p.surelyOutOfRange() {
			return 0, false, decError(text, ErrOutOfRange)
		}
		if p.nearRangeLimit() {
			if f := decValueFloat(text, &p); f == 0 || math.IsInf(f, 0) {
				return 0, false, decError(text, ErrOutOfRange)
			}
		}
	}
	if p.long || r.d.long != "" {
		return decFallback(r, text, &p)
	}
	neg, hi, lo, e, ok := decSub(&p, &r.d)
	if !ok && p.stripZeros() {
		neg, hi, lo, e, ok = decSub(&p, &r.d)
	}
	if !ok {
		return decFallback(r, text, &p)
	}
	f := decToFloat(neg, hi, lo, e)
	if math.IsInf(f, 0) {
		return 0, false, decError(text, ErrOutOfRange)
	}
	return f, true, nil
}

// decSub returns value − reference as ±(hi·2^64 + lo)·10^e, exactly, and
// false when the aligned numbers or their sum do not fit in 128 bits.
func decSub(p *decParts, d *Decimal) (neg bool, hi, lo uint64, e int64, ok bool) {
	vh, vl, ve := p.hi, p.lo, p.exp
	rh, rl, re := d.hi, d.lo, int64(d.exp)
	switch {
	case vh|vl == 0:
		ve = re
	case rh|rl == 0:
		re = ve
	}
	e = min(ve, re)
	if ve > e {
		if ve-e > 38 {
			return false, 0, 0, 0, false
		}
		if vh, vl, ok = decMul128(vh, vl, decPow10[ve-e][0], decPow10[ve-e][1]); !ok {
			return false, 0, 0, 0, false
		}
	}
	if re > e {
		if re-e > 38 {
			return false, 0, 0, 0, false
		}
		if rh, rl, ok = decMul128(rh, rl, decPow10[re-e][0], decPow10[re-e][1]); !ok {
			return false, 0, 0, 0, false
		}
	}
	var c uint64
	neg = p.neg
	switch {
	case p.neg != d.neg:
		// ±(|v| + |r|), with the sign of the value.
		lo, c = bits.Add64(vl, rl, 0)
		hi, c = bits.Add64(vh, rh, c)
		if c != 0 {
			return false, 0, 0, 0, false
		}
	case vh > rh || (vh == rh && vl >= rl):
		// ±(|v| − |r|), with the sign of the value.
		lo, c = bits.Sub64(vl, rl, 0)
		hi, _ = bits.Sub64(vh, rh, c)
	default:
		// ∓(|r| − |v|), against the sign of the value.
		lo, c = bits.Sub64(rl, vl, 0)
		hi, _ = bits.Sub64(rh, vh, c)
		neg = !neg
	}
	return neg, hi, lo, e, true
}

// decFallback returns float64(value) − float64(reference), inexact.
func decFallback[T string | []byte](r Reference, text T, p *decParts) (float64, bool, error) {
	f := decValueFloat(text, p) - r.hi
	if math.IsInf(f, 0) {
		return 0, false, decError(text, ErrOutOfRange)
	}
	return f, false, nil
}

// decValueFloat returns the float64 nearest the value p scanned from text.
func decValueFloat[T string | []byte](text T, p *decParts) float64 {
	if p.long {
		f, _ := strconv.ParseFloat(string(text), 64)
		return f
	}
	return decToFloat(p.neg, p.hi, p.lo, p.exp)
}
