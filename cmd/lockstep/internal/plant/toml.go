package plant

import (
	"bytes"
	"errors"
	"fmt"
	"os"
	"reflect"
	"slices"
	"strconv"
	"strings"
	"time"

	toml "github.com/pelletier/go-toml/v2"
	"github.com/pelletier/go-toml/v2/unstable"
)

// fileScenario is the TOML form of a Scenario.
type fileScenario struct {
	Name           string               `toml:"name"`
	Seed           *uint64              `toml:"seed"`
	Start          any                  `toml:"start"`
	Duration       string               `toml:"duration"`
	Bad            *fileBad             `toml:"bad"`
	Characteristic []fileCharacteristic `toml:"characteristic"`
}

type fileBad struct {
	Rate  *float64 `toml:"rate"`
	Kinds []string `toml:"kinds"`
}

type fileCharacteristic struct {
	Name        string      `toml:"name"`
	Unit        string      `toml:"unit"`
	Nominal     string      `toml:"nominal"`
	Resolution  *int        `toml:"resolution"`
	Min         string      `toml:"min"`
	Max         string      `toml:"max"`
	SD          *float64    `toml:"sd"`
	Rate        *float64    `toml:"rate"`
	Arrivals    string      `toml:"arrivals"`
	ValueFormat string      `toml:"value_format"`
	TimeFormat  string      `toml:"time_format"`
	Groups      []string    `toml:"groups"`
	Event       []fileEvent `toml:"event"`
}

type fileEvent struct {
	Kind     string   `toml:"kind"`
	Group    string   `toml:"group"`
	At       string   `toml:"at"`
	Duration string   `toml:"duration"`
	By       *float64 `toml:"by"`
	Factor   *float64 `toml:"factor"`
}

// keyWants says what each key holds, for type errors.
func keyWant(key string) string {
	switch key {
	case "nominal", "min", "max":
		return `decimal text in quotes, e.g. "500.00" (a TOML number would lose its digits)`
	case "duration", "at":
		return `a duration in quotes, e.g. "90s", "5m" or "1h30m"`
	case "sd", "rate", "by", "factor":
		return "a number, e.g. 0.8"
	case "seed", "resolution":
		return "a whole number ≥ 0, e.g. 2"
	case "groups", "kinds":
		return `a list of strings, e.g. ["L1", "L2"]`
	case "start":
		return "an offset date-time such as 2026-12-01T06:00:00Z"
	case "bad":
		return "a table, [bad]"
	case "characteristic", "event":
		return "tables, [[" + key + "]]"
	}
	return "a string in quotes"
}

// LoadScenario reads a scenario file (see ParseScenario for the format).
func LoadScenario(path string) (Scenario, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return Scenario{}, fmt.Errorf("read scenario: %w", err)
	}
	return ParseScenario(data, path)
}

// ParseScenario reads a scenario from TOML, strictly: an unknown key, a
// value of the wrong type or a missing required key is an error. name is the
// file's name for error messages. Every error wraps ErrInvalid and holds one
// *FieldError per mistake (see FieldErrors), each with its line and key.
// testdata/plant/coffee.toml is a commented example; the keys are:
//
//	name = "coffee plant"          # optional
//	seed = 1                       # optional, default 1
//	start = 2026-12-01T06:00:00Z   # optional: an offset date-time, or the same in quotes
//	duration = "4h"                # optional, default: run until stopped
//
//	[bad]                          # optional
//	rate = 0.001                   # fraction of all messages that are bad
//	kinds = ["not_json", "nan"]    # optional, default all
//
//	[[characteristic]]             # one or more
//	name = "fill-weight"           # subject token
//	unit = "g"
//	nominal = "500.00"             # decimal text in quotes
//	resolution = 2                 # optional: default the nominal's decimal places
//	min = "450"                    # optional plausible range, decimal text
//	max = "550"
//	sd = 0.8                       # within-group standard deviation
//	rate = 2.0                     # values per second per group
//	arrivals = "poisson"           # optional: poisson (default) or regular
//	value_format = "string"        # optional: string (default) or number
//	time_format = "rfc3339"        # optional: rfc3339 (default) or unix_ms
//	groups = ["L1", "L2", "L3", "L4"]
//
//	  [[characteristic.event]]     # zero or more, for the characteristic above
//	  kind = "shift"               # shift, spread, drift or silence
//	  group = "L3"                 # not for a drift
//	  at = "5m"                    # optional, default "0s": offset from the start
//	  duration = "10m"             # ramp time (default 0: a step); a silence's length
//	  by = 1.5                     # shift, drift: move of the mean, in units
//	  factor = 3.0                 # spread: multiplier of the SD
//
// Defaults: seed 1; no start (the caller sets one); duration 0 (run until
// stopped); resolution the nominal's decimal places; arrivals poisson;
// value_format string; time_format rfc3339; an event's at 0s and duration 0.
func ParseScenario(data []byte, name string) (Scenario, error) {
	var f fileScenario
	dec := toml.NewDecoder(bytes.NewReader(data)).DisallowUnknownFields()
	if err := dec.Decode(&f); err != nil {
		return Scenario{}, decodeError(err, name)
	}
	lines := keyLines(data)
	var v invalid
	sc := f.scenario(&v)
	// Validate's findings for keys that conversion already complained about
	// would say the same again.
	bad := map[string]bool{}
	for _, e := range v.errs {
		bad[e.(*FieldError).Key] = true
	}
	if err := sc.Validate(); err != nil {
		for _, fe := range FieldErrors(err) {
			if !bad[fe.Key] {
				v.errs = append(v.errs, fe)
			}
		}
	}
	if len(v.errs) == 0 {
		return sc, nil
	}
	for _, e := range v.errs {
		fe := e.(*FieldError)
		fe.File, fe.Line = name, lineOf(lines, fe.Key)
	}
	slices.SortStableFunc(v.errs, func(a, b error) int { return a.(*FieldError).Line - b.(*FieldError).Line })
	return Scenario{}, v.err()
}

// scenario converts the file form, adding what cannot be converted to v.
func (f *fileScenario) scenario(v *invalid) Scenario {
	sc := Scenario{Name: f.Name, Seed: 1}
	if f.Seed != nil {
		sc.Seed = *f.Seed
	}
	switch t := f.Start.(type) {
	case nil:
	case time.Time:
		sc.Start = t
	case string:
		st, err := time.Parse(time.RFC3339Nano, t)
		if err != nil {
			v.add("start", "%q is not an RFC 3339 time; write e.g. 2026-12-01T06:00:00Z", t)
		}
		sc.Start = st
	case toml.LocalDateTime, toml.LocalDate, toml.LocalTime:
		v.add("start", "%v has no time zone offset; write it in UTC with Z, e.g. 2026-12-01T06:00:00Z", t)
	default:
		v.add("start", "want %s", keyWant("start"))
	}
	sc.Duration = fileDuration(v, "duration", f.Duration)
	if f.Bad != nil {
		if f.Bad.Rate != nil {
			sc.Bad.Rate = *f.Bad.Rate
		} else {
			v.add("bad.rate", "missing; give the fraction of messages that are bad, e.g. 0.001")
		}
		for _, k := range f.Bad.Kinds {
			sc.Bad.Kinds = append(sc.Bad.Kinds, BadKind(k))
		}
	}
	for i := range f.Characteristic {
		fc := &f.Characteristic[i]
		key := fmt.Sprintf("characteristic[%d]", i)
		sc.Characteristics = append(sc.Characteristics, fc.characteristic(v, key))
	}
	return sc
}

func (fc *fileCharacteristic) characteristic(v *invalid, key string) Characteristic {
	c := Characteristic{
		Name:    fc.Name,
		Unit:    fc.Unit,
		Nominal: fc.Nominal,
		Min:     fc.Min,
		Max:     fc.Max,
		Groups:  fc.Groups,
	}
	if fc.Name == "" {
		v.add(key+".name", "missing; give the characteristic's subject token, e.g. \"fill-weight\"")
	}
	if fc.Nominal == "" {
		v.add(key+".nominal", "missing; give the target value as decimal text, e.g. \"500.00\"")
	}
	if fc.Resolution != nil {
		c.Resolution = *fc.Resolution
	} else if fc.Nominal != "" {
		if r, ok := decimalPlaces(fc.Nominal); ok {
			c.Resolution = r
		} else {
			v.add(key+".resolution", "missing, and nominal %q does not show it; give the instrument's decimal places, e.g. 2", fc.Nominal)
		}
	}
	if fc.SD != nil {
		c.SD = *fc.SD
	} else {
		v.add(key+".sd", "missing; give the within-group standard deviation, e.g. 0.8")
	}
	if fc.Rate != nil {
		c.Rate = *fc.Rate
	} else {
		v.add(key+".rate", "missing; give the values per second from each group, e.g. 2")
	}
	switch fc.Arrivals {
	case "", "poisson":
	case "regular":
		c.Arrivals = Regular
	default:
		v.add(key+".arrivals", "%q: use poisson or regular", fc.Arrivals)
	}
	switch fc.ValueFormat {
	case "", "string":
	case "number":
		c.ValueFormat = ValueNumber
	default:
		v.add(key+".value_format", "%q: use string or number", fc.ValueFormat)
	}
	switch fc.TimeFormat {
	case "", "rfc3339":
	case "unix_ms":
		c.TimeFormat = TimeUnixMilli
	default:
		v.add(key+".time_format", "%q: use rfc3339 or unix_ms", fc.TimeFormat)
	}
	for j := range fc.Event {
		fe := &fc.Event[j]
		ekey := fmt.Sprintf("%s.event[%d]", key, j)
		e := Event{
			Group:    fe.Group,
			At:       fileDuration(v, ekey+".at", fe.At),
			Duration: fileDuration(v, ekey+".duration", fe.Duration),
		}
		kind, ok := parseEventKind(fe.Kind)
		switch {
		case fe.Kind == "":
			v.add(ekey+".kind", "missing; use shift, spread, drift or silence")
		case !ok:
			v.add(ekey+".kind", "%q: use shift, spread, drift or silence", fe.Kind)
		}
		e.Kind = kind
		if fe.By != nil {
			e.By = *fe.By
		} else if kind == Shift || kind == Drift {
			v.add(ekey+".by", "missing; a %s needs the move of the mean in the characteristic's units, e.g. by = 1.5", kind)
		}
		if fe.Factor != nil {
			e.Factor = *fe.Factor
		} else if kind == Spread {
			v.add(ekey+".factor", "missing; a spread needs the factor of the standard deviation, e.g. factor = 3")
		}
		c.Events = append(c.Events, e)
	}
	return c
}

// fileDuration reads a duration such as "5m"; "" is 0.
func fileDuration(v *invalid, key, s string) time.Duration {
	if s == "" {
		return 0
	}
	d, err := time.ParseDuration(s)
	if err != nil {
		v.add(key, "%q is not a duration; write e.g. \"90s\", \"5m\" or \"1h30m\" (no days: \"24h\")", s)
	}
	return d
}

// decimalPlaces returns the number of digits after the point of plain
// decimal text ("500.00" has 2), or false for text with an exponent.
func decimalPlaces(s string) (int, bool) {
	if strings.ContainsAny(s, "eE") {
		return 0, false
	}
	if i := strings.IndexByte(s, '.'); i >= 0 {
		return len(s) - i - 1, true
	}
	return 0, true
}

// decodeError turns an error of the TOML decoder into FieldErrors.
func decodeError(err error, name string) error {
	var v invalid
	var sm *toml.StrictMissingError
	var de *toml.DecodeError
	switch {
	case errors.As(err, &sm):
		for i := range sm.Errors {
			e := &sm.Errors[i]
			line, _ := e.Position()
			key := []string(e.Key())
			v.errs = append(v.errs, &FieldError{File: name, Line: line, Key: strings.Join(key, "."), Msg: unknownKeyMsg(key)})
		}
	case errors.As(err, &de):
		line, _ := de.Position()
		key := []string(de.Key())
		msg := strings.TrimPrefix(de.Error(), "toml: ")
		switch {
		case len(key) == 0:
		case strings.HasPrefix(msg, "cannot decode TOML "):
			have := strings.Fields(strings.TrimPrefix(msg, "cannot decode TOML "))[0]
			msg = fmt.Sprintf("want %s, have a TOML %s", keyWant(key[len(key)-1]), have)
		case strings.Contains(msg, " cannot be stored in "):
			// "negative integer value -1 cannot be stored in uint64"
			have := strings.Fields(msg[:strings.Index(msg, " cannot be stored in ")])
			msg = fmt.Sprintf("want %s, have %s", keyWant(key[len(key)-1]), have[len(have)-1])
		}
		v.errs = append(v.errs, &FieldError{File: name, Line: line, Key: strings.Join(key, "."), Msg: msg})
	default:
		v.errs = append(v.errs, &FieldError{File: name, Msg: err.Error()})
	}
	return v.err()
}

// unknownKeyMsg says that key is unknown and which keys its table knows.
func unknownKeyMsg(key []string) string {
	t := reflect.TypeFor[fileScenario]()
	for _, part := range key[:len(key)-1] {
		f, ok := fieldByTag(t, part)
		if !ok {
			return "unknown key"
		}
		t = f.Type
		for t.Kind() == reflect.Pointer || t.Kind() == reflect.Slice {
			t = t.Elem()
		}
	}
	var known []string
	for i := range t.NumField() {
		known = append(known, t.Field(i).Tag.Get("toml"))
	}
	where := "at the top"
	if len(key) > 1 {
		where = "in [" + strings.Join(key[:len(key)-1], ".") + "]"
	}
	return "unknown key; the keys " + where + " are " + strings.Join(known, ", ")
}

func fieldByTag(t reflect.Type, tag string) (reflect.StructField, bool) {
	if t.Kind() != reflect.Struct {
		return reflect.StructField{}, false
	}
	for i := range t.NumField() {
		if t.Field(i).Tag.Get("toml") == tag {
			return t.Field(i), true
		}
	}
	return reflect.StructField{}, false
}

// keyLines maps the dotted path of every key and table header in a TOML
// document, with array-of-tables indices ("characteristic[1].event[0].at"),
// to its 1-based line. Keys inside inline tables are not indexed (lineOf
// falls back to the enclosing key).
func keyLines(data []byte) map[string]int {
	lines := map[string]int{}
	counts := map[string]int{} // array of tables → elements so far
	var p unstable.Parser
	p.Reset(data)
	table := ""
	for p.NextExpression() {
		e := p.Expression()
		var parts []*unstable.Node
		it := e.Key()
		for it.Next() {
			parts = append(parts, it.Node())
		}
		if len(parts) == 0 {
			continue
		}
		line := p.Shape(parts[0].Raw).Start.Line
		switch e.Kind {
		case unstable.Table, unstable.ArrayTable:
			cur := ""
			for i, n := range parts {
				cur = joinKey(cur, string(n.Data))
				if e.Kind == unstable.ArrayTable && i == len(parts)-1 {
					idx := counts[cur]
					counts[cur] = idx + 1
					cur += "[" + strconv.Itoa(idx) + "]"
				} else if c, ok := counts[cur]; ok {
					cur += "[" + strconv.Itoa(c-1) + "]" // the last element so far
				}
			}
			table = cur
			lines[cur] = line
		case unstable.KeyValue:
			cur := table
			for _, n := range parts {
				cur = joinKey(cur, string(n.Data))
			}
			lines[cur] = line
		}
	}
	return lines
}

func joinKey(a, b string) string {
	if a == "" {
		return b
	}
	return a + "." + b
}

// lineOf returns the line of key, or of the nearest enclosing key or table
// that has one (for a missing key, its table's header); 0 when none has.
func lineOf(lines map[string]int, key string) int {
	for key != "" {
		if l, ok := lines[key]; ok {
			return l
		}
		i := strings.LastIndexAny(key, ".[")
		if i < 0 {
			break
		}
		key = key[:i]
	}
	return 0
}
