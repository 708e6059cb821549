package plant

import (
	"math/rand/v2"
	"testing"
	"time"
)

func TestAppendTime(t *testing.T) {
	var c secondCache
	r := rand.New(rand.NewPCG(1, 2))
	base := time.Date(2026, 12, 1, 6, 0, 0, 0, time.UTC)
	times := []time.Time{base, base.Add(999 * time.Millisecond), time.Date(1969, 12, 31, 23, 59, 59, 5e6, time.UTC), time.Date(2026, 3, 29, 2, 30, 0, 0, time.FixedZone("x", 3600))}
	for range 1000 {
		times = append(times, base.Add(time.Duration(r.Int64N(int64(48*time.Hour)))).Truncate(time.Millisecond))
	}
	for _, tm := range times {
		got := string(c.appendTime(nil, tm))
		if want := tm.UTC().Format("2006-01-02T15:04:05.000Z07:00"); got != want {
			t.Fatalf("%v: %s, want %s", tm, got, want)
		}
	}
}

func TestAppendValue(t *testing.T) {
	for _, c := range []struct {
		v    float64
		res  int
		want string
	}{
		{500.125, 2, "500.12"}, // the binary value is below .125
		{500.126, 2, "500.13"},
		{-0.004, 2, "0.00"},
		{-0.4, 0, "0"},
		{-0.6, 0, "-1"},
		{-0.05, 1, "-0.1"},
		{2.1, 3, "2.100"},
	} {
		if got := string(appendValue([]byte("x"), c.v, c.res)); got != "x"+c.want {
			t.Errorf("appendValue(%g, %d) = %s, want %s", c.v, c.res, got[1:], c.want)
		}
	}
}

func TestAppendJSONString(t *testing.T) {
	for in, want := range map[string]string{"g": `"g"`, "N·m": `"N·m"`, `a"b\`: `"a\"b\\"`, "\x01": `"\u0001"`, "\xff": `"\ufffd"`} {
		if got := string(appendJSONString(nil, in)); got != want {
			t.Errorf("%q: %s, want %s", in, got, want)
		}
	}
}

func TestWrongUnit(t *testing.T) {
	for _, u := range []string{"g", "kg", "°C", "N·m", "mm", "Pa", "kPa", "m", "%", "ml", "bar", "°F"} {
		if w := wrongUnit(u); w == u || w == "" {
			t.Errorf("wrongUnit(%q) = %q", u, w)
		}
	}
}

func TestKeyLines(t *testing.T) {
	doc := `name = "x"
[bad]
rate = 0.1
[[characteristic]]
name = "a"
  [[characteristic.event]]
  kind = "shift"
  [[characteristic.event]]
  kind = "drift"
[[characteristic]]
name = "b"
  [[characteristic.event]]
  kind = "spread"
`
	lines := keyLines([]byte(doc))
	for key, want := range map[string]int{
		"name": 1, "bad": 2, "bad.rate": 3, "characteristic[0]": 4, "characteristic[0].name": 5,
		"characteristic[0].event[0]": 6, "characteristic[0].event[0].kind": 7, "characteristic[0].event[1].kind": 9,
		"characteristic[1].name": 11, "characteristic[1].event[0].kind": 13,
	} {
		if got := lines[key]; got != want {
			t.Errorf("%s: line %d, want %d", key, got, want)
		}
	}
	if got := lineOf(lines, "characteristic[1].event[0].group"); got != 12 {
		t.Errorf("missing key: line %d, want 12 (its table)", got)
	}
	if got := lineOf(lines, "characteristic[1].groups[3]"); got != 10 {
		t.Errorf("missing list: line %d, want 10", got)
	}
}
