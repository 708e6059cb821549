package stats

import (
	"errors"
	"math"
	"testing"
)

// TestPairsReference compares every pair with R (rSource): Tukey–Kramer
// from TukeyHSD(aov(...), conf.level = 0.95) and Games–Howell p from
// ptukey with the pair's Welch–Satterthwaite df.
func TestPairsReference(t *testing.T) {
	ref := readReference(t)
	log := newErrorLog(rSource)
	for _, sc := range allScenarios() {
		names, values := readScenario(t, sc)
		pairs := Pairs(groupAccumulators(values), 0.95)
		if want := len(names) * (len(names) - 1) / 2; len(pairs) != want {
			t.Fatalf("%s: %d pairs, want %d", sc, len(pairs), want)
		}
		for _, p := range pairs {
			a, b := names[p.A], names[p.B]
			where := sc + " " + a + "–" + b
			if p.A >= p.B {
				t.Errorf("%s: pair out of order", where)
			}
			log.check(t, "diff", where, p.Diff, ref.get(t, sc, "tukey_diff", a, b), 1e-9)
			if p.Tukey == nil {
				t.Errorf("%s: Tukey–Kramer not available: %v", where, p.TukeyErr)
			} else {
				// The interval's half-width is q·SE with q from the studentized
				// range quantile; R's qtukey is the less accurate side here
				// (its documentation promises about 4 decimals in q), hence 1e-6
				// relative on the bounds.
				log.check(t, "tukey_lwr", where, p.Tukey.Lower, ref.get(t, sc, "tukey_lwr", a, b), tolTukeyBound)
				log.check(t, "tukey_upr", where, p.Tukey.Upper, ref.get(t, sc, "tukey_upr", a, b), tolTukeyBound)
				absCheck(t, "tukey_p", where, p.Tukey.P, ref.get(t, sc, "tukey_p", a, b), tolTukeyP)
			}
			wantDF := ref.get(t, sc, "games_howell_df", a, b)
			if wantDF < 2 {
				if !errors.Is(p.GamesHowellErr, ErrNotAvailable) {
					t.Errorf("%s: Games–Howell with df %.3g < 2 must be not available, got %+v", where, wantDF, p.GamesHowell)
				}
				continue
			}
			if p.GamesHowell == nil {
				t.Errorf("%s: Games–Howell not available: %v", where, p.GamesHowellErr)
				continue
			}
			log.check(t, "games_howell_df", where, p.GamesHowell.DF, wantDF, 1e-10)
			absCheck(t, "games_howell_p", where, p.GamesHowell.P, ref.get(t, sc, "games_howell_p", a, b), tolTukeyP)
		}
	}
	log.report(t)
}

// Tolerances against R's ptukey/qtukey, whose own accuracy is the limit
// (measured in studentized_test.go against exact identities).
const (
	tolTukeyBound = 1e-6
	tolTukeyP     = 1e-6 // absolute
)

func absCheck(t *testing.T, quantity, where string, got, want, tol float64) {
	t.Helper()
	if !(math.Abs(got-want) <= tol) {
		t.Errorf("%s, %s: got %.12g, want %.12g (%s): absolute error %.3g > %.3g", where, quantity, got, want, rSource, math.Abs(got-want), tol)
	}
}

func TestPairsNotAvailable(t *testing.T) {
	var flat, one, varied Accumulator
	flat.Add(2)
	flat.Add(2)
	one.Add(5)
	varied.Add(1)
	varied.Add(3)
	pairs := Pairs([]Accumulator{flat, flat}, 0.95)
	if len(pairs) != 1 || pairs[0].Tukey != nil || !errors.Is(pairs[0].TukeyErr, ErrNotAvailable) ||
		pairs[0].GamesHowell != nil || !errors.Is(pairs[0].GamesHowellErr, ErrNotAvailable) {
		t.Errorf("no variation anywhere: want both not available, got %+v", pairs)
	}
	pairs = Pairs([]Accumulator{varied, one, {}}, 0.95)
	if len(pairs) != 1 || pairs[0].Tukey == nil || !errors.Is(pairs[0].GamesHowellErr, ErrNotAvailable) {
		t.Errorf("a single-value group: want Tukey available, Games–Howell not, got %+v", pairs)
	}
	if p := Pairs([]Accumulator{varied, varied}, 1.5); p[0].Tukey != nil {
		t.Errorf("confidence 1.5 must make Tukey not available")
	}
}
