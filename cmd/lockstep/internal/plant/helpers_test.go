package plant_test

import (
	"bytes"
	"encoding/json"
	"math"
	"strconv"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/cmd/lockstep/internal/plant"
)

// testStart is the simulated start of the tests.
func testStart() time.Time { return time.Date(2026, 12, 1, 6, 0, 0, 0, time.UTC) }

// coffee returns the built-in scenario from testStart for d.
func coffee(d time.Duration) plant.Scenario {
	sc := plant.Coffee()
	sc.Start = testStart()
	sc.Duration = d
	return sc
}

// generate returns every message of sc.
func generate(t testing.TB, sc plant.Scenario) []plant.Message {
	t.Helper()
	g, err := plant.New(sc)
	if err != nil {
		t.Fatal(err)
	}
	var out []plant.Message
	for m := range g.All() {
		out = append(out, m)
	}
	return out
}

// lines writes messages as lockstep simulate --dry-run does.
func lines(ms []plant.Message) []byte {
	var b bytes.Buffer
	for _, m := range ms {
		b.WriteString(m.Subject)
		b.WriteByte('\t')
		b.Write(m.Payload)
		b.WriteByte('\n')
	}
	return b.Bytes()
}

// fields is a good payload.
type fields struct {
	Value json.RawMessage `json:"value"`
	Time  json.RawMessage `json:"time"`
	ID    string          `json:"id"`
	Unit  string          `json:"unit"`
}

// decode decodes a payload that must be JSON.
func decode(t testing.TB, m plant.Message) fields {
	t.Helper()
	var f fields
	dec := json.NewDecoder(bytes.NewReader(m.Payload))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&f); err != nil {
		t.Fatalf("%s %s (bad %q): %v", m.Subject, m.Payload, m.Bad, err)
	}
	return f
}

// valueOf returns the value of a good payload, written as a string or a
// number, and its text.
func valueOf(t testing.TB, m plant.Message) (float64, string) {
	t.Helper()
	return fieldValue(t, decode(t, m))
}

func fieldValue(t testing.TB, f fields) (float64, string) {
	t.Helper()
	text := string(f.Value)
	if len(text) > 0 && text[0] == '"' {
		if err := json.Unmarshal(f.Value, &text); err != nil {
			t.Fatal(err)
		}
	}
	v, err := strconv.ParseFloat(text, 64)
	if err != nil {
		t.Fatalf("value %s: %v", f.Value, err)
	}
	return v, text
}

// timeOf returns the time of a payload, RFC 3339 or Unix milliseconds.
func timeOf(t testing.TB, m plant.Message) time.Time {
	t.Helper()
	return fieldTime(t, decode(t, m))
}

func fieldTime(t testing.TB, f fields) time.Time {
	t.Helper()
	var s string
	if err := json.Unmarshal(f.Time, &s); err == nil {
		tm, err := time.Parse(time.RFC3339Nano, s)
		if err != nil {
			t.Fatal(err)
		}
		return tm
	}
	ms, err := strconv.ParseInt(string(f.Time), 10, 64)
	if err != nil {
		t.Fatalf("time %s", f.Time)
	}
	return time.UnixMilli(ms).UTC()
}

// sample collects the good values of one group in [from, to) offsets.
func sample(t testing.TB, ms []plant.Message, characteristic, group string, from, to time.Duration) []float64 {
	t.Helper()
	var out []float64
	for _, m := range ms {
		off := m.Time.Sub(testStart())
		if m.Bad != "" || m.Characteristic != characteristic || m.Group != group || off < from || off >= to {
			continue
		}
		v, _ := valueOf(t, m)
		out = append(out, v)
	}
	return out
}

func meanSD(xs []float64) (float64, float64) {
	var s float64
	for _, x := range xs {
		s += x
	}
	m := s / float64(len(xs))
	var ss float64
	for _, x := range xs {
		ss += (x - m) * (x - m)
	}
	return m, math.Sqrt(ss / float64(len(xs)-1))
}
