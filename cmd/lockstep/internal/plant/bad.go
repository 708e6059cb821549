package plant

import (
	"strings"
	"time"
)

// BadKind names a kind of deliberately bad message; "" is a good message.
// The names are stable: summaries and tests count by them.
type BadKind string

// Kinds of bad messages, and what each one carries. The reason in brackets
// is the label that lockstep's ingest gives such a message when the
// characteristic is configured with the same unit and plausible range.
const (
	// BadNotJSON is not JSON: a good payload cut short, or a line of
	// plain text such as "L3 500.12 g" [not_parseable].
	BadNotJSON BadKind = "not_json"
	// BadNotANumber has a value that is no number: "ERR", null, the value
	// with its unit ("500.12 g"), or with a decimal comma ("500,12")
	// [not_a_number].
	BadNotANumber BadKind = "not_a_number"
	// BadNaN has the bare word NaN as its value, as some encoders write
	// it [not_finite].
	BadNaN BadKind = "nan"
	// BadOutOfRange has a value beyond the plausible range by up to its
	// width, below or above [out_of_range].
	BadOutOfRange BadKind = "out_of_range"
	// BadWrongUnit names another unit (g ↔ kg, °C ↔ °F, …) with an
	// unconverted value [wrong_unit].
	BadWrongUnit BadKind = "wrong_unit"
	// BadFromFuture has a time FutureOffset after its arrival [from_future].
	BadFromFuture BadKind = "from_future"
	// BadDuplicateID repeats the group's previous good message byte for
	// byte, as an instrument that retries does [duplicate_id]. The very
	// first message of a group has nothing to repeat and is sent good.
	BadDuplicateID BadKind = "duplicate_id"
)

// FutureOffset is how far ahead of its arrival a from_future message's time
// lies: far beyond any sensible clock skew.
const FutureOffset = 24 * time.Hour

// AllBadKinds returns every kind of bad message, in a fixed order.
func AllBadKinds() []BadKind {
	return []BadKind{BadNotJSON, BadNotANumber, BadNaN, BadOutOfRange, BadWrongUnit, BadFromFuture, BadDuplicateID}
}

// Reason returns the reject reason that lockstep's ingest gives a message of
// this kind (see the constants), or "" for a good message.
func (k BadKind) Reason() string {
	switch k {
	case BadNotJSON:
		return "not_parseable"
	case BadNotANumber:
		return "not_a_number"
	case BadNaN:
		return "not_finite"
	case BadOutOfRange, BadWrongUnit, BadFromFuture, BadDuplicateID:
		return string(k)
	}
	return ""
}

func (k BadKind) valid() bool {
	for _, b := range AllBadKinds() {
		if k == b {
			return true
		}
	}
	return false
}

// badKindList returns the names of all bad kinds, for error messages.
func badKindList() string {
	var names []string
	for _, k := range AllBadKinds() {
		names = append(names, string(k))
	}
	return strings.Join(names, ", ")
}

// wrongUnit returns a unit that is not u but plausibly confused with it.
func wrongUnit(u string) string {
	switch u {
	case "g":
		return "kg"
	case "kg":
		return "g"
	case "°C":
		return "°F"
	case "°F":
		return "°C"
	case "N·m", "Nm", "N m":
		return "lbf·in"
	case "mm":
		return "in"
	case "ml", "mL":
		return "l"
	case "bar":
		return "psi"
	case "%":
		return "‰"
	}
	if len(u) > 1 && u[0] == 'k' {
		return u[1:] // kPa → Pa
	}
	return "k" + u // Pa → kPa, m → km
}
