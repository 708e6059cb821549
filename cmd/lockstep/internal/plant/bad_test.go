package plant_test

import (
	"bytes"
	"encoding/json"
	"math"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/cmd/lockstep/internal/plant"
)

// TestBadKinds generates about 65000 messages with 3 % bad ones: each of
// the seven kinds is Binomial(N, 0.03/7), about 280, and must be within
// 4.5 standard deviations of that. Each bad message must be bad in the way
// its kind says, and the good ones (one in 20 is checked) good.
func TestBadKinds(t *testing.T) {
	sc := coffee(time.Hour)
	sc.Bad.Rate = 0.03
	ms := generate(t, sc)
	ranges := map[string][2]float64{}
	units := map[string]string{}
	for _, c := range sc.Characteristics {
		lo, _ := strconv.ParseFloat(c.Min, 64)
		hi, _ := strconv.ParseFloat(c.Max, 64)
		ranges[c.Name] = [2]float64{lo, hi}
		units[c.Name] = c.Unit
	}
	counts := map[plant.BadKind]int{}
	lastGood := map[string][]byte{}
	for i, m := range ms {
		counts[m.Bad]++
		if m.Bad != "" || i%20 == 0 { // every bad message, a sample of the good ones
			checkBad(t, m, ranges[m.Characteristic], units[m.Characteristic], lastGood[m.Subject])
		}
		if m.Bad == "" {
			lastGood[m.Subject] = m.Payload
		}
	}
	n := float64(len(ms))
	p := sc.Bad.Rate / 7
	want := n * p
	tol := 4.5 * math.Sqrt(n*p*(1-p))
	for _, k := range plant.AllBadKinds() {
		if got := float64(counts[k]); math.Abs(got-want) > tol {
			t.Errorf("%s: %g messages of %g, want %.0f ± %.0f", k, got, n, want, tol)
		}
	}
	if len(counts) != 8 {
		t.Errorf("kinds seen: %v", counts)
	}
}

// checkBad checks that m is bad in the way its kind says.
func checkBad(t *testing.T, m plant.Message, rng [2]float64, unit string, lastGood []byte) {
	t.Helper()
	if bytes.ContainsAny(m.Payload, "\t\n\r") {
		t.Fatalf("%s: payload with a tab or line break: %q", m.Bad, m.Payload)
	}
	valid := json.Valid(m.Payload)
	if m.Bad == "" && !valid {
		t.Fatalf("good message, not JSON: %s", m.Payload)
	}
	switch m.Bad {
	case plant.BadNotJSON, plant.BadNaN:
		if valid {
			t.Fatalf("%s: valid JSON: %s", m.Bad, m.Payload)
		}
		if m.Bad == plant.BadNaN && !bytes.HasPrefix(m.Payload, []byte(`{"value":NaN,`)) {
			t.Fatalf("nan: %s", m.Payload)
		}
		return
	}
	if !valid {
		t.Fatalf("%s: not JSON: %s", m.Bad, m.Payload)
	}
	f := decode(t, m)
	switch m.Bad {
	case plant.BadNotANumber:
		var s string
		if string(f.Value) != "null" {
			if err := json.Unmarshal(f.Value, &s); err != nil {
				t.Fatalf("not_a_number: value %s", f.Value)
			}
			if _, err := strconv.ParseFloat(s, 64); err == nil {
				t.Fatalf("not_a_number: value %q is a number", s)
			}
		}
		return
	case plant.BadDuplicateID:
		if !bytes.Equal(m.Payload, lastGood) {
			t.Fatalf("duplicate_id: %s, want a repeat of %s", m.Payload, lastGood)
		}
		return
	}
	v, _ := fieldValue(t, f)
	inRange := v >= rng[0] && v <= rng[1]
	if inRange == (m.Bad == plant.BadOutOfRange) {
		t.Fatalf("%q: value %g, range %v", m.Bad, v, rng)
	}
	if (f.Unit != unit) != (m.Bad == plant.BadWrongUnit) {
		t.Fatalf("%q: unit %q, characteristic's %q", m.Bad, f.Unit, unit)
	}
	ahead := fieldTime(t, f).Sub(m.Time)
	if (m.Bad == plant.BadFromFuture && ahead != plant.FutureOffset) || (m.Bad != plant.BadFromFuture && ahead != 0) {
		t.Fatalf("%q: payload time %v after the arrival", m.Bad, ahead)
	}
	if m.Bad != "" && m.Bad != plant.BadOutOfRange && m.Bad != plant.BadWrongUnit && m.Bad != plant.BadFromFuture {
		t.Fatalf("unknown kind %q", m.Bad)
	}
}

func TestBadChosenKinds(t *testing.T) {
	sc := coffee(30 * time.Minute)
	sc.Bad = plant.Bad{Rate: 0.05, Kinds: []plant.BadKind{plant.BadWrongUnit, plant.BadNotJSON}}
	counts := map[plant.BadKind]int{}
	for _, m := range generate(t, sc) {
		counts[m.Bad]++
	}
	if len(counts) != 3 || counts[plant.BadWrongUnit] == 0 || counts[plant.BadNotJSON] == 0 {
		t.Errorf("kinds seen: %v", counts)
	}
	sc.Bad.Rate = 0
	for _, m := range generate(t, sc) {
		if m.Bad != "" {
			t.Fatalf("rate 0 gave a %s message", m.Bad)
		}
	}
}

func TestBadReasons(t *testing.T) {
	want := map[plant.BadKind]string{
		plant.BadNotJSON: "not_parseable", plant.BadNotANumber: "not_a_number", plant.BadNaN: "not_finite",
		plant.BadOutOfRange: "out_of_range", plant.BadWrongUnit: "wrong_unit", plant.BadFromFuture: "from_future",
		plant.BadDuplicateID: "duplicate_id", "": "",
	}
	for k, r := range want {
		if got := k.Reason(); got != r {
			t.Errorf("%q.Reason() = %q, want %q", k, got, r)
		}
	}
	if len(plant.AllBadKinds()) != 7 {
		t.Error("not seven kinds")
	}
	sc := coffee(time.Minute)
	sc.Bad.Kinds = []plant.BadKind{"nan", "typo", "nan"}
	err := sc.Validate()
	if err == nil || !strings.Contains(err.Error(), `bad.kinds[1]: no bad kind "typo"`) || !strings.Contains(err.Error(), `bad.kinds[2]: "nan" given twice`) {
		t.Errorf("Validate: %v", err)
	}
}
