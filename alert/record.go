package alert

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"time"
	"unicode/utf8"
)

// The record codec: how an alert is persisted (the store keeps the bytes
// under the alert's id and knows nothing of their content). Version 1:
//
//	byte     version (1)
//	byte     kind, byte state
//	string   id, characteristic, key, unit, test, detector, reason,
//	         acknowledged_by, note      (uvarint length, UTF-8 bytes)
//	uvarint  number of groups, then each group as a string
//	varint   direction
//	8 bytes  shift, lower, upper, f, p, effect, ratio, reject_rate
//	         (IEEE 754 bits, big-endian)
//	varint   from, to, opened, raised, acknowledged, cleared, updated
//	         (Unix nanoseconds; 0 is the zero time)
//
// A later version adds fields at the end and bumps the version byte; the
// decoder refuses versions it does not know.

const recordVersion = 1

// Limits the decoder holds records to, so a corrupt length cannot make it
// allocate far.
const (
	maxRecordString = 4096
	maxGroups       = 4096
)

// ErrRecord: a persisted alert record does not decode.
var ErrRecord = errors.New("bad alert record")

// EncodeRecord appends the persisted form of a to dst.
func EncodeRecord(dst []byte, a *Alert) []byte {
	dst = append(dst, recordVersion, byte(a.Kind), byte(a.State))
	for _, s := range []string{a.ID, a.Characteristic, a.Key, a.Unit, a.Test, a.Detector, a.Reason, a.AcknowledgedBy, a.Note} {
		dst = appendString(dst, s)
	}
	dst = binary.AppendUvarint(dst, uint64(len(a.Groups)))
	for _, g := range a.Groups {
		dst = appendString(dst, g)
	}
	dst = binary.AppendVarint(dst, int64(a.Direction))
	for _, f := range []float64{a.Shift, a.Lower, a.Upper, a.F, a.P, a.Effect, a.Ratio, a.RejectRate} {
		dst = binary.BigEndian.AppendUint64(dst, math.Float64bits(f))
	}
	for _, t := range []time.Time{a.From, a.To, a.Opened, a.Raised, a.Acknowledged, a.Cleared, a.Updated} {
		var ns int64
		if !t.IsZero() {
			ns = t.UnixNano()
		}
		dst = binary.AppendVarint(dst, ns)
	}
	return dst
}

func appendString(dst []byte, s string) []byte {
	dst = binary.AppendUvarint(dst, uint64(len(s)))
	return append(dst, s...)
}

// DecodeRecord reads a record written by EncodeRecord. It never panics: a
// short, corrupt or unknown record is an error wrapping ErrRecord.
func DecodeRecord(b []byte) (Alert, error) {
	r := reader{b: b}
	var a Alert
	v := r.byte()
	if r.err == nil && v != recordVersion {
		return Alert{}, fmt.Errorf("%w: version %d, this lockstep reads %d", ErrRecord, v, recordVersion)
	}
	a.Kind, a.State = Kind(r.byte()), State(r.byte())
	for _, p := range []*string{&a.ID, &a.Characteristic, &a.Key, &a.Unit, &a.Test, &a.Detector, &a.Reason, &a.AcknowledgedBy, &a.Note} {
		*p = r.string()
	}
	n := r.uvarint()
	if r.err == nil && n > maxGroups {
		r.err = fmt.Errorf("%d groups, more than %d", n, maxGroups)
	}
	if r.err == nil && n > 0 {
		a.Groups = make([]string, 0, min(n, uint64(len(r.b))))
		for i := uint64(0); i < n && r.err == nil; i++ {
			a.Groups = append(a.Groups, r.string())
		}
	}
	d := r.varint()
	if r.err == nil && (d < -1 || d > 1) {
		r.err = fmt.Errorf("direction %d", d)
	}
	a.Direction = int(d)
	for _, p := range []*float64{&a.Shift, &a.Lower, &a.Upper, &a.F, &a.P, &a.Effect, &a.Ratio, &a.RejectRate} {
		*p = r.float()
	}
	for _, p := range []*time.Time{&a.From, &a.To, &a.Opened, &a.Raised, &a.Acknowledged, &a.Cleared, &a.Updated} {
		if ns := r.varint(); ns != 0 {
			*p = time.Unix(0, ns).UTC()
		}
	}
	switch {
	case r.err != nil:
	case len(r.b) != 0:
		r.err = fmt.Errorf("%d bytes after the record", len(r.b))
	case a.Kind == KindNone || a.Kind.String() == "unknown":
		r.err = fmt.Errorf("kind %d", a.Kind)
	case a.State == StateNone || a.State.String() == "unknown":
		r.err = fmt.Errorf("state %d", a.State)
	case a.ID == "":
		r.err = errors.New("no id")
	}
	if r.err != nil {
		return Alert{}, fmt.Errorf("%w: %v", ErrRecord, r.err)
	}
	return a, nil
}

// reader reads a record, keeping the first error.
type reader struct {
	b   []byte
	err error
}

func (r *reader) fail(what string) {
	if r.err == nil {
		r.err = fmt.Errorf("truncated at the %s", what)
	}
	r.b = nil
}

func (r *reader) byte() byte {
	if r.err != nil || len(r.b) < 1 {
		r.fail("header")
		return 0
	}
	c := r.b[0]
	r.b = r.b[1:]
	return c
}

func (r *reader) uvarint() uint64 {
	if r.err != nil {
		return 0
	}
	x, n := binary.Uvarint(r.b)
	if n <= 0 {
		r.fail("length")
		return 0
	}
	r.b = r.b[n:]
	return x
}

func (r *reader) varint() int64 {
	if r.err != nil {
		return 0
	}
	x, n := binary.Varint(r.b)
	if n <= 0 {
		r.fail("integer")
		return 0
	}
	r.b = r.b[n:]
	return x
}

func (r *reader) string() string {
	n := r.uvarint()
	if r.err != nil {
		return ""
	}
	if n > maxRecordString || n > uint64(len(r.b)) {
		if r.err == nil {
			r.err = fmt.Errorf("string of %d bytes (at most %d, %d left)", n, maxRecordString, len(r.b))
		}
		r.b = nil
		return ""
	}
	s := string(r.b[:n])
	r.b = r.b[n:]
	if !utf8.ValidString(s) {
		r.err = errors.New("string not UTF-8")
		r.b = nil
		return ""
	}
	return s
}

func (r *reader) float() float64 {
	if r.err != nil || len(r.b) < 8 {
		r.fail("number")
		return 0
	}
	x := math.Float64frombits(binary.BigEndian.Uint64(r.b))
	r.b = r.b[8:]
	return x
}
