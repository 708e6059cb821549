package ingest

import (
	"bytes"
	"encoding/json"
	"errors"
	"strings"
	"testing"
	"unicode/utf8"
	"unsafe"

	"github.com/lockstep-project/lockstep/stats"
)

// within reports whether view lies inside buf (an empty view always does).
func within(view, buf []byte) bool {
	if len(view) == 0 {
		return true
	}
	if len(buf) == 0 {
		return false
	}
	v := uintptr(unsafe.Pointer(unsafe.SliceData(view)))
	b := uintptr(unsafe.Pointer(unsafe.SliceData(buf)))
	return v >= b && v+uintptr(len(view)) <= b+uintptr(cap(buf))
}

// FuzzDecodePayload decodes arbitrary bytes. Decode must not panic; an
// error must be a one-line *PayloadError that maps to a reason, with no
// payloads; every payload's views must lie within the message or the
// decoder's scratch buffer, its value text must parse with
// stats.ParseDecimal or fail with an error that maps to a value reason, and
// its Err must map to a reason. A message that is JSON must not be refused
// as a whole (short of the decoder's limits), and one that is accepted must
// be JSON unless it uses the NaN or Infinity words; for JSON, the
// payload count and values must agree with encoding/json.
func FuzzDecodePayload(f *testing.F) {
	for _, msg := range benchMessages() {
		f.Add(msg)
	}
	for _, seed := range []string{
		`{"value": 500.12, "time": "2026-03-01T08:00:00Z", "id": 7, "unit": "g", "group": "L3", "characteristic": "fill-weight"}`,
		`{"time": 1772352000250.5, "value": "1e3", "x": [1, {"y": null}]}`,
		`[1, "2", {"value": NaN}, -Infinity, [3], null, {}]`,
		`{"value": "12,5", "id": "a\"\u00e9\ud800"}`,
		`{"value": 1, "value": 2}`,
		`{"value": 1, "time": "2026-02-30T08:00:00+01:00"}`,
		`{"value": 1e400}`,
		`{"value": 01}`,
		"\"\xff\"",
		"\"\\\r\"",
		` [ ] `,
		``,
	} {
		f.Add([]byte(seed))
	}
	var d Decoder
	f.Fuzz(func(t *testing.T, msg []byte) {
		orig := bytes.Clone(msg)
		ps, err := d.Decode(msg)
		if !bytes.Equal(msg, orig) {
			t.Fatal("Decode modified the message")
		}
		if err != nil {
			var pe *PayloadError
			if !errors.As(err, &pe) || ps != nil {
				t.Fatalf("error %v (%T) with %d payloads", err, err, len(ps))
			}
			if pe.Offset < 0 || pe.Offset > len(msg) {
				t.Fatalf("error offset %d outside the message of %d bytes", pe.Offset, len(msg))
			}
			if strings.ContainsAny(err.Error(), "\r\n") {
				t.Fatalf("message %q is not one line", err)
			}
			if ReasonOf(err) != ReasonNotParseable {
				t.Fatalf("error %v maps to %v", err, ReasonOf(err))
			}
			if json.Valid(msg) && utf8.Valid(msg) && !errors.Is(err, ErrLimit) {
				t.Fatalf("JSON message refused: %v", err)
			}
			return
		}
		if !json.Valid(msg) && !bytes.Contains(msg, []byte("NaN")) && !bytes.Contains(msg, []byte("Infinity")) {
			t.Fatalf("accepted a message that is not JSON: %q", msg)
		}
		for i, p := range ps {
			for _, view := range [][]byte{p.Value, p.ID, p.Unit, p.Group, p.Characteristic} {
				if !within(view, msg) && !within(view, d.scratch) {
					t.Fatalf("payload %d: view %q outside the message and the scratch buffer", i, view)
				}
			}
			if p.Offset < 0 || p.Offset >= len(msg) {
				t.Fatalf("payload %d: offset %d outside the message", i, p.Offset)
			}
			if p.Err != nil {
				var pe *PayloadError
				if !errors.As(p.Err, &pe) || ReasonOf(p.Err) == ReasonNone {
					t.Fatalf("payload %d: error %v (%T) maps to no reason", i, p.Err, p.Err)
				}
				continue
			}
			if _, err := stats.ParseDecimal(string(p.Value)); err != nil {
				switch ReasonOf(err) {
				case ReasonNotANumber, ReasonNotFinite, ReasonOutOfRange:
				default:
					t.Fatalf("payload %d: value %q: %v maps to %v", i, p.Value, err, ReasonOf(err))
				}
			}
		}
		if json.Valid(msg) {
			compareWithEncodingJSON(t, msg, ps)
		}
	})
}

// compareWithEncodingJSON checks the payloads of a JSON message against
// encoding/json: how many there are, and the value of those without error.
func compareWithEncodingJSON(t *testing.T, msg []byte, ps []Payload) {
	t.Helper()
	dec := json.NewDecoder(bytes.NewReader(msg))
	dec.UseNumber()
	var top any
	if err := dec.Decode(&top); err != nil {
		t.Fatalf("encoding/json: %v", err)
	}
	elems := []any{top}
	if a, ok := top.([]any); ok {
		elems = a
	}
	if len(elems) != len(ps) {
		t.Fatalf("%d payloads, encoding/json finds %d elements", len(ps), len(elems))
	}
	for i, e := range elems {
		p := ps[i]
		if p.Err != nil {
			continue
		}
		var v any = e
		if obj, ok := e.(map[string]any); ok {
			v = nil
			for k, x := range obj {
				if asciiFold([]byte(k), "value") {
					v = x
				}
			}
		}
		var want string
		switch v := v.(type) {
		case json.Number:
			want = string(v)
		case string:
			want = string(bytes.TrimSpace([]byte(v)))
		default:
			t.Fatalf("payload %d: value %q without error, encoding/json finds %v", i, p.Value, v)
		}
		// encoding/json replaces invalid UTF-8 and lone surrogates alike.
		if string(p.Value) != want && utf8.Valid(p.Value) {
			t.Fatalf("payload %d: value %q, encoding/json says %q", i, p.Value, want)
		}
	}
}
