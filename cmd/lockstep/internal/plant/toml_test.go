package plant_test

import (
	"errors"
	"reflect"
	"strings"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/cmd/lockstep/internal/plant"
)

const coffeeFile = "../../../../testdata/plant/coffee.toml"

// The example file is the built-in scenario.
func TestCoffeeFile(t *testing.T) {
	got, err := plant.LoadScenario(coffeeFile)
	if err != nil {
		t.Fatal(err)
	}
	if want := plant.Coffee(); !reflect.DeepEqual(got, want) {
		t.Errorf("coffee.toml:\n%+v\nCoffee():\n%+v", got, want)
	}
}

// minimal is a valid scenario; the tests change lines of it.
const minimal = `name = "two lines"
[[characteristic]]
name = "fill-weight"
unit = "g"
nominal = "500.00"
sd = 0.8
rate = 2
groups = ["L1", "L2"]

  [[characteristic.event]]
  kind = "shift"
  group = "L2"
  at = "1m"
  by = 1.5
`

func TestParseDefaults(t *testing.T) {
	sc, err := plant.ParseScenario([]byte(minimal), "m.toml")
	if err != nil {
		t.Fatal(err)
	}
	c := sc.Characteristics[0]
	if sc.Seed != 1 || !sc.Start.IsZero() || sc.Duration != 0 || sc.Bad.Rate != 0 {
		t.Errorf("scenario defaults: %+v", sc)
	}
	if c.Resolution != 2 || c.Arrivals != plant.Poisson || c.ValueFormat != plant.ValueString || c.TimeFormat != plant.TimeRFC3339 {
		t.Errorf("characteristic defaults: %+v", c)
	}
	if e := c.Events[0]; e != (plant.Event{Kind: plant.Shift, Group: "L2", At: time.Minute, By: 1.5}) {
		t.Errorf("event: %+v", e)
	}
	for _, start := range []string{`start = 2026-12-01T07:00:00+01:00`, `start = "2026-12-01T06:00:00Z"`} {
		sc, err := plant.ParseScenario([]byte(start+"\n"+minimal), "m.toml")
		if err != nil {
			t.Fatal(err)
		}
		if !sc.Start.Equal(testStart()) {
			t.Errorf("%s: start %v", start, sc.Start)
		}
	}
	all := strings.Replace(minimal, `groups =`, "arrivals = \"regular\"\nvalue_format = \"number\"\ntime_format = \"unix_ms\"\nresolution = 1\ngroups =", 1)
	sc, err = plant.ParseScenario([]byte("seed = 7\nduration = \"1h30m\"\n"+all+"[bad]\nrate = 0.01\nkinds = [\"nan\"]\n"), "m.toml")
	if err != nil {
		t.Fatal(err)
	}
	c = sc.Characteristics[0]
	if sc.Seed != 7 || sc.Duration != 90*time.Minute || sc.Bad.Rate != 0.01 || len(sc.Bad.Kinds) != 1 ||
		c.Arrivals != plant.Regular || c.ValueFormat != plant.ValueNumber || c.TimeFormat != plant.TimeUnixMilli || c.Resolution != 1 {
		t.Errorf("settings: %+v", sc)
	}
}

// TestParseErrors checks that each mistake is reported with its file, line
// and key, and a message that says what to write.
func TestParseErrors(t *testing.T) {
	for _, c := range []struct {
		name string
		edit func(string) string
		want []string // one line per error, each a substring of it
	}{
		{"unknown top-level key", prepend(`nmae = "x"`),
			[]string{`m.toml:1: nmae: unknown key; the keys at the top are name, seed, start, duration, bad, characteristic`}},
		{"unknown key in an event", replace(`by = 1.5`, "by = 1.5\n  amount = 2"),
			[]string{`m.toml:15: characteristic.event.amount: unknown key; the keys in [characteristic.event] are kind, group, at, duration, by, factor`}},
		{"unknown table", prepend("[bads]\nrate = 0.1"),
			[]string{`m.toml:1: bads: unknown key`}},
		{"number as text", replace(`sd = 0.8`, `sd = "0.8"`),
			[]string{`m.toml:6: characteristic.sd: want a number, e.g. 0.8, have a TOML string`}},
		{"nominal as a number", replace(`nominal = "500.00"`, `nominal = 500.00`),
			[]string{`m.toml:5: characteristic.nominal: want decimal text in quotes, e.g. "500.00"`}},
		{"syntax", replace(`unit = "g"`, `unit = "g`),
			[]string{`m.toml:4:`}},
		{"negative seed", prepend(`seed = -1`),
			[]string{`m.toml:1: seed: want a whole number ≥ 0, e.g. 2, have -1`}},
		{"missing sd and rate", replace("sd = 0.8\nrate = 2\n", ""),
			[]string{`m.toml:2: characteristic[0].sd: missing`, `m.toml:2: characteristic[0].rate: missing`}},
		{"group not among the groups", replace(`group = "L2"`, `group = "L7"`),
			[]string{`m.toml:12: characteristic[0].event[0].group: "L7" is not one of the groups (L1, L2)`}},
		{"bad duration", replace(`at = "1m"`, `at = "1 min"`),
			[]string{`m.toml:13: characteristic[0].event[0].at: "1 min" is not a duration`}},
		{"negative at", replace(`at = "1m"`, `at = "-1m"`),
			[]string{`m.toml:13: characteristic[0].event[0].at: must not be negative`}},
		{"unknown event kind", replace(`kind = "shift"`, `kind = "jump"`),
			[]string{`m.toml:11: characteristic[0].event[0].kind: "jump": use shift, spread, drift or silence`}},
		{"spread without factor", replace(`kind = "shift"`, `kind = "spread"`),
			[]string{`m.toml:10: characteristic[0].event[0].factor: missing`, `m.toml:14: characteristic[0].event[0].by: a spread changes the standard deviation`}},
		{"drift with a group", replace(`kind = "shift"`, `kind = "drift"`),
			[]string{`m.toml:12: characteristic[0].event[0].group: a drift moves every group; leave group out`}},
		{"local start time", prepend(`start = 2026-12-01T06:00:00`),
			[]string{`m.toml:1: start: 2026-12-01T06:00:00 has no time zone offset`}},
		{"bad name and group", replace(`groups = ["L1", "L2"]`, `groups = ["L1", "L 2", "L1"]`),
			[]string{`m.toml:8: characteristic[0].groups[1]: "L 2" has ' '`, `m.toml:8: characteristic[0].groups[2]: group "L1" given twice`, `m.toml:12: characteristic[0].event[0].group: "L2" is not one of the groups`}},
		{"second characteristic", func(s string) string {
			return s + "\n[[characteristic]]\nname = \"fill-weight\"\nunit = \"g\"\nnominal = \"x\"\nsd = -1\nrate = 2\ngroups = [\"A\"]\n"
		}, []string{`m.toml:17: characteristic[1].name: characteristic "fill-weight" given twice`, `m.toml:19: characteristic[1].nominal: "x" is not decimal text`, `m.toml:20: characteristic[1].sd: must be a finite number ≥ 0, have -1`}},
		{"bad rate", func(s string) string { return s + "[bad]\nrate = 2\nkinds = [\"typo\"]\n" },
			[]string{`m.toml:16: bad.rate: must be between 0 and 1`, `m.toml:17: bad.kinds[0]: no bad kind "typo"`}},
		{"no characteristic", func(string) string { return `name = "empty"` },
			[]string{`m.toml: characteristic: no characteristic`}},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, err := plant.ParseScenario([]byte(c.edit(minimal)), "m.toml")
			if err == nil {
				t.Fatal("no error")
			}
			if !errors.Is(err, plant.ErrInvalid) {
				t.Errorf("error does not wrap ErrInvalid: %v", err)
			}
			got := strings.Split(err.Error(), "\n")
			if len(got) != len(c.want) {
				t.Fatalf("%d errors, want %d:\n%v", len(got), len(c.want), err)
			}
			for i, w := range c.want {
				if !strings.Contains(got[i], w) {
					t.Errorf("error %d:\n%s\nwant it to contain\n%s", i, got[i], w)
				}
			}
			if fes := plant.FieldErrors(err); len(fes) != len(c.want) {
				t.Errorf("FieldErrors: %d, want %d", len(fes), len(c.want))
			}
		})
	}
}

func prepend(line string) func(string) string {
	return func(s string) string { return line + "\n" + s }
}

func replace(old, new string) func(string) string {
	return func(s string) string {
		if !strings.Contains(s, old) {
			panic("no " + old)
		}
		return strings.Replace(s, old, new, 1)
	}
}

func TestLoadScenarioMissingFile(t *testing.T) {
	if _, err := plant.LoadScenario("no/such/file.toml"); err == nil || !strings.Contains(err.Error(), "read scenario") {
		t.Errorf("err = %v", err)
	}
}
