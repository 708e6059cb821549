package alert

import (
	"math"
	"time"

	"github.com/lockstep-project/lockstep/stats"
)

// accOf returns the accumulator of n values with the given mean and sample
// SD (M2 = sd²(n − 1)); Min and Max are not used by the monitor.
func accOf(n int64, mean, sd float64) stats.Accumulator {
	return stats.Accumulator{N: n, Mean: mean, M2: sd * sd * float64(n-1), Min: mean - 3*sd, Max: mean + 3*sd}
}

var mt0 = time.Date(2026, 12, 1, 6, 0, 0, 0, time.UTC)

// inputAt returns an Input at evaluation e (one minute apart) with the
// given span accumulators and recent accumulators.
func inputAt(e int, groups []string, span, recent []stats.Accumulator) Input {
	now := mt0.Add(time.Duration(e) * time.Minute)
	in := Input{Time: now, Unit: "g", Groups: groups, Recent: recent, RecentFrom: now.Add(-time.Minute)}
	if span != nil {
		in.Spans = []Span{{Length: time.Minute, From: now.Add(-time.Minute), To: now, Groups: span}}
	}
	in.LastSeen = make([]time.Time, len(groups))
	for i := range groups {
		in.LastSeen[i] = now
	}
	return in
}

// meansOnly returns a rule with only the given means detectors and the
// other conditions off.
func meansOnly(windows []WindowF, cusums []ContrastCUSUM) Rule {
	r := DefaultRule()
	r.Windows, r.CUSUMs = windows, cusums
	r.Spread.Off, r.Reject.Off, r.SilentAfter = true, true, 0
	return r
}

// kinds returns the means conditions' phases of a Step result.
func phaseOf(cs []Condition, k Kind) Phase {
	for _, c := range cs {
		if c.Kind == k {
			return c.Phase
		}
	}
	return 0
}

func near(a, b, tol float64) bool { return math.Abs(a-b) <= tol*math.Max(1, math.Abs(b)) }
