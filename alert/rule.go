package alert

import (
	"errors"
	"fmt"
	"math"
	"time"
)

// TestChoice is the test of equal means the window F detectors use.
type TestChoice uint8

// The tests of equal means.
const (
	// TestAuto: the classic F, or Welch's F when the Brown–Forsythe test of
	// the main window's report rejects equal spreads at Spread.Alpha (and
	// Welch is available). The Condition says which was used. The contrast
	// CUSUMs standardize by each group's own variance (the Welch-type
	// standard error, see Monitor) at every evaluation: a spread that has
	// just grown is not yet seen by the Brown–Forsythe test of a long
	// window, and at equal spreads the per-group form costs no speed at
	// the same false-alarm rate (measured with `lockstep calibrate`).
	TestAuto TestChoice = iota
	// TestClassic: the classic one-way F, which assumes equal spreads; the
	// contrast CUSUMs standardize by the pooled within-group SD.
	TestClassic
	// TestWelch: Welch's (1951) heteroscedastic F; the contrast CUSUMs
	// standardize by each group's own variance, as with TestAuto.
	TestWelch
)

var testNames = [...]string{"auto", "classic", "welch"}

// String returns the choice's name as it appears in configuration files.
func (t TestChoice) String() string {
	if int(t) < len(testNames) {
		return testNames[t]
	}
	return "unknown"
}

// ParseTestChoice returns the TestChoice named s ("auto", "classic",
// "welch").
func ParseTestChoice(s string) (TestChoice, error) {
	for i, n := range testNames {
		if n == s {
			return TestChoice(i), nil
		}
	}
	return 0, fmt.Errorf("test %q is not one of auto, classic, welch", s)
}

// Judge says on what the practical difference is judged.
type Judge uint8

// The ways of judging the practical difference.
const (
	// JudgeInterval: the shift's confidence interval must lie beyond the
	// practical difference, on the side of the shift. Only a shift that is
	// surely at least that large raises; a true shift of exactly the
	// practical difference raises rarely, and the further beyond it the
	// shift is, the sooner.
	JudgeInterval Judge = iota
	// JudgeEstimate: the shift's point estimate must be at least the
	// practical difference. A true shift of exactly the practical difference
	// then passes about half the time once a detector fires.
	JudgeEstimate
)

// WindowF is one window F detector: the test of equal means (see
// Rule.Test) over the last Length of whole buckets, evaluated at every
// evaluation, at the significance level Share × Rule.Alpha.
type WindowF struct {
	Length time.Duration
	Share  float64
}

// ContrastCUSUM is one between-group CUSUM detector (Page 1954): for each
// group, a two-sided CUSUM of its standardized contrast against the mean of
// the other groups (see Monitor). K is the reference value and H the
// decision interval, both in units of the contrast's standard error (the
// pooled or the Welch-type one by Rule.Test, see Monitor). H = 0
// derives H from Share × Rule.Alpha by Siegmund's approximation (see
// CUSUMThreshold); a positive H is used as given and Share then only
// documents the intent.
type ContrastCUSUM struct {
	K, H  float64
	Share float64
}

// SpreadRule is the spread-diverges condition: it holds when the main
// window's Brown–Forsythe test rejects equal spreads at Alpha and the
// outstanding group's SD over the pooled within-group SD is at least
// MinRatio (or at most 1/MinRatio). It is quiet again at p ≥ ClearAlpha.
type SpreadRule struct {
	Off        bool
	Alpha      float64
	ClearAlpha float64
	MinRatio   float64
}

// RejectRule is the input-rejected condition: it holds when, since the
// previous evaluation, at least MinCount messages arrived and more than
// Rate of them were rejected; it is quiet again at a rate of at most
// ClearRate (or fewer than MinCount messages).
type RejectRule struct {
	Off       bool
	Rate      float64
	ClearRate float64
	MinCount  uint64
}

// Rule is one characteristic's alert settings. Use DefaultRule and change
// what differs; Validate says what is wrong, field by field.
type Rule struct {
	// Alpha is the false-alarm budget of the means detectors together: the
	// probability, per evaluation of an in-control stream, that one of them
	// fires. It is split among the detectors by their Share (the shares sum
	// to at most 1): a window F tests at Share × Alpha; a CUSUM whose H is
	// 0 gets the H at which its 2 × groups one-sided charts signal at
	// Share × Alpha per evaluation on average. For windows longer than the
	// evaluation interval, alarms come in clumps, so the rate of raises is
	// below the rate of firing evaluations; `lockstep calibrate` measures
	// the false raises that a setting gives. Default 4e-5: measured at
	// 0.93 false raises per 30 days (95 % interval 0.71–1.21) for four
	// groups at one value per second, evaluated every minute, with the
	// default detectors (see the README's calibrate section). The contrast
	// CUSUMs' per-group variances (see Monitor) make them fire less often
	// in control than their share; with TestClassic (pooled SD) the same
	// false-raise rate comes at about half this Alpha.
	Alpha float64
	// ClearAlpha is the looser clearing level: a raised means condition is
	// quiet at an evaluation when every window F has p ≥ Share × ClearAlpha
	// and every CUSUM is below the H of Share × ClearAlpha. Default 0.01.
	ClearAlpha float64
	// Confidence is the level of the shift's confidence interval. Default 0.95.
	Confidence float64
	// Practical is the smallest shift worth an alert, in the
	// characteristic's unit: a means condition holds only when a detector
	// fires and the named group's shift passes Judge. Of the further
	// groups analysis of means names, only those whose own shift passes
	// are named too. 0 switches the practical test off. Default 0 (the
	// unit is the characteristic's).
	Practical float64
	Judge     Judge
	// MinN is the smallest number of values a group needs in a detector's
	// span (or, for a CUSUM, since the previous evaluation) to take part.
	// Default 5.
	MinN int64
	// MinGroups is the smallest number of groups taking part for a detector
	// to test at all. Default 2.
	MinGroups int
	// Confirm is how many consecutive evaluations a condition must hold to
	// be raised. Default 1.
	Confirm int
	// ClearAfter is how many consecutive quiet evaluations clear a raised
	// condition. Default 5. A means detector that cannot test at an
	// evaluation (too few groups or values) counts as quiet; a CUSUM keeps
	// its sums meanwhile.
	ClearAfter int
	// Test is the test of equal means of the window F detectors. Default auto.
	Test TestChoice
	// Windows are the window F detectors. Default 1 min (share 0.01: quick
	// for large shifts) and 30 min (share 0.01; its pooled SD also scales
	// the CUSUMs).
	Windows []WindowF
	// CUSUMs are the between-group CUSUM detectors. Default k = 0.85
	// (share 0.58) and k = 0.35 (share 0.40): tuned (k = half the
	// contrast's shift in standard errors) for shifts of 0.25 and 0.1
	// within-group SD at 60 values per group and evaluation; the shares
	// were chosen with `lockstep calibrate` (see the README).
	CUSUMs []ContrastCUSUM
	// Spread is the spread-diverges condition.
	Spread SpreadRule
	// SilentAfter: a group that reported and has sent nothing for this long,
	// while at least one other group reported within it, is silent.
	// Default 10 min; 0 switches the condition off.
	SilentAfter time.Duration
	// Reject is the input-rejected condition.
	Reject RejectRule
}

// DefaultRule returns the default settings, chosen with `lockstep
// calibrate` for four groups at one value per second each, evaluated every
// minute (see the README's calibrate section for the figures).
func DefaultRule() Rule {
	return Rule{
		Alpha:      4e-5,
		ClearAlpha: 0.01,
		Confidence: 0.95,
		MinN:       5,
		MinGroups:  2,
		Confirm:    1,
		ClearAfter: 5,
		Test:       TestAuto,
		Windows: []WindowF{
			{Length: time.Minute, Share: 0.01},
			{Length: 30 * time.Minute, Share: 0.01},
		},
		CUSUMs: []ContrastCUSUM{
			{K: 0.85, Share: 0.58},
			{K: 0.35, Share: 0.40},
		},
		Spread:      SpreadRule{Alpha: 1e-4, ClearAlpha: 0.01, MinRatio: 1.2},
		SilentAfter: 10 * time.Minute,
		Reject:      RejectRule{Rate: 0.05, ClearRate: 0.02, MinCount: 20},
	}
}

// ErrRule is wrapped by every error Validate returns.
var ErrRule = errors.New("invalid alert rule")

// Validate reports every field that is out of range, each error wrapping
// ErrRule and naming the field and its value, e.g. "alpha 1.5 is not
// between 0 and 1". The caller adds the characteristic.
func (r Rule) Validate() error {
	var errs []error
	bad := func(format string, args ...any) {
		errs = append(errs, fmt.Errorf("%w: "+format, append([]any{ErrRule}, args...)...))
	}
	prob := func(name string, v float64) {
		if !(v > 0 && v < 1) {
			bad("%s %v is not between 0 and 1", name, v)
		}
	}
	prob("alpha", r.Alpha)
	prob("clear-alpha", r.ClearAlpha)
	if r.ClearAlpha > 0 && r.ClearAlpha < r.Alpha {
		bad("clear-alpha %v is below alpha %v: the clearing level must be the looser one", r.ClearAlpha, r.Alpha)
	}
	prob("confidence", r.Confidence)
	if !(r.Practical >= 0) || math.IsInf(r.Practical, 0) {
		bad("practical difference %v is not a finite number ≥ 0", r.Practical)
	}
	if r.Judge > JudgeEstimate {
		bad("practical judge %d is not interval (0) or estimate (1)", r.Judge)
	}
	if r.MinN < 2 {
		bad("min-n %d is below 2: a group needs two values for its spread", r.MinN)
	}
	if r.MinGroups < 2 {
		bad("min-groups %d is below 2: a comparison needs two groups", r.MinGroups)
	}
	if r.Confirm < 1 {
		bad("confirm %d is below 1", r.Confirm)
	}
	if r.ClearAfter < 1 {
		bad("clear-after %d is below 1", r.ClearAfter)
	}
	if r.Test > TestWelch {
		bad("test %d is not auto, classic or welch", r.Test)
	}
	if len(r.Windows) == 0 && len(r.CUSUMs) == 0 {
		bad("no means detector: give at least one window or CUSUM")
	}
	share := 0.0
	for i, d := range r.Windows {
		if d.Length <= 0 {
			bad("windows[%d] length %v is not positive", i, d.Length)
		}
		if !(d.Share > 0 && d.Share <= 1) {
			bad("windows[%d] share %v is not in (0, 1]", i, d.Share)
		} else {
			share += d.Share
		}
		for j := range i {
			if r.Windows[j].Length == d.Length {
				bad("windows[%d] length %v repeats windows[%d]", i, d.Length, j)
			}
		}
	}
	for i, c := range r.CUSUMs {
		if !(c.K > 0) || math.IsInf(c.K, 0) {
			bad("cusums[%d] k %v is not a positive number", i, c.K)
		}
		if !(c.H >= 0) || math.IsInf(c.H, 0) {
			bad("cusums[%d] h %v is not a finite number ≥ 0 (0 derives it from the share)", i, c.H)
		}
		if !(c.Share > 0 && c.Share <= 1) {
			bad("cusums[%d] share %v is not in (0, 1]", i, c.Share)
		} else {
			share += c.Share
		}
	}
	if share > 1+1e-9 {
		bad("detector shares sum to %v, more than 1: the budget alpha would be exceeded", share)
	}
	if !r.Spread.Off {
		prob("spread alpha", r.Spread.Alpha)
		prob("spread clear-alpha", r.Spread.ClearAlpha)
		if r.Spread.ClearAlpha > 0 && r.Spread.ClearAlpha < r.Spread.Alpha {
			bad("spread clear-alpha %v is below spread alpha %v", r.Spread.ClearAlpha, r.Spread.Alpha)
		}
		if !(r.Spread.MinRatio >= 1) || math.IsInf(r.Spread.MinRatio, 0) {
			bad("spread min-ratio %v is not a finite number ≥ 1", r.Spread.MinRatio)
		}
	}
	if r.SilentAfter < 0 {
		bad("silent-after %v is negative (0 switches the condition off)", r.SilentAfter)
	}
	if !r.Reject.Off {
		prob("reject rate", r.Reject.Rate)
		if !(r.Reject.ClearRate >= 0 && r.Reject.ClearRate <= r.Reject.Rate) {
			bad("reject clear-rate %v is not between 0 and the reject rate %v", r.Reject.ClearRate, r.Reject.Rate)
		}
		if r.Reject.MinCount < 1 {
			bad("reject min-count %d is below 1", r.Reject.MinCount)
		}
	}
	return errors.Join(errs...)
}
