package ingest

import (
	"bytes"
	"errors"
	"fmt"
	"strconv"
	"time"
	"unicode/utf16"
	"unicode/utf8"
)

// Limits of Decoder.Decode. A message over one of them is refused whole with
// an error that wraps ErrLimit.
const (
	// MaxPayloads is the most measurements one message may carry.
	MaxPayloads = 10000
	// MaxDepth is the deepest nesting of JSON objects and arrays in a
	// message, counting the outermost one as 1.
	MaxDepth = 64
)

// Sentinel errors wrapped by *PayloadError. ReasonOf maps each to a Reason.
var (
	// ErrMalformed: the message is not JSON (nor a bare number), or is not
	// one of the accepted shapes. Reason not_parseable.
	ErrMalformed = errors.New("malformed message")
	// ErrLimit: the message is over MaxPayloads or MaxDepth. Reason
	// not_parseable.
	ErrLimit = errors.New("message over a decoder limit")
	// ErrNoValue: an object without a "value" field. Reason not_parseable.
	ErrNoValue = errors.New("no value")
	// ErrNotNumber: a value that is true, false, null, an object or an
	// array. Reason not_a_number. (A value string that is not a decimal is
	// found later, by Validator.Check, as stats.ErrSyntax.)
	ErrNotNumber = errors.New("value is not a number")
	// ErrBadTime: a "time" that is neither RFC 3339 nor Unix milliseconds.
	// Reason not_parseable.
	ErrBadTime = errors.New("bad time")
	// ErrBadField: an "id", "unit", "group" or "characteristic" of the
	// wrong JSON type, or a known field given twice. Reason not_parseable.
	ErrBadField = errors.New("bad field")
)

// PayloadError reports a message, or one measurement in it, that cannot be
// used: where it is (a 0-based byte offset in the message) and what is wrong.
// Its message is one line, e.g.
//
//	byte 11: value is null; send the measurement as a number such as 500.12, or leave the message out
type PayloadError struct {
	Offset int    // 0-based byte offset in the message
	Msg    string // what is wrong and what to do
	Err    error  // one of the sentinels above, for errors.Is
}

func (e *PayloadError) Error() string { return "byte " + strconv.Itoa(e.Offset) + ": " + e.Msg }

// Unwrap returns the sentinel error.
func (e *PayloadError) Unwrap() error { return e.Err }

// Payload is one measurement as a message carries it, before validation.
//
// The byte slices are views into the message, or into the Decoder's scratch
// buffer for JSON strings with escapes; they are valid until the message
// buffer is reused or the Decoder decodes the next message, whichever comes
// first. Copy what must be kept. An absent field is nil or empty.
type Payload struct {
	// Value is the decimal text of the measurement, exactly as sent: a JSON
	// number, or the contents of a JSON string with surrounding white space
	// removed. It is not checked here: Validator.Check parses it.
	Value []byte
	// ID is the measurement's id ("id", a string or a number's text), for
	// duplicate detection.
	ID []byte
	// Unit is the "unit" string.
	Unit []byte
	// Group and Characteristic are the "group" and "characteristic" fields
	// (a string, or a number's text such as 3 for head 3).
	Group, Characteristic []byte
	// HasTime reports a "time" field; Time is then its instant, in UTC.
	HasTime bool
	Time    time.Time
	// Offset is the 0-based byte offset of the measurement in the message.
	Offset int
	// Err is non-nil when the measurement is well-formed JSON but not a
	// usable measurement (no value, a value that is null, a time that is
	// not a time …). It is a *PayloadError; Validator.Check rejects such a
	// payload with the Reason that ReasonOf gives for Err.
	Err error
}

// Decoder decodes measurement messages. The zero value is ready to use.
//
// A Decoder keeps the payloads it returns and a scratch buffer for
// unescaped JSON strings, and reuses both, so that decoding does not
// allocate once they have grown to the size of the messages seen. A Decoder
// is not safe for concurrent use: give each goroutine its own.
type Decoder struct {
	payloads []Payload
	scratch  []byte
}

// Decode decodes one message into its measurements. Accepted shapes:
//
//   - a JSON object {"value": …, "time": …, "id": …, "unit": …, "group": …,
//     "characteristic": …}, in any field order, where only "value" is
//     required. The value is a JSON number or a string holding a decimal
//     ("500.12"); the time an RFC 3339 string ("2026-03-01T08:00:00.250+01:00",
//     fractional seconds to the nanosecond, further digits cut off) or Unix
//     milliseconds as a number or a numeric string (1772352000250, or with
//     decimals for finer resolution). id, group and characteristic are
//     strings or numbers, unit is a string; null means absent. Field names
//     match without regard to ASCII case, as in encoding/json. Other fields
//     are skipped whatever they hold;
//   - a bare number (500.12) or string ("500.12"): a value without time,
//     id or unit;
//   - a JSON array of objects, numbers and strings like these (an empty
//     array carries no measurement and is not an error).
//
// Besides JSON, the bare words NaN, Infinity and -Infinity that some
// encoders write are read as values (Validator.Check rejects them as
// not_finite). Numbers otherwise follow the JSON grammar; a value string
// may hold any decimal text that stats.ParseDecimal reads ("+5", ".5").
//
// A message that is not well-formed, or is over MaxPayloads or MaxDepth,
// gives no payloads and a *PayloadError wrapping ErrMalformed or ErrLimit.
// Otherwise every measurement in it is returned, in order; one that is
// well-formed but unusable carries its error in Payload.Err, so that it can
// be counted on its own without losing the others.
//
// The returned slice and the views in it are valid until the next call of
// Decode (and while msg is not modified).
func (d *Decoder) Decode(msg []byte) ([]Payload, error) {
	clear(d.payloads) // drop the views into the previous message
	d.payloads = d.payloads[:0]
	d.scratch = d.scratch[:0]
	s := scanner{msg: msg, d: d}
	if err := s.message(); err != nil {
		clear(d.payloads)
		d.payloads = d.payloads[:0]
		return nil, err
	}
	return d.payloads, nil
}

// shapeHint ends the message of an error about the shape of a message.
const shapeHint = `; send {"value": 500.12, "time": "2026-03-01T08:00:00Z"}, a bare number, or an array of these`

// Fields of a measurement object, as bits of a seen-set.
const (
	fieldUnknown = iota
	fieldValue
	fieldTime
	fieldID
	fieldUnit
	fieldGroup
	fieldCharacteristic
)

// fieldNames holds the JSON names of the fields, by field number.
var fieldNames = [...]string{"", "value", "time", "id", "unit", "group", "characteristic"}

// Kinds of bare JSON words.
const (
	wordLiteral   = iota // true, false, null
	wordNumber           // a JSON number
	wordNonFinite        // NaN, Infinity, -Infinity
)

// scanner reads one message. Its methods leave i after what they read.
type scanner struct {
	msg []byte
	i   int
	d   *Decoder
}

func (s *scanner) peek() byte {
	if s.i < len(s.msg) {
		return s.msg[s.i]
	}
	return 0
}

// ws skips JSON white space.
func (s *scanner) ws() {
	msg, i := s.msg, s.i
	for i < len(msg) && (msg[i] == ' ' || msg[i] == '\n' || msg[i] == '\t' || msg[i] == '\r') {
		i++
	}
	s.i = i
}

func (s *scanner) fail(at int, err error, msg string) error {
	return &PayloadError{Offset: at, Msg: msg, Err: err}
}

// unexpected reports that the byte at s.i is not what was expected.
func (s *scanner) unexpected(expected string) error {
	return s.fail(s.i, ErrMalformed, fmt.Sprintf("expected %s, found %s%s", expected, s.describe(s.i), shapeHint))
}

// describe names the byte at i for a message.
func (s *scanner) describe(i int) string {
	if i >= len(s.msg) {
		return "the end of the message"
	}
	if c := s.msg[i]; c >= 0x20 && c < 0x7f {
		return strconv.QuoteRune(rune(c))
	}
	return fmt.Sprintf("byte 0x%02x", s.msg[i])
}

// message reads a whole message.
func (s *scanner) message() error {
	s.ws()
	if s.i == len(s.msg) {
		return s.fail(s.i, ErrMalformed, "empty message"+shapeHint)
	}
	var err error
	if s.peek() == '[' {
		err = s.array()
	} else {
		err = s.element(1)
	}
	if err != nil {
		return err
	}
	s.ws()
	if s.i != len(s.msg) {
		return s.fail(s.i, ErrMalformed, fmt.Sprintf(
			"unexpected %s after the end of the JSON value; send one object, number or array per message", s.describe(s.i)))
	}
	return nil
}

// array reads the outermost array of measurements.
func (s *scanner) array() error {
	s.i++
	s.ws()
	if s.peek() == ']' {
		s.i++
		return nil
	}
	for {
		s.ws()
		if len(s.d.payloads) == MaxPayloads {
			return s.fail(s.i, ErrLimit, fmt.Sprintf(
				"more than %d measurements in one message; split the batch into smaller messages", MaxPayloads))
		}
		if err := s.element(2); err != nil {
			return err
		}
		s.ws()
		switch s.peek() {
		case ',':
			s.i++
		case ']':
			s.i++
			return nil
		default:
			return s.unexpected("',' or ']' after an array element")
		}
	}
}

// element reads one measurement at nesting depth depth and appends it.
func (s *scanner) element(depth int) error {
	p := Payload{Offset: s.i}
	switch s.peek() {
	case '{':
		if err := s.object(&p, depth); err != nil {
			return err
		}
	case '[':
		if err := s.skip(depth); err != nil {
			return err
		}
		p.Err = s.fail(p.Offset, ErrMalformed,
			"an array inside the array of measurements; send a flat array of objects or numbers")
	case '"':
		v, err := s.str()
		if err != nil {
			return err
		}
		p.Value = bytes.TrimSpace(v)
	default:
		w, kind, err := s.word()
		if err != nil {
			return err
		}
		if kind == wordLiteral {
			p.Err = s.fail(p.Offset, ErrNotNumber, fmt.Sprintf(
				"the measurement is %s; send a number such as 500.12", w))
		} else {
			p.Value = w
		}
	}
	s.d.payloads = append(s.d.payloads, p)
	return nil
}

// object reads a measurement object into p.
func (s *scanner) object(p *Payload, depth int) error {
	if depth > MaxDepth {
		return s.tooDeep()
	}
	s.i++
	var seen uint8
	s.ws()
	if s.peek() == '}' {
		s.i++
	} else {
		for done := false; !done; {
			s.ws()
			if s.peek() != '"' {
				return s.unexpected("a field name in double quotes")
			}
			keyAt := s.i
			raw, esc, err := s.rawString()
			if err != nil {
				return err
			}
			s.ws()
			if s.peek() != ':' {
				return s.unexpected("':' after the field name")
			}
			s.i++
			s.ws()
			f := matchField(raw, esc)
			switch {
			case f == fieldUnknown:
				err = s.skip(depth + 1)
			case seen&(1<<f) != 0:
				setErr(p, s.fail(keyAt, ErrBadField, fmt.Sprintf(
					"field %q appears twice in one measurement; send it once", fieldNames[f])))
				err = s.skip(depth + 1)
			default:
				seen |= 1 << f
				err = s.field(p, f, depth+1)
			}
			if err != nil {
				return err
			}
			s.ws()
			switch s.peek() {
			case ',':
				s.i++
			case '}':
				s.i++
				done = true
			default:
				return s.unexpected("',' or '}' after a field")
			}
		}
	}
	if seen&(1<<fieldValue) == 0 {
		setErr(p, s.fail(p.Offset, ErrNoValue,
			`the object has no "value" field; add the measurement, e.g. {"value": 500.12}`))
	}
	return nil
}

// setErr records err as p's error unless it already has one.
func setErr(p *Payload, err error) {
	if p.Err == nil {
		p.Err = err
	}
}

// field reads the value of the known field f into p.
func (s *scanner) field(p *Payload, f int, depth int) error {
	at := s.i
	name := fieldNames[f]
	c := s.peek()
	if c == '{' || c == '[' {
		if err := s.skip(depth); err != nil {
			return err
		}
		kind := "an object"
		if c == '[' {
			kind = "an array"
		}
		switch f {
		case fieldValue:
			setErr(p, s.fail(at, ErrNotNumber, fmt.Sprintf(
				"value is %s; send the measurement as a number such as 500.12", kind)))
		case fieldTime:
			setErr(p, s.fail(at, ErrBadTime, fmt.Sprintf("time is %s%s", kind, timeHint)))
		default:
			setErr(p, s.fail(at, ErrBadField, fmt.Sprintf("field %q is %s; %s", name, kind, fieldHint(f))))
		}
		return nil
	}

	var text []byte
	kind := -1 // a string
	if c == '"' {
		v, err := s.str()
		if err != nil {
			return err
		}
		text = v
	} else {
		w, k, err := s.word()
		if err != nil {
			return err
		}
		text, kind = w, k
	}
	if kind == wordLiteral && string(text) == "null" && f != fieldValue {
		return nil // an optional field left out
	}
	switch f {
	case fieldValue:
		if kind == wordLiteral {
			setErr(p, s.fail(at, ErrNotNumber, fmt.Sprintf(
				"value is %s; send the measurement as a number such as 500.12, or leave the message out", text)))
			return nil
		}
		if kind < 0 {
			text = bytes.TrimSpace(text)
		}
		p.Value = text
	case fieldTime:
		var t time.Time
		var problem string
		switch {
		case kind < 0 && len(text) > 4 && text[4] == '-':
			t, problem = parseRFC3339(text)
		case kind < 0 || kind == wordNumber:
			t, problem = parseUnixMillis(text)
		default:
			problem = "is " + string(text)
		}
		if problem != "" {
			setErr(p, s.fail(at, ErrBadTime, fmt.Sprintf("time %s %s%s", strconv.Quote(short(string(text))), problem, timeHint)))
			return nil
		}
		p.HasTime, p.Time = true, t
	case fieldUnit:
		if kind >= 0 {
			setErr(p, s.fail(at, ErrBadField, fmt.Sprintf("field %q is %s; %s", name, text, fieldHint(f))))
			return nil
		}
		p.Unit = text
	default: // id, group, characteristic
		if kind == wordLiteral || kind == wordNonFinite {
			setErr(p, s.fail(at, ErrBadField, fmt.Sprintf("field %q is %s; %s", name, text, fieldHint(f))))
			return nil
		}
		switch f {
		case fieldID:
			p.ID = text
		case fieldGroup:
			p.Group = text
		case fieldCharacteristic:
			p.Characteristic = text
		}
	}
	return nil
}

// timeHint ends the message of an error about a time.
const timeHint = `; send RFC 3339 such as "2026-03-01T08:00:00.250Z" or Unix milliseconds such as 1772352000250`

// fieldHint says what the field f should hold.
func fieldHint(f int) string {
	if f == fieldUnit {
		return `send the unit as a string such as "g"`
	}
	return `send it as a string such as "L3" or a number, or leave it out`
}

// matchField returns the field that the raw key (the text between the
// quotes, with escapes if esc) names, ignoring ASCII case.
func matchField(raw []byte, esc bool) int {
	if esc {
		// Only rare keys have escapes; unescape into a small buffer.
		var buf [32]byte
		if len(raw) > 6*len("characteristic") {
			return fieldUnknown
		}
		raw = unescape(buf[:0], raw)
	}
	for f := fieldValue; f < len(fieldNames); f++ {
		if asciiFold(raw, fieldNames[f]) {
			return f
		}
	}
	return fieldUnknown
}

// asciiFold reports whether b equals the lower-case ASCII word w, ignoring
// ASCII case.
func asciiFold(b []byte, w string) bool {
	if len(b) != len(w) {
		return false
	}
	for i := range len(w) {
		c := b[i]
		if 'A' <= c && c <= 'Z' {
			c += 'a' - 'A'
		}
		if c != w[i] {
			return false
		}
	}
	return true
}

func (s *scanner) tooDeep() error {
	return s.fail(s.i, ErrLimit, fmt.Sprintf(
		"objects and arrays nested deeper than %d levels; flatten the message", MaxDepth))
}

// skip reads and ignores one JSON value at nesting depth depth.
func (s *scanner) skip(depth int) error {
	switch s.peek() {
	case '{', '[':
		if depth > MaxDepth {
			return s.tooDeep()
		}
		obj := s.peek() == '{'
		end := byte(']')
		if obj {
			end = '}'
		}
		s.i++
		s.ws()
		if s.peek() == end {
			s.i++
			return nil
		}
		for {
			s.ws()
			if obj {
				if s.peek() != '"' {
					return s.unexpected("a field name in double quotes")
				}
				if _, _, err := s.rawString(); err != nil {
					return err
				}
				s.ws()
				if s.peek() != ':' {
					return s.unexpected("':' after the field name")
				}
				s.i++
				s.ws()
			}
			if err := s.skip(depth + 1); err != nil {
				return err
			}
			s.ws()
			switch s.peek() {
			case ',':
				s.i++
			case end:
				s.i++
				return nil
			default:
				if obj {
					return s.unexpected("',' or '}' after a field")
				}
				return s.unexpected("',' or ']' after an array element")
			}
		}
	case '"':
		_, _, err := s.rawString()
		return err
	default:
		_, _, err := s.word()
		return err
	}
}

// isWordByte reports the bytes that bare JSON words (numbers, literals)
// are made of, as far as the scanner reads them before judging the word.
func isWordByte(c byte) bool {
	return '0' <= c && c <= '9' || 'a' <= c && c <= 'z' || 'A' <= c && c <= 'Z' || c == '.' || c == '+' || c == '-'
}

// word reads a bare word: true, false, null, a JSON number, or NaN,
// Infinity, -Infinity.
func (s *scanner) word() ([]byte, int, error) {
	start := s.i
	for s.i < len(s.msg) && isWordByte(s.msg[s.i]) {
		s.i++
	}
	w := s.msg[start:s.i]
	switch {
	case len(w) == 0:
		return nil, 0, s.unexpected("a JSON value")
	case string(w) == "true" || string(w) == "false" || string(w) == "null":
		return w, wordLiteral, nil
	case isJSONNumber(w):
		return w, wordNumber, nil
	case string(w) == "NaN" || string(w) == "Infinity" || string(w) == "-Infinity":
		return w, wordNonFinite, nil
	}
	msg := fmt.Sprintf("%s is not a JSON value", strconv.Quote(short(string(w))))
	switch {
	case w[0] == '+' || w[0] == '.' || w[len(w)-1] == '.' || w[0] == '0' || (w[0] == '-' && len(w) > 1 && (w[1] == '0' || w[1] == '.')):
		msg += "; write JSON numbers without a leading '+' or zeros and with digits on both sides of '.', or send the value as a string"
	default:
		msg += "; put text in double quotes"
	}
	return nil, 0, s.fail(start, ErrMalformed, msg)
}

// isJSONNumber reports whether w is a number in the JSON grammar:
// -?(0|[1-9][0-9]*)(\.[0-9]+)?([eE][+-]?[0-9]+)?
func isJSONNumber(w []byte) bool {
	i, n := 0, len(w)
	if i < n && w[i] == '-' {
		i++
	}
	switch {
	case i < n && w[i] == '0':
		i++
	case i < n && '1' <= w[i] && w[i] <= '9':
		for i < n && isDigit(w[i]) {
			i++
		}
	default:
		return false
	}
	if i < n && w[i] == '.' {
		i++
		if i == n || !isDigit(w[i]) {
			return false
		}
		for i < n && isDigit(w[i]) {
			i++
		}
	}
	if i < n && (w[i] == 'e' || w[i] == 'E') {
		i++
		if i < n && (w[i] == '+' || w[i] == '-') {
			i++
		}
		if i == n || !isDigit(w[i]) {
			return false
		}
		for i < n && isDigit(w[i]) {
			i++
		}
	}
	return i == n
}

func isDigit(c byte) bool { return '0' <= c && c <= '9' }

// rawString reads a JSON string and returns the bytes between its quotes
// and whether they contain escapes. The string must be valid UTF-8 without
// control characters, with valid escapes.
func (s *scanner) rawString() (raw []byte, esc bool, err error) {
	start := s.i
	s.i++
	for s.i < len(s.msg) {
		// Plain ASCII runs first, without the checks below.
		msg, i := s.msg, s.i
		for i < len(msg) && msg[i] >= 0x20 && msg[i] != '"' && msg[i] != '\\' && msg[i] < utf8.RuneSelf {
			i++
		}
		s.i = i
		if i == len(msg) {
			break
		}
		c := msg[i]
		switch {
		case c == '"':
			raw = s.msg[start+1 : s.i]
			s.i++
			return raw, esc, nil
		case c == '\\':
			esc = true
			if s.i+1 == len(s.msg) {
				s.i++
				continue // unterminated
			}
			switch s.msg[s.i+1] {
			case '"', '\\', '/', 'b', 'f', 'n', 'r', 't':
				s.i += 2
			case 'u':
				if s.i+6 > len(s.msg) || !isHex4(s.msg[s.i+2:s.i+6]) {
					return nil, false, s.fail(s.i, ErrMalformed, `\u in a string must be followed by four hexadecimal digits`)
				}
				s.i += 6
			default:
				return nil, false, s.fail(s.i, ErrMalformed, fmt.Sprintf(
					`invalid escape in a string: '\' followed by %s; use \\ for a backslash`, s.describe(s.i+1)))
			}
		case c < 0x20:
			return nil, false, s.fail(s.i, ErrMalformed, fmt.Sprintf(
				`control character 0x%02x in a string; escape it, e.g. as \u%04x`, c, c))
		default: // a multi-byte sequence
			r, size := utf8.DecodeRune(s.msg[s.i:])
			if r == utf8.RuneError && size == 1 {
				return nil, false, s.fail(s.i, ErrMalformed, "invalid UTF-8 in a string; send text in UTF-8")
			}
			s.i += size
		}
	}
	return nil, false, s.fail(start, ErrMalformed, "string without its closing '\"'")
}

// str reads a JSON string and returns its contents: a view into the message
// when it has no escapes, else its unescaped text in the Decoder's scratch
// buffer.
func (s *scanner) str() ([]byte, error) {
	raw, esc, err := s.rawString()
	if err != nil || !esc {
		return raw, err
	}
	// The scratch buffer only grows during one message: a reallocation
	// leaves earlier views pointing into the old array, which is not
	// written again.
	n := len(s.d.scratch)
	s.d.scratch = unescape(s.d.scratch, raw)
	return s.d.scratch[n:len(s.d.scratch):len(s.d.scratch)], nil
}

func isHex4(b []byte) bool {
	for _, c := range b[:4] {
		if !isDigit(c) && !('a' <= c && c <= 'f') && !('A' <= c && c <= 'F') {
			return false
		}
	}
	return true
}

func hex4(b []byte) rune {
	var r rune
	for _, c := range b[:4] {
		switch {
		case c <= '9':
			c -= '0'
		case c >= 'a':
			c -= 'a' - 10
		default:
			c -= 'A' - 10
		}
		r = r<<4 | rune(c)
	}
	return r
}

// unescape appends the unescaped text of raw, a string body that
// rawString accepted, to dst. A lone UTF-16 surrogate becomes U+FFFD, as in
// encoding/json.
func unescape(dst, raw []byte) []byte {
	for i := 0; i < len(raw); {
		c := raw[i]
		if c != '\\' {
			dst = append(dst, c)
			i++
			continue
		}
		switch raw[i+1] {
		case 'b':
			dst = append(dst, '\b')
		case 'f':
			dst = append(dst, '\f')
		case 'n':
			dst = append(dst, '\n')
		case 'r':
			dst = append(dst, '\r')
		case 't':
			dst = append(dst, '\t')
		case 'u':
			r := hex4(raw[i+2:])
			i += 6
			if utf16.IsSurrogate(r) {
				r2 := utf8.RuneError
				if i+6 <= len(raw) && raw[i] == '\\' && raw[i+1] == 'u' {
					if r2 = utf16.DecodeRune(r, hex4(raw[i+2:])); r2 != utf8.RuneError {
						i += 6
					}
				}
				r = r2
			}
			dst = utf8.AppendRune(dst, r)
			continue
		default: // '"', '\\', '/'
			dst = append(dst, raw[i+1])
		}
		i += 2
	}
	return dst
}

// parseRFC3339 parses an RFC 3339 date-time: YYYY-MM-DDTHH:MM:SS, optional
// fractional seconds (any number of digits; those past nanoseconds are cut
// off, as time.Parse does), and Z or a ±HH:MM offset. 'T' and 'Z' may be
// lower case, and 'T' a space (RFC 3339, section 5.6). Second 60 (a leap
// second) is refused, as by time.Parse. It returns the instant in UTC, or a
// description of the problem. It does not allocate.
func parseRFC3339(b []byte) (time.Time, string) {
	if len(b) < len("2006-01-02T15:04:05Z") {
		return time.Time{}, "is too short for RFC 3339"
	}
	num := func(i, n int) int {
		v := 0
		for _, c := range b[i : i+n] {
			if !isDigit(c) {
				return -1
			}
			v = v*10 + int(c-'0')
		}
		return v
	}
	year, month, day := num(0, 4), num(5, 2), num(8, 2)
	hour, minute, sec := num(11, 2), num(14, 2), num(17, 2)
	if year < 0 || month < 0 || day < 0 || hour < 0 || minute < 0 || sec < 0 ||
		b[4] != '-' || b[7] != '-' || b[13] != ':' || b[16] != ':' ||
		(b[10] != 'T' && b[10] != 't' && b[10] != ' ') {
		return time.Time{}, "is not in RFC 3339 layout YYYY-MM-DDTHH:MM:SS"
	}
	switch {
	case month < 1 || month > 12:
		return time.Time{}, "has a month out of range"
	case day < 1 || day > daysIn(month, year):
		return time.Time{}, "has a day out of range for its month"
	case hour > 23:
		return time.Time{}, "has an hour out of range"
	case minute > 59:
		return time.Time{}, "has a minute out of range"
	case sec > 59:
		return time.Time{}, "has a second out of range (leap seconds are not accepted)"
	}
	i := 19
	var nsec int64
	if b[i] == '.' {
		i++
		start := i
		scale := int64(1e8)
		for ; i < len(b) && isDigit(b[i]); i++ {
			nsec += int64(b[i]-'0') * scale
			scale /= 10
		}
		if i == start {
			return time.Time{}, "has no digits after the decimal point"
		}
	}
	var offset int64
	switch {
	case i == len(b):
		return time.Time{}, "has no time zone offset (Z or ±HH:MM)"
	case b[i] == 'Z' || b[i] == 'z':
		i++
	case b[i] == '+' || b[i] == '-':
		if len(b)-i < 6 || b[i+3] != ':' {
			return time.Time{}, "has a time zone offset not in the form ±HH:MM"
		}
		oh, om := num(i+1, 2), num(i+4, 2)
		if oh < 0 || om < 0 {
			return time.Time{}, "has a time zone offset not in the form ±HH:MM"
		}
		if oh > 23 || om > 59 {
			return time.Time{}, "has a time zone offset out of range"
		}
		offset = int64(oh*3600 + om*60)
		if b[i] == '-' {
			offset = -offset
		}
		i += 6
	default:
		return time.Time{}, "has no time zone offset (Z or ±HH:MM)"
	}
	if i != len(b) {
		return time.Time{}, "has extra characters after the time zone offset"
	}
	unix := daysFromCivil(year, month, day)*86400 + int64(hour*3600+minute*60+sec) - offset
	return time.Unix(unix, nsec).UTC(), ""
}

// daysIn returns the number of days of month m (1–12) in year y of the
// proleptic Gregorian calendar.
func daysIn(m, y int) int {
	switch m {
	case 2:
		if y%4 == 0 && (y%100 != 0 || y%400 == 0) {
			return 29
		}
		return 28
	case 4, 6, 9, 11:
		return 30
	}
	return 31
}

// daysFromCivil returns the number of days from 1970-01-01 to y-m-d in the
// proleptic Gregorian calendar (H. Hinnant, "chrono-Compatible Low-Level
// Date Algorithms", days_from_civil: years start in March, so that the leap
// day comes last, and eras of 400 years repeat exactly).
func daysFromCivil(y, m, d int) int64 {
	if m <= 2 {
		y--
	}
	era := y / 400
	if y < 0 && y%400 != 0 {
		era--
	}
	yoe := y - era*400                     // [0, 399]
	doy := (153*((m+9)%12)+2)/5 + d - 1    // [0, 365], from March 1
	doe := yoe*365 + yoe/4 - yoe/100 + doy // [0, 146096]
	return int64(era)*146097 + int64(doe) - 719468
}

// maxSecondsPow bounds Unix milliseconds: |t| < 10^18 ms = 10^15 s, some
// 31 million years either side of 1970.
const maxSecondsPow = 15

// pow10 holds 10^k for k = 0 … 18.
var pow10 = [...]int64{1, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9,
	1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18}

// parseUnixMillis parses Unix milliseconds: an optional sign, digits with
// an optional '.', and an optional exponent (e.g. 1772352000250,
// 1772352000250.5, 1.77235200025e12). Digits finer than a nanosecond are
// cut off. It returns the instant in UTC, or a description of the problem.
// It does not allocate.
func parseUnixMillis(b []byte) (time.Time, string) {
	const notMillis = "is neither RFC 3339 nor a number of Unix milliseconds"
	i, n := 0, len(b)
	neg := false
	if i < n && (b[i] == '-' || b[i] == '+') {
		neg = b[i] == '-'
		i++
	}
	intStart := i
	for i < n && isDigit(b[i]) {
		i++
	}
	intEnd := i
	fracStart, fracEnd := i, i
	if i < n && b[i] == '.' {
		i++
		fracStart = i
		for i < n && isDigit(b[i]) {
			i++
		}
		fracEnd = i
	}
	if intEnd == intStart && fracEnd == fracStart {
		return time.Time{}, notMillis
	}
	exp := 0
	if i < n && (b[i] == 'e' || b[i] == 'E') {
		i++
		eneg := false
		if i < n && (b[i] == '+' || b[i] == '-') {
			eneg = b[i] == '-'
			i++
		}
		if i == n {
			return time.Time{}, notMillis
		}
		for ; i < n && isDigit(b[i]); i++ {
			if exp < 1<<20 {
				exp = exp*10 + int(b[i]-'0')
			}
		}
		if eneg {
			exp = -exp
		}
	}
	if i != n {
		return time.Time{}, notMillis
	}
	// A digit worth d·10^k ms adds d·10^(k−3) s when k ≥ 3 and
	// d·10^(k+6) ns when −6 ≤ k < 3; finer digits are cut off.
	var sec, nsec int64
	add := func(c byte, k int) bool {
		d := int64(c - '0')
		switch {
		case d == 0 || k < -6:
		case k >= 3+maxSecondsPow:
			return false
		case k >= 3:
			sec += d * pow10[k-3]
		default:
			nsec += d * pow10[k+6]
		}
		return true
	}
	ok := true
	for j := intStart; j < intEnd && ok; j++ {
		ok = add(b[j], intEnd-1-j+exp)
	}
	for j := fracStart; j < fracEnd && ok; j++ {
		ok = add(b[j], exp-(j-fracStart+1))
	}
	if !ok {
		return time.Time{}, "is more than 10^18 milliseconds from 1970; send Unix milliseconds (not microseconds or nanoseconds)"
	}
	if neg {
		sec, nsec = -sec, -nsec
	}
	return time.Unix(sec, nsec).UTC(), ""
}
