package ingest

import (
	"encoding/json"
	"errors"
	"fmt"
	"math/rand/v2"
	"strings"
	"testing"
	"time"
)

// got is a Payload written out for comparison.
type got struct {
	value, id, unit, group, char string
	time                         string // RFC 3339 in UTC with nanoseconds, or "" for none
	err                          error  // sentinel of Payload.Err, or nil
}

func describePayloads(ps []Payload) []got {
	out := make([]got, len(ps))
	for i, p := range ps {
		g := got{value: string(p.Value), id: string(p.ID), unit: string(p.Unit),
			group: string(p.Group), char: string(p.Characteristic)}
		if p.HasTime {
			g.time = p.Time.Format(time.RFC3339Nano)
		}
		if p.Err != nil {
			var pe *PayloadError
			if !errors.As(p.Err, &pe) {
				g.err = fmt.Errorf("not a *PayloadError: %w", p.Err)
			} else {
				g.err = pe.Err
			}
		}
		out[i] = g
	}
	return out
}

func TestDecodeShapes(t *testing.T) {
	const t0 = "2026-03-01T08:00:00Z"
	tests := []struct {
		name string
		msg  string
		want []got
	}{
		{"object", `{"value": 500.12, "time": "2026-03-01T08:00:00Z"}`,
			[]got{{value: "500.12", time: t0}}},
		{"all fields any order and white space",
			"\r\n {\t\"time\" :1772352000000 ,\"unit\":\"g\",\n\"value\"\t:\t\"500.120\" , \"id\": 17,\"group\":\"L3\",\"characteristic\" : \"fill-weight\" }\n",
			[]got{{value: "500.120", id: "17", unit: "g", group: "L3", char: "fill-weight", time: t0}}},
		{"unknown fields of every kind",
			`{"meta": {"a": [1, {"b": null, "c": [[], {}]}], "d": "x\"}"}, "value": -0.5e-3, "flags": [true, false], "n": null, "e": 1E+2, "s": "\u00e9\ud83d\ude00"}`,
			[]got{{value: "-0.5e-3"}}},
		{"field names ignore ASCII case", `{"Value": 1, "TIME": "2026-03-01T09:00:00+01:00", "Group": 4}`,
			[]got{{value: "1", group: "4", time: t0}}},
		{"escaped field name", `{"val\u0075e": 2}`, []got{{value: "2"}}},
		{"escapes in kept strings", `{"value": "1.5", "id": "a\"b\\c\/d", "group": "L\u00e9 \ud83d\ude00", "unit": "\u00b0C"}`,
			[]got{{value: "1.5", id: `a"b\c/d`, group: "Lé 😀", unit: "°C"}}},
		{"lone surrogate becomes U+FFFD", `{"value": 1, "id": "x\ud800y"}`, []got{{value: "1", id: "x\uFFFDy"}}},
		{"escaped value string", `{"value": "500\u002e12"}`, []got{{value: "500.12"}}},
		{"value string trimmed", `{"value": "  500.12\t"}`, []got{{value: "500.12"}}},
		{"value string is any text", `{"value": "12,5"}`, []got{{value: "12,5"}}},
		{"nulls are absent", `{"value": 3, "time": null, "id": null, "unit": null, "group": null, "characteristic": null}`,
			[]got{{value: "3"}}},
		{"bare number", `500.12`, []got{{value: "500.12"}}},
		{"bare number with white space", " \n500.12\t", []got{{value: "500.12"}}},
		{"bare negative exponent", `-1.5E-7`, []got{{value: "-1.5E-7"}}},
		{"bare string", `"500.12"`, []got{{value: "500.12"}}},
		{"bare string with spaces", `" +500.12 "`, []got{{value: "+500.12"}}},
		{"bare NaN", `NaN`, []got{{value: "NaN"}}},
		{"bare -Infinity", `-Infinity`, []got{{value: "-Infinity"}}},
		{"array of objects", `[{"value": 1, "id": "a"}, {"value": 2, "id": "b"}]`,
			[]got{{value: "1", id: "a"}, {value: "2", id: "b"}}},
		{"array of numbers", `[ 1 , 2.5,"3" ]`, []got{{value: "1"}, {value: "2.5"}, {value: "3"}}},
		{"mixed array", `[500.1, {"value": "500.2", "group": "L1"}, "500.3"]`,
			[]got{{value: "500.1"}, {value: "500.2", group: "L1"}, {value: "500.3"}}},
		{"empty array", ` [ ] `, []got{}},
		{"unix milliseconds", `{"value": 1, "time": 1772352000250}`, []got{{value: "1", time: "2026-03-01T08:00:00.25Z"}}},
		{"unix milliseconds with decimals", `{"value": 1, "time": 1772352000250.000001}`,
			[]got{{value: "1", time: "2026-03-01T08:00:00.250000001Z"}}},
		{"unix milliseconds finer than a nanosecond cut off", `{"value": 1, "time": 1772352000250.0000019}`,
			[]got{{value: "1", time: "2026-03-01T08:00:00.250000001Z"}}},
		{"unix milliseconds with exponent", `{"value": 1, "time": 1.77235200025e12}`,
			[]got{{value: "1", time: "2026-03-01T08:00:00.25Z"}}},
		{"unix milliseconds as string", `{"value": 1, "time": "1772352000250"}`,
			[]got{{value: "1", time: "2026-03-01T08:00:00.25Z"}}},
		{"negative unix milliseconds", `{"value": 1, "time": -1500}`, []got{{value: "1", time: "1969-12-31T23:59:58.5Z"}}},
		{"RFC 3339 with offset and fraction", `{"value": 1, "time": "2026-03-01T02:30:00.123456789-05:30"}`,
			[]got{{value: "1", time: "2026-03-01T08:00:00.123456789Z"}}},

		// Well-formed, but unusable measurements: the error is theirs alone.
		{"value null", `{"value": null}`, []got{{err: ErrNotNumber}}},
		{"value true", `{"value": true, "id": "x"}`, []got{{id: "x", err: ErrNotNumber}}},
		{"value object", `{"value": {"v": 1}}`, []got{{err: ErrNotNumber}}},
		{"value array", `{"value": [1]}`, []got{{err: ErrNotNumber}}},
		{"bare null", `null`, []got{{err: ErrNotNumber}}},
		{"no value", `{"time": "2026-03-01T08:00:00Z"}`, []got{{time: t0, err: ErrNoValue}}},
		{"empty object", `{}`, []got{{err: ErrNoValue}}},
		{"value twice", `{"value": 1, "VALUE": 2}`, []got{{value: "1", err: ErrBadField}}},
		{"unit a number", `{"value": 1, "unit": 5}`, []got{{value: "1", err: ErrBadField}}},
		{"group a bool", `{"value": 1, "group": true}`, []got{{value: "1", err: ErrBadField}}},
		{"id an object", `{"value": 1, "id": {"n": 1}}`, []got{{value: "1", err: ErrBadField}}},
		{"group NaN", `{"value": 1, "group": NaN}`, []got{{value: "1", err: ErrBadField}}},
		{"time not a date", `{"value": 1, "time": "yesterday"}`, []got{{value: "1", err: ErrBadTime}}},
		{"time Feb 30", `{"value": 1, "time": "2026-02-30T08:00:00Z"}`, []got{{value: "1", err: ErrBadTime}}},
		{"time without zone", `{"value": 1, "time": "2026-03-01T08:00:00"}`, []got{{value: "1", err: ErrBadTime}}},
		{"time in nanoseconds", `{"value": 1, "time": 1772352000250000000000}`, []got{{value: "1", err: ErrBadTime}}},
		{"time true", `{"value": 1, "time": true}`, []got{{value: "1", err: ErrBadTime}}},
		{"time an array", `{"value": 1, "time": [2026, 3, 1]}`, []got{{value: "1", err: ErrBadTime}}},
		{"first error wins", `{"time": "x", "group": false}`, []got{{err: ErrBadTime}}},
		{"nested array element", `[1, [2], 3]`, []got{{value: "1"}, {err: ErrMalformed}, {value: "3"}}},
		{"null element", `[1, null]`, []got{{value: "1"}, {err: ErrNotNumber}}},
	}
	var d Decoder
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			ps, err := d.Decode([]byte(tt.msg))
			if err != nil {
				t.Fatalf("Decode(%q): %v", tt.msg, err)
			}
			gotPs := describePayloads(ps)
			if len(gotPs) != len(tt.want) {
				t.Fatalf("Decode(%q): %d payloads %+v, want %d %+v", tt.msg, len(gotPs), gotPs, len(tt.want), tt.want)
			}
			for i := range gotPs {
				g, w := gotPs[i], tt.want[i]
				if g.err != w.err {
					t.Errorf("payload %d: Err %v, want %v (%v)", i, g.err, w.err, ps[i].Err)
				}
				g.err, w.err = nil, nil
				if g != w {
					t.Errorf("payload %d:\n got %+v\nwant %+v", i, g, w)
				}
			}
		})
	}
}

func TestDecodeOffsets(t *testing.T) {
	var d Decoder
	ps, err := d.Decode([]byte(`[ 1, {"value": null} ]`))
	if err != nil {
		t.Fatal(err)
	}
	if ps[0].Offset != 2 || ps[1].Offset != 5 {
		t.Errorf("offsets %d, %d; want 2, 5", ps[0].Offset, ps[1].Offset)
	}
	var pe *PayloadError
	if !errors.As(ps[1].Err, &pe) || pe.Offset != 15 {
		t.Errorf("error %v: want offset 15, at the null", ps[1].Err)
	}
}

func TestDecodeMalformed(t *testing.T) {
	deep := strings.Repeat("[", MaxDepth) + strings.Repeat("]", MaxDepth)
	big := "[" + strings.Repeat("1,", MaxPayloads) + "1]"
	tests := []struct {
		name   string
		msg    string
		sent   error
		offset int
		text   string // in the message
	}{
		{"empty", ``, ErrMalformed, 0, "empty message"},
		{"white space only", " \n\t", ErrMalformed, 3, "empty message"},
		{"unclosed object", `{"value": 1`, ErrMalformed, 11, "the end of the message"},
		{"trailing comma", `{"value": 1,}`, ErrMalformed, 12, "field name"},
		{"missing colon", `{"value" 1}`, ErrMalformed, 9, "':'"},
		{"unquoted key", `{value: 1}`, ErrMalformed, 1, "field name"},
		{"missing comma in array", `[1 2]`, ErrMalformed, 3, "',' or ']'"},
		{"trailing comma in array", `[1,]`, ErrMalformed, 3, "a JSON value"},
		{"leading zero", `{"value": 01}`, ErrMalformed, 10, "leading"},
		{"leading plus", `{"value": +1}`, ErrMalformed, 10, "leading"},
		{"leading point", `.5`, ErrMalformed, 0, "leading"},
		{"decimal comma", `500,12`, ErrMalformed, 3, "after the end"},
		{"two values", `{"value": 1} {"value": 2}`, ErrMalformed, 13, "one object"},
		{"unterminated string", `"abc`, ErrMalformed, 0, "closing"},
		{"control character", "\"a\x01b\"", ErrMalformed, 2, "control character"},
		{"invalid UTF-8", "{\"value\": 1, \"x\": \"\xff\"}", ErrMalformed, 19, "UTF-8"},
		{"bad escape", `{"value": 1, "x": "\q"}`, ErrMalformed, 19, "escape"},
		{"short unicode escape", `{"value": 1, "x": "\u12"}`, ErrMalformed, 19, "four hexadecimal"},
		{"bare word in unknown field", `{"value": 1, "x": abc}`, ErrMalformed, 18, "double quotes"},
		{"single quotes", `'500'`, ErrMalformed, 0, "found '\\''"},
		{"bare word", `abc`, ErrMalformed, 0, "double quotes"},
		{"too deep", `{"value": 1, "x": ` + deep + `}`, ErrLimit, 18 + MaxDepth - 1, "nested deeper"},
		{"too many", big, ErrLimit, 1 + 2*MaxPayloads, "split the batch"},
	}
	var d Decoder
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			ps, err := d.Decode([]byte(tt.msg))
			if err == nil {
				t.Fatalf("Decode(%q) = %d payloads, want an error", short(tt.msg), len(ps))
			}
			if ps != nil {
				t.Errorf("payloads returned with the error")
			}
			var pe *PayloadError
			if !errors.As(err, &pe) {
				t.Fatalf("error %v is %T, not *PayloadError", err, err)
			}
			if !errors.Is(err, tt.sent) {
				t.Errorf("error %v does not wrap %v", err, tt.sent)
			}
			if pe.Offset != tt.offset {
				t.Errorf("error %q at byte %d, want %d", err, pe.Offset, tt.offset)
			}
			if !strings.Contains(err.Error(), tt.text) || strings.ContainsAny(err.Error(), "\r\n") {
				t.Errorf("message %q does not say %q on one line", err, tt.text)
			}
			if ReasonOf(err) != ReasonNotParseable {
				t.Errorf("reason %v, want not_parseable", ReasonOf(err))
			}
		})
	}
}

// TestDecodeAgainstEncodingJSON decodes well-formed messages with
// encoding/json too and compares the fields.
func TestDecodeAgainstEncodingJSON(t *testing.T) {
	type ref struct {
		Value          json.Number `json:"value"`
		ID             any         `json:"id"`
		Unit           string      `json:"unit"`
		Group          any         `json:"group"`
		Characteristic any         `json:"characteristic"`
	}
	text := func(x any) string {
		switch x := x.(type) {
		case nil:
			return ""
		case json.Number:
			return string(x)
		case string:
			return x
		}
		return fmt.Sprint(x)
	}
	msgs := []string{
		`{"value": 500.12, "id": "a-1", "unit": "g", "group": "L3", "characteristic": "fill-weight"}`,
		`{"ID": 42, "x": {"y": [1, 2, {"z": "\""}]}, "VALUE": -0.000123, "Unit": "\u00b0C"}`,
		`{"group": 7, "value": 1e3, "characteristic": "seal-temp\t2"}`,
		`{"value": 0, "extra": "\ud83d\ude00"}`,
	}
	var d Decoder
	for _, msg := range msgs {
		ps, err := d.Decode([]byte(msg))
		if err != nil || len(ps) != 1 || ps[0].Err != nil {
			t.Fatalf("Decode(%q): %v %v", msg, err, ps)
		}
		dec := json.NewDecoder(strings.NewReader(msg))
		dec.UseNumber()
		var r ref
		if err := dec.Decode(&r); err != nil {
			t.Fatal(err)
		}
		p := ps[0]
		for _, c := range [][2]string{
			{string(p.Value), string(r.Value)}, {string(p.ID), text(r.ID)}, {string(p.Unit), r.Unit},
			{string(p.Group), text(r.Group)}, {string(p.Characteristic), text(r.Characteristic)},
		} {
			if c[0] != c[1] {
				t.Errorf("%s: %q, encoding/json says %q", msg, c[0], c[1])
			}
		}
	}
}

// TestParseRFC3339AgainstTimeParse compares parseRFC3339 with time.Parse on
// random instants of years 0000–9999, written with every fractional-second
// width from none to 12 digits (past 9 both cut off) and random offsets.
func TestParseRFC3339AgainstTimeParse(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	lo := time.Date(0, 1, 1, 0, 0, 0, 0, time.UTC).Unix()
	hi := time.Date(9999, 12, 31, 23, 59, 59, 0, time.UTC).Unix()
	n := 50000
	if testing.Short() {
		n = 5000
	}
	for i := range n {
		offset := 0
		if i%4 != 0 {
			offset = (rng.IntN(24*60*2-1) - (24*60 - 1)) * 60
		}
		zone := time.FixedZone("", offset)
		tm := time.Unix(lo+rng.Int64N(hi-lo+1), rng.Int64N(1e9)).In(zone)
		if tm.Year() < 0 || tm.Year() > 9999 {
			continue
		}
		s := tm.Format("2006-01-02T15:04:05Z07:00")
		if w := rng.IntN(13); w > 0 {
			frac := fmt.Sprintf("%09d%03d", tm.Nanosecond(), rng.IntN(1000))[:w]
			s = s[:19] + "." + frac + s[19:]
		}
		want, err := time.Parse(time.RFC3339, s)
		if err != nil {
			t.Fatalf("time.Parse(%q): %v", s, err)
		}
		got, problem := parseRFC3339([]byte(s))
		if problem != "" || !got.Equal(want) {
			t.Fatalf("parseRFC3339(%q) = %v %q, time.Parse says %v", s, got, problem, want)
		}
		if got.Location() != time.UTC {
			t.Fatalf("parseRFC3339(%q) is in %v, not UTC", s, got.Location())
		}
	}
}

func TestParseRFC3339(t *testing.T) {
	good := map[string]string{
		"2024-02-29T23:59:59.999999999Z":      "2024-02-29T23:59:59.999999999Z",
		"2000-02-29T00:00:00Z":                "2000-02-29T00:00:00Z",
		"2026-03-01t08:00:00z":                "2026-03-01T08:00:00Z",
		"2026-03-01 08:00:00Z":                "2026-03-01T08:00:00Z",
		"2026-03-01T08:00:00-00:00":           "2026-03-01T08:00:00Z",
		"2026-03-01T00:00:00+23:59":           "2026-02-28T00:01:00Z",
		"0000-01-01T00:00:00Z":                "0000-01-01T00:00:00Z",
		"2026-03-01T08:00:00.5000000000009Z":  "2026-03-01T08:00:00.5Z",
		"1969-12-31T23:59:59.999999999+00:00": "1969-12-31T23:59:59.999999999Z",
	}
	for s, want := range good {
		got, problem := parseRFC3339([]byte(s))
		if problem != "" || got.Format(time.RFC3339Nano) != want {
			t.Errorf("parseRFC3339(%q) = %v %q, want %s", s, got, problem, want)
		}
	}
	bad := []string{
		"2026-03-01T08:00:00", "2026-03-01", "2026-03-01T08:00Z", "2026-13-01T08:00:00Z",
		"2026-00-01T08:00:00Z", "2026-04-31T08:00:00Z", "1900-02-29T08:00:00Z", "2026-03-00T08:00:00Z",
		"2026-03-01T24:00:00Z", "2026-03-01T08:60:00Z", "2026-03-01T08:00:60Z", "2026-03-01T08:00:00.Z",
		"2026-03-01T08:00:00,5Z", "2026-03-01T08:00:00+24:00", "2026-03-01T08:00:00+01:60",
		"2026-03-01T08:00:00+0100", "2026-03-01T08:00:00Zx", "2026-03-01X08:00:00Z", "+026-03-01T08:00:00Z",
		"2026-3-01T08:00:00Z", "2026-03-01T08:00:00+01", "2026/03/01T08:00:00Z", "20260301T080000Z",
	}
	for _, s := range bad {
		if got, problem := parseRFC3339([]byte(s)); problem == "" {
			t.Errorf("parseRFC3339(%q) = %v, want a problem", s, got)
		}
	}
}

func TestParseUnixMillis(t *testing.T) {
	good := map[string]string{
		"0":                      "1970-01-01T00:00:00Z",
		"1":                      "1970-01-01T00:00:00.001Z",
		"-1":                     "1969-12-31T23:59:59.999Z",
		"1772352000250":          "2026-03-01T08:00:00.25Z",
		"+1772352000250":         "2026-03-01T08:00:00.25Z",
		"1772352000250.123456":   "2026-03-01T08:00:00.250123456Z",
		"1772352000250.1234569":  "2026-03-01T08:00:00.250123456Z",
		"1.772352000250e12":      "2026-03-01T08:00:00.25Z",
		"17723520002501e-1":      "2026-03-01T08:00:00.2501Z",
		".5":                     "1970-01-01T00:00:00.0005Z",
		"5.":                     "1970-01-01T00:00:00.005Z",
		"0.000001":               "1970-01-01T00:00:00.000000001Z",
		"0.0000001":              "1970-01-01T00:00:00Z",
		"999999999999999999":     "31690708-07-05T01:46:39.999Z", // time.UnixMilli(999999999999999999)
		"1e17":                   "3170843-11-07T09:46:40Z",      // time.UnixMilli(1e17)
		"1e-100000000":           "1970-01-01T00:00:00Z",
		"00001772352000250.0000": "2026-03-01T08:00:00.25Z",
	}
	for s, want := range good {
		got, problem := parseUnixMillis([]byte(s))
		if problem != "" || got.Format(time.RFC3339Nano) != want {
			t.Errorf("parseUnixMillis(%q) = %v %q, want %s", s, got.Format(time.RFC3339Nano), problem, want)
		}
	}
	for _, s := range []string{"", "-", ".", "1e", "1e+", "1x", "1.2.3", "1e18", "1000000000000000000", "1e100000000", "--1", "0x10", " 1"} {
		if got, problem := parseUnixMillis([]byte(s)); problem == "" {
			t.Errorf("parseUnixMillis(%q) = %v, want a problem", s, got)
		}
	}
}

// benchMessages are the messages of the decoding benchmarks: an object
// with every field, a bare number, and an array of 10 objects.
func benchMessages() map[string][]byte {
	var arr strings.Builder
	arr.WriteByte('[')
	for i := range 10 {
		if i > 0 {
			arr.WriteByte(',')
		}
		fmt.Fprintf(&arr, `{"value": 500.%02d, "time": "2026-03-01T08:00:%02d.125Z", "id": "L3-%d", "unit": "g"}`, i, i, i)
	}
	arr.WriteByte(']')
	return map[string][]byte{
		"object":  []byte(`{"value": 500.12, "time": "2026-03-01T08:00:00.125+01:00", "id": "L3-000123", "unit": "g", "batch": {"no": 17, "tags": ["a", "b"]}}`),
		"bare":    []byte(`500.12`),
		"array10": []byte(arr.String()),
	}
}

var benchNames = []string{"object", "bare", "array10"}

func TestDecodeDoesNotAllocate(t *testing.T) {
	msgs := benchMessages()
	msgs["escapes"] = []byte(`{"value": "500.12", "id": "a\"b", "group": "L\u00e9"}`)
	msgs["unix ms"] = []byte(`{"value": 1, "time": 1772352000250.5}`)
	var d Decoder
	for name, msg := range msgs {
		if _, err := d.Decode(msg); err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		if n := testing.AllocsPerRun(100, func() { _, _ = d.Decode(msg) }); n != 0 {
			t.Errorf("%s: %v allocations per Decode, want 0", name, n)
		}
	}
}

// BenchmarkDecodePayload decodes the benchMessages; its baseline is
// BenchmarkDecodeJSONBaseline, to be compared in the same run.
func BenchmarkDecodePayload(b *testing.B) {
	msgs := benchMessages()
	for _, name := range benchNames {
		msg := msgs[name]
		b.Run(name, func(b *testing.B) {
			var d Decoder
			b.SetBytes(int64(len(msg)))
			b.ReportAllocs()
			for b.Loop() {
				if _, err := d.Decode(msg); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// benchJSON is what a straightforward encoding/json decoder would
// unmarshal a measurement into: json.Number keeps the decimal text, and
// time.Time parses RFC 3339.
type benchJSON struct {
	Value json.Number `json:"value"`
	Time  time.Time   `json:"time"`
	ID    string      `json:"id"`
	Unit  string      `json:"unit"`
}

// BenchmarkDecodeJSONBaseline unmarshals the benchMessages with
// encoding/json into benchJSON (into a json.Number for the bare number),
// the baseline of BenchmarkDecodePayload.
func BenchmarkDecodeJSONBaseline(b *testing.B) {
	msgs := benchMessages()
	for _, name := range benchNames {
		msg := msgs[name]
		b.Run(name, func(b *testing.B) {
			b.SetBytes(int64(len(msg)))
			b.ReportAllocs()
			for b.Loop() {
				var err error
				switch name {
				case "bare":
					var n json.Number
					err = json.Unmarshal(msg, &n)
				case "array10":
					var v []benchJSON
					err = json.Unmarshal(msg, &v)
				default:
					var v benchJSON
					err = json.Unmarshal(msg, &v)
				}
				if err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
