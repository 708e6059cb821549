// Package stats is lockstep's numerical core: exact per-group running sums and
// the one-way analysis built on them. It does no I/O.
//
// The core types are Accumulator (count, mean, M2, min, max of values centred
// on a Reference), Reference (an exact decimal that values are centred on
// before they become binary numbers) and Report (everything one analysis
// says: the one-way table, Welch's F, spread and rank tests, pairwise
// comparisons, analysis of means, effect sizes and the minimum detectable
// shift).
//
// Caveats: accumulators hold centred values; add the Reference back only for
// display. A result that is not defined for the data at hand (one group, no
// within-group variation, too few values) is reported as an error that
// wraps ErrNotAvailable and says why; no function returns NaN as a result.
package stats
