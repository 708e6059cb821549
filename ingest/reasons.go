package ingest

import (
	"encoding/json"
	"errors"
	"iter"
	"strconv"
	"strings"
	"sync/atomic"
	"time"
	"unicode/utf8"

	"github.com/lockstep-project/lockstep/stats"
)

// Reason says why a measurement was rejected. Its String is a stable label
// for metrics, logs and dead-letter messages: the labels never change once
// released.
type Reason uint8

// Reasons for rejecting a measurement. ReasonNone is no reason: the
// measurement was accepted.
const (
	ReasonNone Reason = iota
	// ReasonNotParseable: the message is not JSON or not an accepted shape,
	// has no value, a time that is not a time, a field of the wrong type,
	// names that are not usable, a subject that does not match the template,
	// or a group or characteristic that the subject and payload disagree on.
	ReasonNotParseable
	// ReasonNotANumber: the value is not decimal text, or is true, false,
	// null, an object or an array.
	ReasonNotANumber
	// ReasonNotFinite: the value is NaN or an infinity.
	ReasonNotFinite
	// ReasonOutOfRange: the value is outside the characteristic's plausible
	// range, or outside the range of float64.
	ReasonOutOfRange
	// ReasonWrongUnit: the payload's unit differs from the characteristic's.
	ReasonWrongUnit
	// ReasonFromFuture: the time is further ahead of now than allowed.
	ReasonFromFuture
	// ReasonTooOld: the time is further behind now than allowed.
	ReasonTooOld
	// ReasonUnknownCharacteristic: the characteristic is not configured and
	// unknown characteristics are rejected (or there are already too many).
	ReasonUnknownCharacteristic
	// ReasonDuplicateID: the id was seen recently for the characteristic.
	ReasonDuplicateID
	// ReasonNoGroup: neither the subject nor the payload names a group.
	ReasonNoGroup

	numReasons
)

// reasonLabels holds the metric label of each Reason.
var reasonLabels = [numReasons]string{
	ReasonNone:                  "none",
	ReasonNotParseable:          "not_parseable",
	ReasonNotANumber:            "not_a_number",
	ReasonNotFinite:             "not_finite",
	ReasonOutOfRange:            "out_of_range",
	ReasonWrongUnit:             "wrong_unit",
	ReasonFromFuture:            "from_future",
	ReasonTooOld:                "too_old",
	ReasonUnknownCharacteristic: "unknown_characteristic",
	ReasonDuplicateID:           "duplicate_id",
	ReasonNoGroup:               "no_group",
}

// String returns the reason's label, such as "not_a_number"; "none" for
// ReasonNone and "reason(N)" for a number that is no Reason.
func (r Reason) String() string {
	if r < numReasons {
		return reasonLabels[r]
	}
	return "reason(" + strconv.Itoa(int(r)) + ")"
}

// ParseReason returns the Reason whose label is s.
func ParseReason(s string) (Reason, bool) {
	for r, l := range reasonLabels {
		if l == s {
			return Reason(r), true
		}
	}
	return ReasonNone, false
}

// Reasons yields every reject reason in order, without ReasonNone, e.g. to
// register a metric for each.
func Reasons() iter.Seq[Reason] {
	return func(yield func(Reason) bool) {
		for r := ReasonNotParseable; r < numReasons; r++ {
			if !yield(r) {
				return
			}
		}
	}
}

// ReasonOf returns the reason for err: ReasonNone for nil; the Reason of a
// *RejectError; for the sentinels of this package and of stats, the reason
// they document (stats.ErrSyntax is not_a_number, stats.ErrNotFinite
// not_finite, stats.ErrOutOfRange out_of_range); not_parseable for any
// other error.
func ReasonOf(err error) Reason {
	var re *RejectError
	switch {
	case err == nil:
		return ReasonNone
	case errors.As(err, &re):
		return re.Reason
	case errors.Is(err, ErrNotNumber), errors.Is(err, stats.ErrSyntax):
		return ReasonNotANumber
	case errors.Is(err, stats.ErrNotFinite):
		return ReasonNotFinite
	case errors.Is(err, stats.ErrOutOfRange):
		return ReasonOutOfRange
	}
	return ReasonNotParseable
}

// RejectError is the error of a rejected measurement or message: its
// reason, the characteristic it was for (when known) and what is wrong.
type RejectError struct {
	Reason Reason
	// Characteristic as the subject or payload names it; "" when neither
	// does (DeadLetterSubject then uses "unknown").
	Characteristic string
	// Msg says what is wrong and what to do; empty when Err says it.
	Msg string
	// Err is the underlying error (a *PayloadError, a *stats.DecimalError)
	// or nil.
	Err error
}

// Error returns Msg, or else the message of Err.
func (e *RejectError) Error() string {
	switch {
	case e.Msg != "":
		return e.Msg
	case e.Err != nil:
		return e.Err.Error()
	}
	return e.Reason.String()
}

// Unwrap returns Err.
func (e *RejectError) Unwrap() error { return e.Err }

// Counters counts measurements accepted and rejected, by reason. All
// methods are safe for concurrent use (atomic counters), so several
// Validators may share one Counters and a metrics handler may read it while
// they run. The zero value is ready to use.
type Counters struct {
	n [numReasons]atomic.Uint64 // index ReasonNone counts accepted measurements
}

// Add counts one measurement under r; ReasonNone counts it as accepted.
func (c *Counters) Add(r Reason) {
	if r < numReasons {
		c.n[r].Add(1)
	}
}

// Accepted returns the number of measurements accepted.
func (c *Counters) Accepted() uint64 { return c.n[ReasonNone].Load() }

// Rejected returns the number of measurements rejected for reason r.
func (c *Counters) Rejected(r Reason) uint64 {
	if r == ReasonNone || r >= numReasons {
		return 0
	}
	return c.n[r].Load()
}

// RejectedTotal returns the number of measurements rejected for any reason.
func (c *Counters) RejectedTotal() uint64 {
	var t uint64
	for r := range Reasons() {
		t += c.n[r].Load()
	}
	return t
}

// MaxRejectPayload is the most bytes of the original payload that
// RejectMessage copies into a dead-letter message.
const MaxRejectPayload = 64 << 10

// rejectBody is the JSON of a dead-letter message.
type rejectBody struct {
	Reason           string `json:"reason"`
	Error            string `json:"error"`
	Subject          string `json:"subject"`
	Payload          string `json:"payload"`
	PayloadTruncated bool   `json:"payload_truncated,omitempty"`
	Time             string `json:"time"`
}

// RejectMessage returns the JSON body republished to the dead-letter
// subject for a rejected message:
//
//	{"reason":"not_a_number","error":"…","subject":"meas.fill-weight.L3","payload":"{\"value\":\"12,5\"}","time":"2026-03-01T08:00:00.25Z"}
//
// reason is its label; error the message of err ("" for nil); payload the
// original payload as a string (invalid UTF-8 replaced by U+FFFD), cut to
// MaxRejectPayload bytes with "payload_truncated": true when longer; time
// is now, the time of the rejection, in RFC 3339 UTC with nanoseconds.
func RejectMessage(reason Reason, err error, subject string, payload []byte, now time.Time) []byte {
	body := rejectBody{
		Reason:  reason.String(),
		Subject: subject,
		Time:    now.UTC().Format(time.RFC3339Nano),
	}
	if err != nil {
		body.Error = err.Error()
	}
	if len(payload) > MaxRejectPayload {
		n := MaxRejectPayload
		for n > 0 && !utf8.RuneStart(payload[n]) {
			n--
		}
		payload, body.PayloadTruncated = payload[:n], true
	}
	body.Payload = string(payload)
	b, merr := json.Marshal(body)
	if merr != nil {
		// Cannot happen: every field is a string or a bool.
		return []byte(`{"reason":"` + body.Reason + `","error":"encoding the dead-letter message failed"}`)
	}
	return b
}

// maxSubjectToken is the longest token DeadLetterSubject writes.
const maxSubjectToken = 128

// DeadLetterSubject returns the subject that rejects of a characteristic go
// to: <prefix>.rejects.<characteristic>, e.g. lockstep.rejects.fill-weight.
// An empty characteristic becomes "unknown". Every token of prefix and the
// characteristic are sanitised so that the subject is valid and has no
// wildcards: runes other than ASCII letters, digits, '-' and '_' become
// '_', and tokens are cut to 128 bytes; empty tokens of prefix are dropped,
// and an empty prefix gives rejects.<characteristic>.
func DeadLetterSubject(prefix, characteristic string) string {
	var b strings.Builder
	for tok := range strings.SplitSeq(prefix, ".") {
		if tok != "" {
			appendSubjectToken(&b, tok)
			b.WriteByte('.')
		}
	}
	b.WriteString("rejects.")
	if characteristic == "" {
		characteristic = "unknown"
	}
	appendSubjectToken(&b, characteristic)
	return b.String()
}

// appendSubjectToken writes tok sanitised (see DeadLetterSubject).
func appendSubjectToken(b *strings.Builder, tok string) {
	n := 0
	for _, r := range tok {
		if n == maxSubjectToken {
			return
		}
		if !('a' <= r && r <= 'z' || 'A' <= r && r <= 'Z' || '0' <= r && r <= '9' || r == '-' || r == '_') {
			r = '_'
		}
		b.WriteRune(r)
		n++
	}
}
