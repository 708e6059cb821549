package plant_test

import (
	"bytes"
	"fmt"
	"math"
	"strings"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/cmd/lockstep/internal/plant"
)

func TestDeterministic(t *testing.T) {
	sc := coffee(10 * time.Minute)
	sc.Bad.Rate = 0.01
	a := lines(generate(t, sc))
	b := lines(generate(t, sc))
	if !bytes.Equal(a, b) {
		t.Fatal("same seed and scenario gave different bytes")
	}
	sc.Seed = 2
	c := lines(generate(t, sc))
	if bytes.Equal(a, c) {
		t.Fatal("seeds 1 and 2 gave the same bytes")
	}
	// Not just a different first line: most lines differ.
	la, lc := strings.Split(string(a), "\n"), strings.Split(string(c), "\n")
	same := 0
	for i := range min(len(la), len(lc)) {
		if la[i] == lc[i] {
			same++
		}
	}
	if same > len(la)/100 {
		t.Errorf("seeds 1 and 2 share %d of %d lines", same, len(la))
	}
}

// A group's values and times do not depend on the other groups: adding a
// characteristic or removing a group leaves them as they were.
func TestStreamsIndependent(t *testing.T) {
	base := coffee(5 * time.Minute)
	fill := func(ms []plant.Message) []byte {
		var keep []plant.Message
		for _, m := range ms {
			if m.Subject == "meas.fill-weight.L2" {
				keep = append(keep, m)
			}
		}
		return lines(keep)
	}
	want := fill(generate(t, base))
	other := coffee(5 * time.Minute)
	other.Characteristics = other.Characteristics[:1]
	other.Characteristics[0].Groups = []string{"L2", "L9"}
	other.Characteristics[0].Events = nil
	if got := fill(generate(t, other)); !bytes.Equal(got, want) {
		t.Error("L2's messages changed with the other streams")
	}
}

// Bad messages replace good ones in place: with them on, every good message
// is the one the plant sends with them off.
func TestBadReplacesInPlace(t *testing.T) {
	sc := coffee(10 * time.Minute)
	sc.Bad.Rate = 0
	clean := generate(t, sc)
	sc.Bad.Rate = 0.05
	dirty := generate(t, sc)
	if len(clean) != len(dirty) {
		t.Fatalf("%d messages without bad ones, %d with", len(clean), len(dirty))
	}
	nbad := 0
	for i := range clean {
		if dirty[i].Subject != clean[i].Subject || !dirty[i].Time.Equal(clean[i].Time) {
			t.Fatalf("message %d: %s at %v, want %s at %v", i, dirty[i].Subject, dirty[i].Time, clean[i].Subject, clean[i].Time)
		}
		if dirty[i].Bad != "" {
			nbad++
			continue
		}
		if !bytes.Equal(dirty[i].Payload, clean[i].Payload) {
			t.Fatalf("message %d: %s, want %s", i, dirty[i].Payload, clean[i].Payload)
		}
	}
	if nbad == 0 {
		t.Fatal("no bad message")
	}
}

func TestOrderAndBounds(t *testing.T) {
	sc := coffee(10 * time.Minute)
	sc.Bad.Rate = 0.01
	ms := generate(t, sc)
	end := sc.Start.Add(sc.Duration)
	for i, m := range ms {
		if m.Time.Before(sc.Start) || !m.Time.Before(end) {
			t.Fatalf("message %d at %v, outside [%v, %v)", i, m.Time, sc.Start, end)
		}
		if i > 0 && m.Time.Before(ms[i-1].Time) {
			t.Fatalf("message %d at %v before message %d at %v", i, m.Time, i-1, ms[i-1].Time)
		}
		if m.Time.Location() != time.UTC || m.Time.Nanosecond()%int(time.Millisecond) != 0 {
			t.Fatalf("message %d time %v: want UTC milliseconds", i, m.Time)
		}
		want := "meas." + m.Characteristic + "." + m.Group
		if m.Subject != want {
			t.Fatalf("subject %q, want %q", m.Subject, want)
		}
		if m.Bad == "" {
			if got := timeOf(t, m); !got.Equal(m.Time) {
				t.Fatalf("%s: payload time %v, message time %v", m.Payload, got, m.Time)
			}
		}
	}
}

// TestRates counts each group's messages over an hour. Poisson counts are
// Poisson(rate·T): the tolerance is 4.5 standard deviations (√(rate·T)), a
// chance of about 1 in 150000 per group for a correct generator; regular
// arrivals give rate·T exactly, give or take one.
func TestRates(t *testing.T) {
	const hour = time.Hour
	for _, arrivals := range []plant.Arrivals{plant.Poisson, plant.Regular} {
		t.Run(arrivals.String(), func(t *testing.T) {
			sc := coffee(hour)
			sc.Bad.Rate = 0
			for i := range sc.Characteristics {
				sc.Characteristics[i].Arrivals = arrivals
			}
			counts := map[string]int{}
			for _, m := range generate(t, sc) {
				counts[m.Subject]++
			}
			for _, c := range sc.Characteristics {
				want := c.Rate * hour.Seconds()
				tol := 4.5 * math.Sqrt(want)
				if arrivals == plant.Regular {
					tol = 1
				}
				for _, g := range c.Groups {
					got := float64(counts["meas."+c.Name+"."+g])
					if math.Abs(got-want) > tol {
						t.Errorf("%s %s: %g messages in an hour, want %g ± %.0f", c.Name, g, got, want, tol)
					}
				}
			}
		})
	}
}

func TestRegularSpacing(t *testing.T) {
	sc := coffee(time.Minute)
	sc.Bad.Rate = 0
	sc.Characteristics = sc.Characteristics[:1]
	sc.Characteristics[0].Arrivals = plant.Regular
	last := map[string]time.Time{}
	for _, m := range generate(t, sc) {
		if prev, ok := last[m.Group]; ok {
			if gap := m.Time.Sub(prev); gap < 499*time.Millisecond || gap > 501*time.Millisecond {
				t.Fatalf("%s: gap %v, want 500ms", m.Group, gap)
			}
		}
		last[m.Group] = m.Time
	}
}

func TestRateScale(t *testing.T) {
	sc := coffee(10 * time.Minute)
	n1 := len(generate(t, sc))
	n10 := len(generate(t, sc.WithRateScale(10)))
	if r := float64(n10) / float64(n1); math.Abs(r-10) > 0.5 {
		t.Errorf("rate scale 10 gave %d messages against %d (×%.2f)", n10, n1, r)
	}
	if sc.Characteristics[0].Rate != 2 {
		t.Error("WithRateScale changed the original scenario")
	}
	if got, want := sc.WithRateScale(10).Rate(), 10*sc.Rate(); got != want {
		t.Errorf("Rate %g, want %g", got, want)
	}
}

func TestSilence(t *testing.T) {
	for _, arrivals := range []plant.Arrivals{plant.Poisson, plant.Regular} {
		t.Run(arrivals.String(), func(t *testing.T) {
			sc := coffee(30 * time.Minute)
			c := &sc.Characteristics[0]
			c.Arrivals = arrivals
			c.Events = []plant.Event{
				{Kind: plant.Silence, Group: "L2", At: 10 * time.Minute, Duration: 3 * time.Minute},
				{Kind: plant.Silence, Group: "L2", At: 12 * time.Minute, Duration: 3 * time.Minute}, // overlaps: silent 10m–15m
				{Kind: plant.Silence, Group: "L4", At: 0, Duration: time.Minute},
			}
			ms := generate(t, sc)
			count := func(group string, from, to time.Duration) int {
				n := 0
				for _, m := range ms {
					off := m.Time.Sub(sc.Start)
					if m.Characteristic == c.Name && m.Group == group && off >= from && off < to {
						n++
					}
				}
				return n
			}
			if n := count("L2", 10*time.Minute, 15*time.Minute); n != 0 {
				t.Errorf("L2 sent %d messages while silent", n)
			}
			if n := count("L4", 0, time.Minute); n != 0 {
				t.Errorf("L4 sent %d messages while silent", n)
			}
			// Around the silence the group sends at its rate: 2/s for 5 min
			// is 600, within 4.5 standard deviations.
			for _, span := range [][2]time.Duration{{5 * time.Minute, 10 * time.Minute}, {15 * time.Minute, 20 * time.Minute}} {
				if n := count("L2", span[0], span[1]); math.Abs(float64(n)-600) > 4.5*math.Sqrt(600) {
					t.Errorf("L2 sent %d messages in [%v, %v), want about 600", n, span[0], span[1])
				}
			}
			if n := count("L1", 10*time.Minute, 15*time.Minute); math.Abs(float64(n)-600) > 4.5*math.Sqrt(600) {
				t.Errorf("L1 sent %d messages during L2's silence, want about 600", n)
			}
		})
	}
}

// TestIDs checks that each group numbers its messages from 1 without gaps
// when no message is bad.
func TestIDs(t *testing.T) {
	sc := coffee(2 * time.Minute)
	sc.Bad.Rate = 0
	seq := map[string]int{}
	for _, m := range generate(t, sc) {
		seq[m.Subject]++
		f := decode(t, m)
		if want := fmt.Sprintf("%s-%06d", m.Group, seq[m.Subject]); f.ID != want {
			t.Fatalf("%s: id %q, want %q", m.Subject, f.ID, want)
		}
	}
}

func TestFormats(t *testing.T) {
	sc := coffee(time.Minute)
	sc.Bad.Rate = 0
	c := &sc.Characteristics[0]
	c.ValueFormat = plant.ValueNumber
	c.TimeFormat = plant.TimeUnixMilli
	for _, m := range generate(t, sc) {
		f := decode(t, m)
		if m.Characteristic != c.Name {
			if f.Value[0] != '"' || f.Time[0] != '"' {
				t.Fatalf("%s: want the default string value and RFC 3339 time", m.Payload)
			}
			continue
		}
		if f.Value[0] == '"' || f.Time[0] == '"' {
			t.Fatalf("%s: want a number value and Unix milliseconds", m.Payload)
		}
		if got := timeOf(t, m); !got.Equal(m.Time) {
			t.Fatalf("%s: time %v, want %v", m.Payload, got, m.Time)
		}
	}
}

// TestResolution checks that every value has exactly the instrument's
// decimal places.
func TestResolution(t *testing.T) {
	sc := coffee(5 * time.Minute)
	sc.Bad.Rate = 0
	sc.Characteristics[2].Resolution = 0
	sc.Characteristics[2].Nominal = "-0.01" // values round to 0, never to "-0"
	sc.Characteristics[2].SD = 0.1
	res := map[string]int{"fill-weight": 2, "seal-temperature": 1, "cap-torque": 0}
	for _, m := range generate(t, sc) {
		_, text := valueOf(t, m)
		places := 0
		if i := strings.IndexByte(text, '.'); i >= 0 {
			places = len(text) - i - 1
		}
		if places != res[m.Characteristic] {
			t.Fatalf("%s: value %q has %d decimal places, want %d", m.Subject, text, places, res[m.Characteristic])
		}
		if text == "-0" {
			t.Fatalf("%s: negative zero", m.Subject)
		}
	}
}

func TestNewErrors(t *testing.T) {
	sc := plant.Coffee()
	if _, err := plant.New(sc); err == nil {
		t.Error("New without a start: no error")
	}
	sc.Start = testStart()
	sc.Characteristics[0].Groups = append(sc.Characteristics[0].Groups, "L1")
	sc.Characteristics[1].Events[0].Group = "J9"
	sc.Characteristics[2].SD = -1
	_, err := plant.New(sc)
	fes := plant.FieldErrors(err)
	var keys []string
	for _, fe := range fes {
		keys = append(keys, fe.Key)
	}
	want := []string{"characteristic[0].groups[4]", "characteristic[1].event[0].group", "characteristic[2].sd"}
	if fmt.Sprint(keys) != fmt.Sprint(want) {
		t.Errorf("keys %v, want %v\n%v", keys, want, err)
	}
}

func TestPacer(t *testing.T) {
	s := testStart()
	for _, c := range []struct {
		speed float64
		at    time.Duration
		want  time.Duration
	}{
		{1, time.Minute, time.Minute},
		{60, time.Hour, time.Minute},
		{0.5, time.Second, 2 * time.Second},
		{0, time.Hour, 0},
		{10, -time.Second, 0},
	} {
		p := plant.Pacer{Speed: c.speed, Start: s}
		if got := p.Due(s.Add(c.at)); got != c.want {
			t.Errorf("speed %g at %v: due %v, want %v", c.speed, c.at, got, c.want)
		}
	}
}
