package stats

import (
	"errors"
	"math"
	"math/big"
	"strconv"
	"strings"
	"testing"
)

// decFuzzSeeds are seed texts for both fuzz targets.
var decFuzzSeeds = []string{
	"0", "-0", "+0.000e12", "1", "-1", "1.50", ".5", "5.", "-.5e-3", "1e21", "1E-8",
	"1000000000001.4", "1000000000001.3", "107.8681568", "107.8681079", // NIST StRD
	"340282366920938463463374607431768211455", "340282366920938463463374607431768211456",
	"1234567890123456789012345678901234567890.5", "0.000000000000000000000000000000000000000000123",
	"1.7976931348623157e308", "1797693134862315807937289714053034150800e269", "4.9406564584124654e-324",
	"2.4703282292062327e-324", "1e-400", "1e400", "0e99999999999999999999",
	"", "+", ".", "1e", "1e+", "12,5", "1_000", "0x1p3", " 1", "1.2.3", "NaN", "-Inf", "infinity", "nanx",
}

// decFuzzExponentOK reports whether the exponent written in plain decimal
// text is small enough for math/big to expand quickly.
func decFuzzExponentOK(s string) bool {
	k := strings.IndexAny(s, "eE")
	if k < 0 {
		return true
	}
	e, err := strconv.ParseInt(s[k+1:], 10, 64)
	return err == nil && e >= -2000 && e <= 2000
}

func FuzzParseDecimal(f *testing.F) {
	for _, s := range decFuzzSeeds {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		d, err := ParseDecimal(s)
		pf, perr := strconv.ParseFloat(s, 64)
		if err != nil {
			var de *DecimalError
			if !errors.As(err, &de) || len(de.Text) > decMaxErrText+3 || err.Error() == "" {
				t.Fatalf("ParseDecimal(%q): bad error %#v", s, err)
			}
			if d != (Decimal{}) {
				t.Fatalf("ParseDecimal(%q) = %v with error %v", s, d, err)
			}
			switch {
			case errors.Is(err, ErrSyntax):
				// strconv also reads hexadecimal and digit separators, which
				// ParseDecimal refuses.
				if perr == nil && !strings.ContainsAny(s, "xX_") {
					t.Fatalf("ParseDecimal(%q): %v, but strconv reads %v", s, err, pf)
				}
			case errors.Is(err, ErrNotFinite):
				if perr == nil && !math.IsNaN(pf) && !math.IsInf(pf, 0) {
					t.Fatalf("ParseDecimal(%q): %v, but strconv reads %v", s, err, pf)
				}
			case errors.Is(err, ErrOutOfRange):
				if perr == nil && pf != 0 || perr != nil && !math.IsInf(pf, 0) {
					t.Fatalf("ParseDecimal(%q): %v, but strconv reads %v, %v", s, err, pf, perr)
				}
			default:
				t.Fatalf("ParseDecimal(%q): error %v wraps no sentinel", s, err)
			}
			return
		}
		c := d.String()
		d2, err := ParseDecimal(c)
		if err != nil || d2 != d || d2.String() != c {
			t.Fatalf("ParseDecimal(%q).String() = %q does not round-trip: %v, %v", s, c, d2, err)
		}
		if perr != nil {
			t.Fatalf("ParseDecimal(%q) = %v, but strconv fails: %v", s, d, perr)
		}
		if got := d.Float64(); got != pf {
			t.Fatalf("ParseDecimal(%q).Float64() = %v, strconv.ParseFloat = %v", s, got, pf)
		}
		if d.IsZero() != (pf == 0) {
			t.Fatalf("ParseDecimal(%q).IsZero() = %v, value %v", s, d.IsZero(), pf)
		}
		if len(s) <= 400 && decFuzzExponentOK(s) && decFuzzExponentOK(c) {
			if decTestRat(t, c).Cmp(decTestRat(t, s)) != 0 {
				t.Fatalf("ParseDecimal(%q).String() = %q, another value (math/big)", s, c)
			}
		}
	})
}

func FuzzCentre(f *testing.F) {
	for i, s := range decFuzzSeeds {
		f.Add(s, decFuzzSeeds[(i*7+3)%len(decFuzzSeeds)])
		f.Add(s, "1000000000001.3")
	}
	f.Add("1000000000001.4", "1000000000001.3")
	f.Add("107.8681465", "107.8681568")
	f.Add("1e20", "1e-20")
	f.Add("-1.7e308", "1.7e308")
	f.Fuzz(func(t *testing.T, text, refText string) {
		ref, err := ParseDecimal(refText)
		if err != nil {
			return
		}
		r := NewReference(ref)
		v, exact, err := r.CentreString(text)
		vb, exactb, errb := r.Centre([]byte(text))
		if math.Float64bits(v) != math.Float64bits(vb) || exact != exactb || (err == nil) != (errb == nil) ||
			err != nil && err.Error() != errb.Error() {
			t.Fatalf("Centre and CentreString differ on %q, %q: %v %v %v; %v %v %v", text, refText, vb, exactb, errb, v, exact, err)
		}
		if math.IsNaN(v) || math.IsInf(v, 0) {
			t.Fatalf("Centre(%q) on %q = %v", text, refText, v)
		}
		_, perr := ParseDecimal(text)
		if perr != nil {
			// Centre refuses exactly what ParseDecimal refuses, for the same reason.
			if err == nil || errors.Unwrap(err) != errors.Unwrap(perr) {
				t.Fatalf("Centre(%q) on %q: error %v, ParseDecimal: %v", text, refText, err, perr)
			}
			return
		}
		small := len(text) <= 400 && len(refText) <= 400 && decFuzzExponentOK(text) && decFuzzExponentOK(refText)
		if err != nil {
			// Only an overflowing difference.
			if !errors.Is(err, ErrOutOfRange) {
				t.Fatalf("Centre(%q) on %q: %v", text, refText, err)
			}
			if small {
				x := decTestRat(t, text)
				x.Sub(x, decTestRat(t, refText))
				if d, _ := x.Float64(); !math.IsInf(d, 0) && !math.IsInf(decTestFloat(t, text)-decTestFloat(t, refText), 0) {
					t.Fatalf("Centre(%q) on %q: %v, but the difference is %v", text, refText, err, d)
				}
			}
			return
		}
		if !small {
			return
		}
		if want := decTestExpectExact(t, text, refText); exact != want {
			t.Fatalf("Centre(%q) on %q: exact = %v, want %v", text, refText, exact, want)
		}
		var want float64
		if exact {
			want = decTestDiff(t, text, refText)
		} else {
			want = decTestFloat(t, text) - decTestFloat(t, refText)
		}
		if v != want {
			t.Fatalf("Centre(%q) on %q = %v (exact %v), want %v (math/big)", text, refText, v, exact, want)
		}
		// Uncentre undoes centring to the float64 nearest the exact sum.
		x := decTestRat(t, refText)
		x.Add(x, new(big.Rat).SetFloat64(v))
		if u, _ := x.Float64(); !math.IsInf(u, 0) && r.Uncentre(v) != u {
			t.Fatalf("Uncentre(%v) on %q = %v, want %v (math/big)", v, refText, r.Uncentre(v), u)
		}
	})
}
