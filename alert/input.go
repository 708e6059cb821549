package alert

import (
	"time"

	"github.com/lockstep-project/lockstep/stats"
)

// Span is the per-group sums of one window F detector's span: the last
// Length of whole buckets, [From, To).
type Span struct {
	Length   time.Duration
	From, To time.Time
	// Groups holds each group's accumulator over the span, by the index of
	// Input.Groups; a missing tail counts as empty.
	Groups []stats.Accumulator
}

// Input is what one evaluation of a characteristic gives the Monitor, in
// stats types only. Accumulators hold values centred on Reference; the
// monitor uses only differences and spreads, which the centring does not
// change.
type Input struct {
	// Time is the evaluation's time.
	Time time.Time
	// Unit is the characteristic's unit, for the reasons' wording.
	Unit      string
	Reference stats.Reference
	// Groups names the window's groups; every per-group slice below is
	// indexed the same way.
	Groups []string
	// Spans holds one Span per Rule.Windows entry, in the same order.
	Spans []Span
	// Recent holds each group's accumulator of the values since the previous
	// evaluation, (RecentFrom, Time]: the increments of the CUSUMs.
	Recent     []stats.Accumulator
	RecentFrom time.Time
	// Report is the analysis of the main window, [ReportFrom, ReportTo); nil
	// when not made (calibrate). The monitor uses it for the spread
	// condition, for the automatic test choice (its Brown–Forsythe test) and
	// to name groups when its own analysis of means names none. Without it
	// there is no spread condition and the automatic test is the classic F.
	Report               *stats.Report
	ReportFrom, ReportTo time.Time
	// Silent names the groups the window left out of the report (silent by
	// the window's setting); the means detectors leave them out too.
	Silent []string
	// LastSeen bounds each group's newest value from above (zero: none in
	// the window). The monitor remembers the latest it has seen per group,
	// so that a group that fell out of the window is still known to have
	// reported.
	LastSeen []time.Time
	// Accepted and Rejected count the characteristic's messages since the
	// previous evaluation.
	Accepted, Rejected uint64
}
