package plant

import (
	"bytes"
	"strconv"
	"time"
	"unicode/utf8"
)

// payloadCap is the capacity a payload starts with; the coffee plant's
// payloads are 75 to 85 bytes long.
const payloadCap = 96

// payload writes the message of stream s at time at with value v, made bad
// in the way kind says.
func (g *Generator) payload(s *stream, kind BadKind, at time.Time, v float64) []byte {
	c := s.ch
	b := make([]byte, 0, payloadCap)
	switch kind {
	case "":
		return s.appendGood(b, v, at, s.seq, c.unitJSON)
	case BadNotJSON:
		if s.bad.IntN(2) == 0 {
			good := s.appendGood(b, v, at, s.seq, c.unitJSON)
			return good[:1+s.bad.IntN(len(good)-1)] // a proper prefix of an object is never JSON
		}
		b = append(b, s.group...)
		b = append(b, ' ')
		b = appendValue(b, v, c.resolution)
		b = append(b, ' ')
		return append(b, c.unit...)
	case BadNotANumber:
		var tok []byte
		switch s.bad.IntN(4) {
		case 0:
			tok = []byte(`"ERR"`)
		case 1:
			tok = []byte(`null`)
		case 2:
			text := appendValue(nil, v, c.resolution)
			text = append(text, ' ')
			tok = appendJSONString(nil, string(append(text, c.unit...)))
		default:
			text := appendValue(nil, v, c.resolution)
			if i := bytes.IndexByte(text, '.'); i >= 0 {
				text[i] = ','
			} else {
				text = append(text, ",0"...)
			}
			tok = append(append([]byte{'"'}, text...), '"')
		}
		return s.appendObject(b, tok, at, s.seq, c.unitJSON)
	case BadNaN:
		return s.appendObject(b, []byte("NaN"), at, s.seq, c.unitJSON)
	case BadOutOfRange:
		width := c.hi - c.lo
		beyond := float64(width * (0.1 + 0.9*s.bad.Float64()))
		w := c.hi + beyond
		if s.bad.IntN(2) == 0 {
			w = c.lo - beyond
		}
		return s.appendGood(b, w, at, s.seq, c.unitJSON)
	case BadWrongUnit:
		return s.appendGood(b, v, at, s.seq, c.wrongJSON)
	case BadFromFuture:
		return s.appendGood(b, v, at.Add(FutureOffset), s.seq, c.unitJSON)
	case BadDuplicateID:
		return s.appendGood(b, s.lastV, s.lastT, s.lastSeq, c.unitJSON)
	}
	panic("plant: unknown bad kind " + string(kind))
}

// appendGood appends a payload with value v written in the stream's value
// format.
func (s *stream) appendGood(b []byte, v float64, at time.Time, seq uint64, unitJSON string) []byte {
	b = append(b, `{"value":`...)
	if s.ch.vf == ValueNumber {
		b = appendValue(b, v, s.ch.resolution)
	} else {
		b = append(b, '"')
		b = appendValue(b, v, s.ch.resolution)
		b = append(b, '"')
	}
	return s.appendRest(b, at, seq, unitJSON)
}

// appendObject appends a payload whose value is the JSON token tok.
func (s *stream) appendObject(b, tok []byte, at time.Time, seq uint64, unitJSON string) []byte {
	b = append(b, `{"value":`...)
	b = append(b, tok...)
	return s.appendRest(b, at, seq, unitJSON)
}

// appendRest appends the time, id and unit fields and closes the object.
func (s *stream) appendRest(b []byte, at time.Time, seq uint64, unitJSON string) []byte {
	b = append(b, `,"time":`...)
	if s.ch.tf == TimeUnixMilli {
		b = strconv.AppendInt(b, at.UnixMilli(), 10)
	} else {
		b = append(b, '"')
		b = s.clock.appendTime(b, at)
		b = append(b, '"')
	}
	b = append(b, `,"id":"`...)
	b = append(b, s.idPrefix...)
	b = appendSeq(b, seq)
	b = append(b, `","unit":`...)
	b = append(b, unitJSON...)
	return append(b, '}')
}

// appendValue appends v with exactly resolution decimal places, rounded to
// nearest; a negative zero is written without its sign.
func appendValue(b []byte, v float64, resolution int) []byte {
	n := len(b)
	b = strconv.AppendFloat(b, v, 'f', resolution, 64)
	if b[n] == '-' && zeroText(b[n+1:]) {
		b = append(b[:n], b[n+1:]...)
	}
	return b
}

// zeroText reports whether t holds only zeros and a decimal point.
func zeroText(t []byte) bool {
	for _, c := range t {
		if c != '0' && c != '.' {
			return false
		}
	}
	return true
}

// appendSeq appends seq with at least six digits, zero-padded.
func appendSeq(b []byte, seq uint64) []byte {
	var buf [20]byte
	d := strconv.AppendUint(buf[:0], seq, 10)
	for i := len(d); i < 6; i++ {
		b = append(b, '0')
	}
	return append(b, d...)
}

// appendJSONString appends s as a JSON string, escaping quotes, backslashes,
// control characters and invalid UTF-8 (as U+FFFD).
func appendJSONString(b []byte, s string) []byte {
	const hex = "0123456789abcdef"
	b = append(b, '"')
	for i := 0; i < len(s); {
		c := s[i]
		switch {
		case c == '"' || c == '\\':
			b = append(b, '\\', c)
			i++
		case c < 0x20:
			b = append(b, '\\', 'u', '0', '0', hex[c>>4], hex[c&0xf])
			i++
		case c < utf8.RuneSelf:
			b = append(b, c)
			i++
		default:
			r, size := utf8.DecodeRuneInString(s[i:])
			if r == utf8.RuneError && size == 1 {
				b = append(b, `\ufffd`...)
			} else {
				b = append(b, s[i:i+size]...)
			}
			i += size
		}
	}
	return append(b, '"')
}

// secondCache keeps the RFC 3339 text of the last whole second formatted:
// messages come in time order, many to a second, so formatting a time is
// mostly appending its milliseconds.
type secondCache struct {
	sec  int64
	text []byte // "2026-12-01T06:00:00"
}

// appendTime appends t in UTC with milliseconds, "2026-12-01T06:00:00.123Z",
// as t.UTC().AppendFormat(b, "2006-01-02T15:04:05.000Z07:00") does.
func (c *secondCache) appendTime(b []byte, t time.Time) []byte {
	if sec := t.Unix(); sec != c.sec || c.text == nil {
		c.sec = sec
		c.text = t.UTC().AppendFormat(c.text[:0], "2006-01-02T15:04:05")
	}
	b = append(b, c.text...)
	ms := t.Nanosecond() / 1e6
	return append(b, '.', byte('0'+ms/100), byte('0'+ms/10%10), byte('0'+ms%10), 'Z')
}
