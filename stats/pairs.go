package stats

import "math"

// TukeyKramer is the Tukey–Kramer comparison of one pair of groups.
type TukeyKramer struct {
	Lower, Upper float64 // simultaneous confidence interval for mean_b − mean_a
	P            float64 // adjusted p-value
}

// GamesHowell is the Games–Howell comparison of one pair of groups.
type GamesHowell struct {
	DF float64 // Welch–Satterthwaite degrees of freedom of the pair
	P  float64 // adjusted p-value
}

// PairComparison compares groups A and B (indices into the groups passed
// in, A < B): Diff = mean_B − mean_A. A comparison that is not available
// has a nil pointer and its reason in the matching error.
type PairComparison struct {
	A, B           int
	Diff           float64
	Tukey          *TukeyKramer
	TukeyErr       error
	GamesHowell    *GamesHowell
	GamesHowellErr error
}

// Pairs compares every pair of groups with values, in index order.
//
// Tukey–Kramer (Tukey 1953; Kramer 1956), assuming equal spreads: with
// SE = √(MS within / 2 · (1/n_a + 1/n_b)) and q the studentized range
// quantile at the confidence level for k groups and N − k degrees of freedom,
// the interval is Diff ± q·SE and the p-value P(Q > |Diff|/SE).
//
// Games–Howell (Games & Howell 1976), for unequal spreads: with
// v_a = s_a²/n_a, SE = √((v_a + v_b)/2) and the Welch–Satterthwaite
// df = (v_a + v_b)² / (v_a²/(n_a − 1) + v_b²/(n_b − 1)), the p-value is
// P(Q > |Diff|/SE) for k groups and df degrees of freedom. It is not
// available for a pair with a group of fewer than two values, no variation
// in either group, or df < 2.
func Pairs(groups []Accumulator, confidence float64) []PairComparison {
	t, err := OneWay(groups)
	k := t.K
	var qcrit float64
	var tErr error
	switch {
	case !(confidence > 0 && confidence < 1):
		tErr = notAvailable("Tukey–Kramer", "confidence level %g is not between 0 and 1", confidence)
	case err != nil:
		tErr = notAvailable("Tukey–Kramer", "%s", reason(err))
	default:
		qcrit = StudentizedRangeQuantile(confidence, k, t.DFWithin)
	}
	var out []PairComparison
	for a := range groups {
		if groups[a].N == 0 {
			continue
		}
		for b := a + 1; b < len(groups); b++ {
			if groups[b].N == 0 {
				continue
			}
			ga, gb := groups[a], groups[b]
			p := PairComparison{A: a, B: b, Diff: gb.Mean - ga.Mean}
			if tErr != nil {
				p.TukeyErr = tErr
			} else {
				se := math.Sqrt(t.MSWithin / 2 * (1/float64(ga.N) + 1/float64(gb.N)))
				p.Tukey = &TukeyKramer{
					Lower: p.Diff - qcrit*se,
					Upper: p.Diff + qcrit*se,
					P:     StudentizedRangeSurvival(math.Abs(p.Diff)/se, k, t.DFWithin),
				}
			}
			p.GamesHowell, p.GamesHowellErr = gamesHowell(ga, gb, p.Diff, k)
			out = append(out, p)
		}
	}
	return out
}

func gamesHowell(ga, gb Accumulator, diff float64, k int) (*GamesHowell, error) {
	const what = "Games–Howell"
	if k < 2 {
		return nil, notAvailable(what, "needs at least two groups")
	}
	if ga.N < 2 || gb.N < 2 {
		return nil, notAvailable(what, "needs at least two values in each group of the pair")
	}
	va, vb := ga.Variance()/float64(ga.N), gb.Variance()/float64(gb.N)
	if va+vb <= 0 {
		return nil, notAvailable(what, "no variation within either group of the pair")
	}
	df := (va + vb) * (va + vb) / (va*va/float64(ga.N-1) + vb*vb/float64(gb.N-1))
	if df < 2 {
		return nil, notAvailable(what, "Welch degrees of freedom %.3g are below 2", df)
	}
	se := math.Sqrt((va + vb) / 2)
	return &GamesHowell{DF: df, P: StudentizedRangeSurvival(math.Abs(diff)/se, k, df)}, nil
}
