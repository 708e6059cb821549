package plant

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"
	"time"

	"github.com/lockstep-project/lockstep/stats"
)

// Limits checked by Scenario.Validate.
const (
	MaxCharacteristics = 1000
	MaxGroups          = 10000 // per characteristic
	MaxEvents          = 10000 // per characteristic
	MaxNameLen         = 128   // bytes, for characteristic and group names
	MaxResolution      = 9     // decimal places
	MaxRate            = 1e6   // values per second per group
)

// DefaultRangeSDs is the half-width of the plausible range, in within-group
// standard deviations around the nominal, of a characteristic that sets no
// Min or Max.
const DefaultRangeSDs = 50

// Scenario is a synthetic plant: what it makes and what happens to it.
// The zero value has no characteristics and does not validate.
type Scenario struct {
	// Name describes the scenario in summaries.
	Name string
	// Seed selects the random streams; the same Seed and Scenario give
	// the same messages, byte for byte.
	Seed uint64
	// Start is the simulated time of the start; event offsets count from
	// it. New requires it; a scenario file may leave it for the caller.
	Start time.Time
	// Duration ends the simulation: messages are generated for simulated
	// times in [Start, Start+Duration). 0 runs for ever.
	Duration time.Duration
	// Bad sets the share and the kinds of deliberately bad messages.
	Bad Bad
	// Characteristics are the measured quantities, each with its groups.
	Characteristics []Characteristic
}

// Bad sets which messages are deliberately bad.
type Bad struct {
	// Rate is the fraction of all messages, between 0 and 1, that are bad
	// instead of good (0.001 is one in a thousand). Each bad message
	// replaces a good one, so that turning bad messages on changes neither
	// the arrival times nor the other values.
	Rate float64
	// Kinds are the kinds of bad messages, drawn in equal shares; nil or
	// empty means AllBadKinds.
	Kinds []BadKind
}

// Characteristic is one measured quantity that several groups produce.
type Characteristic struct {
	// Name is the characteristic's subject token, e.g. "fill-weight":
	// ASCII letters, digits, '-' and '_'.
	Name string
	// Unit is written in every good payload, e.g. "g", "°C", "N·m".
	Unit string
	// Nominal is the target value as decimal text, e.g. "500.00".
	Nominal string
	// Resolution is the number of decimal places the instrument writes
	// (0 to MaxResolution).
	Resolution int
	// Min and Max bound the plausible range as decimal text (what the
	// daemon's configuration should say); out_of_range bad messages carry
	// values beyond it. Empty means Nominal ∓ DefaultRangeSDs·SD.
	Min, Max string
	// SD is the within-group standard deviation in the characteristic's
	// units (at least 0).
	SD float64
	// Rate is the number of values per second from each group (above 0,
	// at most MaxRate).
	Rate float64
	// Arrivals says how a group's values are spaced in time.
	Arrivals Arrivals
	// ValueFormat and TimeFormat say how payloads write the value and the
	// time.
	ValueFormat ValueFormat
	TimeFormat  TimeFormat
	// Groups are the names of the parallel producers (subject tokens, the
	// same rules as Name), e.g. "L1", "L2".
	Groups []string
	// Events change groups at given offsets from the start.
	Events []Event
}

// Arrivals says how a group's values are spaced in time.
type Arrivals uint8

const (
	// Poisson spaces values by independent exponential gaps of mean
	// 1/Rate, as from a machine that measures each item as it passes; the
	// default.
	Poisson Arrivals = iota
	// Regular sends a value every 1/Rate seconds, each group at its own
	// random phase so that groups do not all send at the same instant.
	Regular
)

// String returns "poisson" or "regular".
func (a Arrivals) String() string {
	if a == Regular {
		return "regular"
	}
	return "poisson"
}

// ValueFormat says how a payload writes its value.
type ValueFormat uint8

const (
	// ValueString writes the value as a JSON string: "value":"500.12"; the default.
	ValueString ValueFormat = iota
	// ValueNumber writes it as a JSON number: "value":500.12.
	ValueNumber
)

// String returns "string" or "number".
func (f ValueFormat) String() string {
	if f == ValueNumber {
		return "number"
	}
	return "string"
}

// TimeFormat says how a payload writes its time.
type TimeFormat uint8

const (
	// TimeRFC3339 writes UTC with milliseconds:
	// "time":"2026-12-01T06:00:00.123Z"; the default.
	TimeRFC3339 TimeFormat = iota
	// TimeUnixMilli writes Unix milliseconds as a number: "time":1796104800123.
	TimeUnixMilli
)

// String returns "rfc3339" or "unix_ms".
func (f TimeFormat) String() string {
	if f == TimeUnixMilli {
		return "unix_ms"
	}
	return "rfc3339"
}

// EventKind is what an Event does.
type EventKind uint8

// Kinds of events. The zero EventKind is no kind and does not validate.
const (
	// Shift moves one group's mean by By: a step, or a linear ramp over
	// Duration, after which the group stays moved.
	Shift EventKind = iota + 1
	// Spread multiplies one group's standard deviation by Factor: at once,
	// or growing linearly from 1 to Factor over Duration.
	Spread
	// Drift moves every group of the characteristic together by By, as a
	// step or a ramp over Duration: a common cause such as ambient
	// temperature, which a between-group comparison should not flag.
	Drift
	// Silence stops one group for Duration.
	Silence
)

// String returns the event kind's name, e.g. "shift".
func (k EventKind) String() string {
	switch k {
	case Shift:
		return "shift"
	case Spread:
		return "spread"
	case Drift:
		return "drift"
	case Silence:
		return "silence"
	}
	return fmt.Sprintf("event_kind(%d)", uint8(k))
}

// parseEventKind reads an event kind's name.
func parseEventKind(s string) (EventKind, bool) {
	for k := Shift; k <= Silence; k++ {
		if k.String() == s {
			return k, true
		}
	}
	return 0, false
}

// Event is something that happens to a characteristic at an offset from the
// start. The effects of several events add up (shifts and drifts) or
// multiply (spreads); to end a shift, add another one with the opposite By.
type Event struct {
	Kind EventKind
	// Group is the group a shift, spread or silence applies to; a drift
	// applies to every group and names none.
	Group string
	// At is the offset from the start at which the event begins (≥ 0).
	At time.Duration
	// Duration is, for a shift, drift or spread, the time over which the
	// change grows linearly to its full size (0: a step); for a silence,
	// how long the group sends nothing (> 0).
	Duration time.Duration
	// By is the full move of the mean of a shift or drift, in the
	// characteristic's units (either sign).
	By float64
	// Factor is what a spread multiplies the standard deviation by (> 0).
	Factor float64
}

// FieldError is one mistake in a scenario: where it is and what is wrong.
type FieldError struct {
	// File is the scenario file's name; empty when the scenario was not
	// read from a file.
	File string
	// Line is the 1-based line of the key (or of its table when the key
	// is missing); 0 when not known.
	Line int
	// Key is the dotted path of the key, such as
	// "characteristic[0].event[1].group" (array indices from 0).
	Key string
	// Msg says what is wrong and what to write instead.
	Msg string
}

// Error returns "FILE:LINE: KEY: MSG", leaving out what is not known.
func (e *FieldError) Error() string {
	var b strings.Builder
	if e.File != "" {
		b.WriteString(e.File)
		b.WriteString(":")
	}
	if e.Line > 0 {
		fmt.Fprintf(&b, "%d:", e.Line)
	}
	if b.Len() > 0 {
		b.WriteString(" ")
	}
	if e.Key != "" {
		b.WriteString(e.Key)
		b.WriteString(": ")
	}
	b.WriteString(e.Msg)
	return b.String()
}

// ErrInvalid is wrapped by every error of Scenario.Validate and
// ParseScenario, besides the *FieldErrors that say where.
var ErrInvalid = errors.New("invalid scenario")

// invalid collects FieldErrors.
type invalid struct {
	errs []error
}

func (v *invalid) add(key, format string, args ...any) {
	v.errs = append(v.errs, &FieldError{Key: key, Msg: fmt.Sprintf(format, args...)})
}

// err returns the collected errors joined, or nil.
func (v *invalid) err() error {
	if len(v.errs) == 0 {
		return nil
	}
	return &scenarioError{errs: v.errs}
}

// scenarioError is the error of Validate and ParseScenario: one line per
// FieldError. It matches ErrInvalid with errors.Is, and errors.As finds each
// *FieldError.
type scenarioError struct {
	errs []error
}

func (e *scenarioError) Error() string {
	msgs := make([]string, len(e.errs))
	for i, err := range e.errs {
		msgs[i] = err.Error()
	}
	return strings.Join(msgs, "\n")
}

func (e *scenarioError) Unwrap() []error { return append([]error{ErrInvalid}, e.errs...) }

// FieldErrors returns the *FieldErrors in err, in order.
func FieldErrors(err error) []*FieldError {
	var se *scenarioError
	if !errors.As(err, &se) {
		var fe *FieldError
		if errors.As(err, &fe) {
			return []*FieldError{fe}
		}
		return nil
	}
	var out []*FieldError
	for _, e := range se.errs {
		var fe *FieldError
		if errors.As(e, &fe) {
			out = append(out, fe)
		}
	}
	return out
}

// Validate checks the scenario and returns every mistake found: an error
// that wraps ErrInvalid and one *FieldError per mistake (see FieldErrors).
// Start is not checked: New requires it.
func (s Scenario) Validate() error {
	var v invalid
	if s.Duration < 0 {
		v.add("duration", "must not be negative, have %v", s.Duration)
	}
	if !(s.Bad.Rate >= 0 && s.Bad.Rate <= 1) {
		v.add("bad.rate", "must be between 0 and 1 (a fraction of all messages; 0.001 is one in a thousand), have %g", s.Bad.Rate)
	}
	seenKind := map[BadKind]bool{}
	for i, k := range s.Bad.Kinds {
		key := fmt.Sprintf("bad.kinds[%d]", i)
		if !k.valid() {
			v.add(key, "no bad kind %q; use one of %s", k, badKindList())
		} else if seenKind[k] {
			v.add(key, "%q given twice", k)
		}
		seenKind[k] = true
	}
	switch n := len(s.Characteristics); {
	case n == 0:
		v.add("characteristic", "no characteristic; a scenario needs at least one")
	case n > MaxCharacteristics:
		v.add("characteristic", "%d characteristics, at most %d allowed", n, MaxCharacteristics)
	}
	seen := map[string]bool{}
	for i := range s.Characteristics {
		c := &s.Characteristics[i]
		key := fmt.Sprintf("characteristic[%d]", i)
		if c.Name != "" && seen[c.Name] {
			v.add(key+".name", "characteristic %q given twice", c.Name)
		}
		seen[c.Name] = true
		c.validate(&v, key)
	}
	return v.err()
}

func (c *Characteristic) validate(v *invalid, key string) {
	if msg := checkName(c.Name); msg != "" {
		v.add(key+".name", "%s", msg)
	}
	if c.Unit == "" {
		v.add(key+".unit", "missing; give the unit of the values, e.g. \"g\"")
	} else if strings.ContainsFunc(c.Unit, func(r rune) bool { return r < 0x20 || r == 0x7f }) {
		v.add(key+".unit", "%q has a control character", c.Unit)
	}
	if _, err := parseDecimal(c.Nominal); err != nil {
		v.add(key+".nominal", "%v", err)
	}
	if c.Resolution < 0 || c.Resolution > MaxResolution {
		v.add(key+".resolution", "must be between 0 and %d decimal places, have %d", MaxResolution, c.Resolution)
	}
	if !(c.SD >= 0 && !math.IsInf(c.SD, 0)) {
		v.add(key+".sd", "must be a finite number ≥ 0, have %g", c.SD)
	}
	if !(c.Rate > 0 && c.Rate <= MaxRate) {
		v.add(key+".rate", "must be above 0 and at most %g values per second per group, have %g", float64(MaxRate), c.Rate)
	}
	var lo, hi float64
	loOK, hiOK := true, true
	if c.Min != "" {
		var err error
		if lo, err = parseDecimal(c.Min); err != nil {
			v.add(key+".min", "%v", err)
			loOK = false
		}
	}
	if c.Max != "" {
		var err error
		if hi, err = parseDecimal(c.Max); err != nil {
			v.add(key+".max", "%v", err)
			hiOK = false
		}
	}
	if c.Min != "" && c.Max != "" && loOK && hiOK && !(lo < hi) {
		v.add(key+".max", "must be above min (%s), have %s", c.Min, c.Max)
	}
	if c.Arrivals > Regular {
		v.add(key+".arrivals", "no arrivals %d", c.Arrivals)
	}
	if c.ValueFormat > ValueNumber {
		v.add(key+".value_format", "no value format %d", c.ValueFormat)
	}
	if c.TimeFormat > TimeUnixMilli {
		v.add(key+".time_format", "no time format %d", c.TimeFormat)
	}
	switch n := len(c.Groups); {
	case n == 0:
		v.add(key+".groups", "no group; list the parallel producers, e.g. [\"L1\", \"L2\"]")
	case n > MaxGroups:
		v.add(key+".groups", "%d groups, at most %d allowed", n, MaxGroups)
	}
	groups := map[string]bool{}
	for j, g := range c.Groups {
		gkey := fmt.Sprintf("%s.groups[%d]", key, j)
		if msg := checkName(g); msg != "" {
			v.add(gkey, "%s", msg)
		} else if groups[g] {
			v.add(gkey, "group %q given twice", g)
		}
		groups[g] = true
	}
	if len(c.Events) > MaxEvents {
		v.add(key+".event", "%d events, at most %d allowed", len(c.Events), MaxEvents)
	}
	for j := range c.Events {
		c.Events[j].validate(v, fmt.Sprintf("%s.event[%d]", key, j), c.Groups, groups)
	}
}

func (e *Event) validate(v *invalid, key string, groupList []string, groups map[string]bool) {
	if e.Kind < Shift || e.Kind > Silence {
		v.add(key+".kind", "missing or unknown; use shift, spread, drift or silence")
		return
	}
	if e.Kind == Drift {
		if e.Group != "" {
			v.add(key+".group", "a drift moves every group; leave group out (for one group use a shift)")
		}
	} else if e.Group == "" {
		v.add(key+".group", "missing; a %s applies to one group: one of %s", e.Kind, nameList(groupList))
	} else if !groups[e.Group] {
		v.add(key+".group", "%q is not one of the groups (%s)", e.Group, nameList(groupList))
	}
	if e.At < 0 {
		v.add(key+".at", "must not be negative, have %v", e.At)
	}
	switch {
	case e.Duration < 0:
		v.add(key+".duration", "must not be negative, have %v", e.Duration)
	case e.Kind == Silence && e.Duration == 0:
		v.add(key+".duration", "missing; a silence needs a duration above 0, e.g. \"2m\"")
	}
	switch e.Kind {
	case Shift, Drift:
		if math.IsNaN(e.By) || math.IsInf(e.By, 0) {
			v.add(key+".by", "must be a finite number, have %g", e.By)
		}
		if e.Factor != 0 {
			v.add(key+".factor", "only a spread takes a factor; a %s moves the mean by \"by\"", e.Kind)
		}
	case Spread:
		if !(e.Factor > 0 && !math.IsInf(e.Factor, 0)) {
			v.add(key+".factor", "must be a finite number above 0 (3 triples the standard deviation), have %g", e.Factor)
		}
		if e.By != 0 {
			v.add(key+".by", "a spread changes the standard deviation by \"factor\", not the mean")
		}
	case Silence:
		if e.By != 0 || e.Factor != 0 {
			v.add(key, "a silence takes neither by nor factor")
		}
	}
}

// nameList lists names for an error message, the first ten of many.
func nameList(names []string) string {
	if len(names) > 10 {
		return strings.Join(names[:10], ", ") + fmt.Sprintf(", … (%d in all)", len(names))
	}
	return strings.Join(names, ", ")
}

// checkName returns what is wrong with a characteristic or group name, or "".
func checkName(s string) string {
	if s == "" {
		return "missing; give a name of ASCII letters, digits, '-' and '_'"
	}
	if len(s) > MaxNameLen {
		return fmt.Sprintf("name of %d bytes, at most %d allowed", len(s), MaxNameLen)
	}
	for i := 0; i < len(s); i++ {
		c := s[i]
		if !(c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '-' || c == '_') {
			return fmt.Sprintf("%q has %q; a name is a subject token of ASCII letters, digits, '-' and '_'", s, rune(c))
		}
	}
	return ""
}

// parseDecimal reads decimal text such as "500.00" as a float64.
func parseDecimal(s string) (float64, error) {
	if s == "" {
		return 0, errors.New("missing; give decimal text in quotes, e.g. \"500.00\"")
	}
	d, err := stats.ParseDecimal(s)
	if err != nil {
		return 0, fmt.Errorf("%q is not decimal text such as \"500.00\"", s)
	}
	return d.Float64(), nil
}

// WithRateScale returns a copy of s in which every characteristic's Rate is
// multiplied by x (for load tests); the copy shares groups and events with s.
func (s Scenario) WithRateScale(x float64) Scenario {
	s.Characteristics = slices.Clone(s.Characteristics)
	for i := range s.Characteristics {
		s.Characteristics[i].Rate *= x
	}
	return s
}

// Rate returns the number of messages per second of the whole plant: the
// sum over characteristics of Rate times the number of groups, not counting
// silences.
func (s Scenario) Rate() float64 {
	var r float64
	for i := range s.Characteristics {
		r += s.Characteristics[i].Rate * float64(len(s.Characteristics[i].Groups))
	}
	return r
}
