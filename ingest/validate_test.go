package ingest

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/stats"
)

// testNow is the fixed "now" of the validation tests.
var testNow = time.Date(2026, 3, 1, 8, 0, 0, 0, time.UTC)

func ptr(x float64) *float64 { return &x }

// fillWeightRules are the rules of a 500 g fill weight, centred on its
// nominal.
func fillWeightRules(t *testing.T) CharacteristicRules {
	return CharacteristicRules{Unit: "g", Min: ptr(400), Max: ptr(600), Reference: mustReference(t, "500")}
}

func newValidator(t *testing.T, cfg ValidatorConfig) *Validator {
	t.Helper()
	v, err := NewValidator(cfg)
	if err != nil {
		t.Fatalf("NewValidator: %v", err)
	}
	return v
}

// checkOne decodes msg, which must carry one payload, and checks it.
func checkOne(t *testing.T, v *Validator, d *Decoder, subject, msg string, out *Measurement) (Reason, error) {
	t.Helper()
	ps, err := d.Decode([]byte(msg))
	if err != nil {
		return v.Reject([]byte(subject), err)
	}
	if len(ps) != 1 {
		t.Fatalf("%q: %d payloads, want 1", msg, len(ps))
	}
	return v.Check(testNow, []byte(subject), &ps[0], out)
}

func TestCheckAccepts(t *testing.T) {
	tmpl, err := ParseSubjectTemplate("plant.<site>.<characteristic>.<group>")
	if err != nil {
		t.Fatal(err)
	}
	v := newValidator(t, ValidatorConfig{
		Template:        tmpl,
		Characteristics: map[string]CharacteristicRules{"fill-weight": fillWeightRules(t)},
	})
	var d Decoder
	var m Measurement
	r, err := checkOne(t, v, &d, "plant.north.fill-weight.L3",
		`{"value": 500.12, "time": "2026-03-01T07:59:30.5Z", "id": "b-17", "unit": "g", "group": "L3"}`, &m)
	if r != ReasonNone || err != nil {
		t.Fatalf("rejected: %v %v", r, err)
	}
	if m.Characteristic != "fill-weight" || string(m.Group) != "L3" || string(m.Text) != "500.12" ||
		string(m.ID) != "b-17" || !m.Time.Equal(testNow.Add(-29500*time.Millisecond)) {
		t.Errorf("measurement %+v", m)
	}
	// 500.12 − 500 is exactly 0.12 before rounding: the float64 nearest 0.12.
	if m.Value != 0.12 || !m.Exact {
		t.Errorf("centred value %v (exact %v), want 0.12 exactly rounded", m.Value, m.Exact)
	}
	if m.Reference.Decimal().String() != "500" {
		t.Errorf("reference %v, want 500", m.Reference.Decimal())
	}
	if site, _ := m.Subject.Label("site"); string(site) != "north" {
		t.Errorf("label site %q", site)
	}

	// A payload without time is taken at testNow; a payload without unit is
	// accepted.
	r, err = checkOne(t, v, &d, "plant.north.fill-weight.L1", `"499.5"`, &m)
	if r != ReasonNone || err != nil || !m.Time.Equal(testNow) || m.Value != -0.5 || string(m.Group) != "L1" {
		t.Errorf("bare value: %v %v %+v", r, err, m)
	}
	if c := v.Counters(); c.Accepted() != 2 || c.RejectedTotal() != 0 {
		t.Errorf("counters: %d accepted, %d rejected", c.Accepted(), c.RejectedTotal())
	}
}

func TestCheckFirstValueIsReference(t *testing.T) {
	v := newValidator(t, ValidatorConfig{})
	var d Decoder
	var m Measurement
	if _, ok := v.Reference("cap-torque"); ok {
		t.Fatal("reference before any value")
	}
	// A rejected first value fixes nothing.
	if r, _ := checkOne(t, v, &d, "meas.cap-torque.H1", `{"value": 2.35, "time": "2020-01-01T00:00:00Z"}`, &m); r != ReasonTooOld {
		t.Fatalf("reason %v, want too_old", r)
	}
	if _, ok := v.Reference("cap-torque"); ok {
		t.Fatal("a rejected value fixed the reference")
	}
	for _, c := range []struct {
		text string
		want float64
	}{{"2.35", 0}, {"2.40", 0.05}, {"2.3", -0.05}} {
		if r, err := checkOne(t, v, &d, "meas.cap-torque.H2", c.text, &m); r != ReasonNone {
			t.Fatalf("%s: %v %v", c.text, r, err)
		}
		if want := c.want; m.Value != want {
			t.Errorf("%s centred to %v, want %v", c.text, m.Value, want)
		}
	}
	ref, ok := v.Reference("cap-torque")
	if !ok || ref.Decimal().String() != "2.35" || m.Reference.Decimal() != ref.Decimal() {
		t.Errorf("reference %v %v, measurement's %v; want 2.35", ref.Decimal(), ok, m.Reference.Decimal())
	}
}

func TestSetReference(t *testing.T) {
	v := newValidator(t, ValidatorConfig{Characteristics: map[string]CharacteristicRules{"fill-weight": fillWeightRules(t)}})
	if err := v.SetReference("fill-weight", *mustReference(t, "500.0")); err != nil {
		t.Errorf("same reference: %v", err)
	}
	if err := v.SetReference("fill-weight", *mustReference(t, "250")); !errors.Is(err, ErrOption) {
		t.Errorf("different reference: %v, want ErrOption", err)
	}
	if err := v.SetReference("seal-temp", *mustReference(t, "181.5")); err != nil {
		t.Errorf("restore an unknown characteristic: %v", err)
	}
	var d Decoder
	var m Measurement
	if r, err := checkOne(t, v, &d, "meas.seal-temp.J1", `182`, &m); r != ReasonNone || m.Value != 0.5 {
		t.Errorf("after restore: %v %v, value %v, want 0.5", r, err, m.Value)
	}
	strict := newValidator(t, ValidatorConfig{Unknown: UnknownReject})
	if err := strict.SetReference("seal-temp", *mustReference(t, "181.5")); !errors.Is(err, ErrOption) {
		t.Errorf("restore unknown under reject: %v, want ErrOption", err)
	}
}

// rejectCase is one bad message and the reason it must be rejected for.
type rejectCase struct {
	name    string
	subject string
	msg     string
	reason  Reason
	says    string // part of the error message
}

func TestCheckRejects(t *testing.T) {
	noGroup, err := ParseSubjectTemplate("meas.<characteristic>")
	if err != nil {
		t.Fatal(err)
	}
	rules := map[string]CharacteristicRules{"fill-weight": fillWeightRules(t), "seal-temp": {Unit: "°C"}}
	const fw = "meas.fill-weight.L3"
	tests := []rejectCase{
		{"malformed JSON", fw, `{"value": 500.1`, ReasonNotParseable, "byte 15"},
		{"not JSON at all", fw, `value=500.1`, ReasonNotParseable, "double quotes"},
		{"no value", fw, `{"time": "2026-03-01T08:00:00Z"}`, ReasonNotParseable, `no "value" field`},
		{"bad time", fw, `{"value": 500.1, "time": "2026-03-01 8:00"}`, ReasonNotParseable, "RFC 3339"},
		{"subject does not match", "meas.fill-weight", `500.1`, ReasonNotParseable, "does not match the subject template"},
		{"group conflict", fw, `{"value": 500.1, "group": "L4"}`, ReasonNotParseable, `says "L4"`},
		{"characteristic conflict", fw, `{"value": 500.1, "characteristic": "fill-volume"}`, ReasonNotParseable, `says "fill-volume"`},
		{"group name with control character", "meas.seal-temp.J\x01", `181.5`, ReasonNotParseable, "control character"},
		{"value is a decimal comma", fw, `{"value": "500,1"}`, ReasonNotANumber, "use '.' as the decimal separator"},
		{"value is null", fw, `{"value": null}`, ReasonNotANumber, "value is null"},
		{"value is text", fw, `"five hundred"`, ReasonNotANumber, "not a decimal number"},
		{"value is empty", fw, `{"value": ""}`, ReasonNotANumber, "empty"},
		{"value is NaN", fw, `NaN`, ReasonNotFinite, "not a finite number"},
		{"value is -inf", fw, `{"value": "-inf"}`, ReasonNotFinite, "not a finite number"},
		{"above the plausible range", fw, `{"value": 5001.2, "unit": "g"}`, ReasonOutOfRange, "above the plausible maximum 600"},
		{"below the plausible range", fw, `50.01`, ReasonOutOfRange, "below the plausible minimum 400"},
		{"out of float64", "meas.new-thing.L1", `1e400`, ReasonOutOfRange, "out of the range"},
		{"wrong unit", fw, `{"value": 0.5001, "unit": "kg"}`, ReasonWrongUnit, `measured in "g"`},
		{"unit differs in case", "meas.seal-temp.J1", `{"value": 181.5, "unit": "°c"}`, ReasonWrongUnit, `"°C"`},
		{"from the future", fw, `{"value": 500.1, "time": "2026-03-01T09:00:00Z"}`, ReasonFromFuture, "1h0m0s ahead"},
		{"too old", fw, `{"value": 500.1, "time": "2026-02-01T08:00:00Z"}`, ReasonTooOld, "before now"},
		{"seconds for milliseconds", fw, `{"value": 500.1, "time": 1772352000}`, ReasonTooOld, "Unix seconds"},
		{"no group", "meas.fill-weight", `{"value": 500.1}`, ReasonNoGroup, `no "group" field`},
		{"empty group", "meas.fill-weight", `{"value": 500.1, "group": ""}`, ReasonNoGroup, "no group"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			cfg := ValidatorConfig{Characteristics: rules}
			if tt.reason == ReasonNoGroup {
				cfg.Template = noGroup
			}
			assertRejected(t, newValidator(t, cfg), nil, tt)
		})
	}

	t.Run("unknown characteristic", func(t *testing.T) {
		v := newValidator(t, ValidatorConfig{Characteristics: rules, Unknown: UnknownReject})
		assertRejected(t, v, nil, rejectCase{"", "meas.fill-volume.L3", `500.1`, ReasonUnknownCharacteristic, "not configured"})
	})
	t.Run("too many unknown characteristics", func(t *testing.T) {
		v := newValidator(t, ValidatorConfig{MaxCharacteristics: 2})
		var d Decoder
		var m Measurement
		for _, c := range []string{"a", "b", "a"} {
			if r, err := checkOne(t, v, &d, "meas."+c+".L1", `1`, &m); r != ReasonNone {
				t.Fatalf("%s: %v %v", c, r, err)
			}
		}
		assertRejected(t, v, &d, rejectCase{"", "meas.c.L1", `1`, ReasonUnknownCharacteristic, "2 unknown characteristics"})
	})
	t.Run("duplicate id", func(t *testing.T) {
		v := newValidator(t, ValidatorConfig{Characteristics: rules})
		var d Decoder
		var m Measurement
		msg := `{"value": 500.1, "id": "L3-000123"}`
		if r, err := checkOne(t, v, &d, "meas.fill-weight.L3", msg, &m); r != ReasonNone {
			t.Fatalf("first: %v %v", r, err)
		}
		// The same id for another characteristic is not a duplicate.
		if r, err := checkOne(t, v, &d, "meas.seal-temp.L3", `{"value": 181, "id": "L3-000123"}`, &m); r != ReasonNone {
			t.Fatalf("other characteristic: %v %v", r, err)
		}
		assertRejected(t, v, &d, rejectCase{"", "meas.fill-weight.L2", msg, ReasonDuplicateID, `id "L3-000123" was already accepted`})
	})
}

// TestCheckStoreLimits: a measurement the store or the windows could not
// keep is rejected by Check, with its reason, and one at the limit passes.
func TestCheckStoreLimits(t *testing.T) {
	digits := func(n int) string { return "1." + strings.Repeat("5", n-2) }
	longID := strings.Repeat("x", MaxIDLen+1)
	for _, tc := range []rejectCase{
		{"value text too long", "meas.fill-weight.L3", `{"value": "` + digits(MaxValueText+1) + `"}`, ReasonNotANumber, "fewer digits"},
		{"id too long", "meas.fill-weight.L3", `{"value": 1.5, "id": "` + longID + `"}`, ReasonNotParseable, "shorter id"},
		{"time before 1823", "meas.fill-weight.L3", `{"value": 1.5, "time": "1800-01-01T00:00:00Z"}`, ReasonTooOld, "before 1823"},
		{"time after 2116", "meas.fill-weight.L3", `{"value": 1.5, "time": "2200-01-01T00:00:00Z"}`, ReasonFromFuture, "after 2116"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			// No time limits: only the hard bounds apply.
			v := newValidator(t, ValidatorConfig{MaxAge: -1, MaxFuture: -1})
			assertRejected(t, v, nil, tc)
		})
	}
	v := newValidator(t, ValidatorConfig{MaxAge: -1, MaxFuture: -1})
	var d Decoder
	var m Measurement
	atLimit := `{"value": "` + digits(MaxValueText) + `", "id": "` + longID[1:] + `", "time": "2116-01-01T00:00:00Z"}`
	if r, err := checkOne(t, v, &d, "meas.fill-weight.L3", atLimit, &m); r != ReasonNone {
		t.Errorf("at the limits: %v %v", r, err)
	}
}

// assertRejected checks that tc is rejected for its reason, counted under
// it alone, and produces no measurement.
func assertRejected(t *testing.T, v *Validator, d *Decoder, tc rejectCase) {
	t.Helper()
	if d == nil {
		d = new(Decoder)
	}
	c := v.Counters()
	before := make(map[Reason]uint64)
	for r := range Reasons() {
		before[r] = c.Rejected(r)
	}
	accepted := c.Accepted()
	marker := Measurement{Characteristic: "untouched"}
	out := marker
	r, err := checkOne(t, v, d, tc.subject, tc.msg, &out)
	if r != tc.reason {
		t.Fatalf("%q on %q: reason %v (%v), want %v", tc.msg, tc.subject, r, err, tc.reason)
	}
	var re *RejectError
	if !errors.As(err, &re) || re.Reason != r {
		t.Fatalf("error %v (%T) is not a *RejectError for %v", err, err, r)
	}
	if !strings.Contains(err.Error(), tc.says) || strings.ContainsAny(err.Error(), "\r\n") {
		t.Errorf("message %q does not say %q on one line", err, tc.says)
	}
	if out.Characteristic != marker.Characteristic || out.Text != nil || out.Group != nil {
		t.Errorf("a rejected measurement wrote %+v", out)
	}
	if ReasonOf(err) != r {
		t.Errorf("ReasonOf(err) = %v, want %v", ReasonOf(err), r)
	}
	for reason := range Reasons() {
		want := before[reason]
		if reason == tc.reason {
			want++
		}
		if got := c.Rejected(reason); got != want {
			t.Errorf("counter %v = %d, want %d", reason, got, want)
		}
	}
	if c.Accepted() != accepted {
		t.Errorf("accepted counter moved from %d to %d", accepted, c.Accepted())
	}
	if m, ok := v.Template().Match([]byte(tc.subject)); ok && re.Characteristic != string(m.Characteristic) && r != ReasonNotParseable {
		t.Errorf("reject names characteristic %q, subject %q", re.Characteristic, m.Characteristic)
	}
}

func TestCheckIDMemory(t *testing.T) {
	v := newValidator(t, ValidatorConfig{IDMemory: 3})
	var d Decoder
	var m Measurement
	send := func(id string) Reason {
		t.Helper()
		r, _ := checkOne(t, v, &d, "meas.fill-weight.L1", fmt.Sprintf(`{"value": 500, "id": %q}`, id), &m)
		return r
	}
	for _, step := range []struct {
		id   string
		want Reason
	}{
		{"a", ReasonNone}, {"b", ReasonNone}, {"c", ReasonNone},
		{"a", ReasonDuplicateID},
		{"d", ReasonNone}, // a leaves
		{"a", ReasonNone}, // b leaves
		{"c", ReasonDuplicateID},
		{"b", ReasonNone}, // c leaves
		{"c", ReasonNone},
		{"d", ReasonNone}, // d left when c came back
	} {
		if got := send(step.id); got != step.want {
			t.Fatalf("id %s: %v, want %v", step.id, got, step.want)
		}
	}
	// Forget lets a measurement whose commit failed through again.
	if send("e") != ReasonNone {
		t.Fatal("e rejected")
	}
	v.Forget(&m)
	if got := send("e"); got != ReasonNone {
		t.Errorf("e after Forget: %v", got)
	}
	if got := send("e"); got != ReasonDuplicateID {
		t.Errorf("e again: %v", got)
	}

	off := newValidator(t, ValidatorConfig{IDMemory: -1})
	for range 2 {
		if r, err := checkOne(t, off, &d, "meas.x.L1", `{"value": 1, "id": "a"}`, &m); r != ReasonNone {
			t.Fatalf("duplicate detection off: %v %v", r, err)
		}
	}
}

func TestCheckTimeLimits(t *testing.T) {
	var d Decoder
	var m Measurement
	msg := func(offset time.Duration) string {
		return fmt.Sprintf(`{"value": 1, "time": %q}`, testNow.Add(offset).Format(time.RFC3339Nano))
	}
	v := newValidator(t, ValidatorConfig{MaxFuture: time.Minute, MaxAge: time.Hour})
	for _, c := range []struct {
		offset time.Duration
		want   Reason
	}{
		{time.Minute, ReasonNone}, {time.Minute + time.Nanosecond, ReasonFromFuture},
		{-time.Hour, ReasonNone}, {-time.Hour - time.Nanosecond, ReasonTooOld},
	} {
		if r, err := checkOne(t, v, &d, "meas.x.L1", msg(c.offset), &m); r != c.want {
			t.Errorf("offset %v: %v (%v), want %v", c.offset, r, err, c.want)
		}
	}
	unlimited := newValidator(t, ValidatorConfig{MaxFuture: -1, MaxAge: -1})
	for _, offset := range []time.Duration{100 * 24 * time.Hour, -1000 * 24 * time.Hour} {
		if r, err := checkOne(t, unlimited, &d, "meas.x.L1", msg(offset), &m); r != ReasonNone {
			t.Errorf("offset %v without limits: %v %v", offset, r, err)
		}
	}
}

func TestNewValidatorErrors(t *testing.T) {
	for name, cfg := range map[string]ValidatorConfig{
		"min above max": {Characteristics: map[string]CharacteristicRules{"x": {Min: ptr(2), Max: ptr(1)}}},
		"NaN bound":     {Characteristics: map[string]CharacteristicRules{"x": {Max: ptr(math.NaN())}}},
		"dot in name":   {Characteristics: map[string]CharacteristicRules{"fill.weight": {}}},
		"empty name":    {Characteristics: map[string]CharacteristicRules{"": {}}},
		"control unit":  {Characteristics: map[string]CharacteristicRules{"x": {Unit: "g\n"}}},
		"bad policy":    {Unknown: 7},
		"negative max":  {MaxCharacteristics: -1},
	} {
		if _, err := NewValidator(cfg); !errors.Is(err, ErrOption) {
			t.Errorf("%s: %v, want ErrOption", name, err)
		}
	}
}

func TestUnknownPolicy(t *testing.T) {
	for _, p := range []UnknownPolicy{UnknownAccept, UnknownReject} {
		if q, err := ParseUnknownPolicy(p.String()); err != nil || q != p {
			t.Errorf("%v: round trip gives %v %v", p, q, err)
		}
	}
	if _, err := ParseUnknownPolicy("ignore"); !errors.Is(err, ErrOption) {
		t.Errorf("ParseUnknownPolicy(ignore): %v", err)
	}
}

// idMessages cycles through more ids than the validator remembers, so that
// the duplicate memory is in its steady state of one in, one out.
func idMessages(n int) [][]byte {
	msgs := make([][]byte, n)
	for i := range msgs {
		msgs[i] = fmt.Appendf(nil, `{"value": 500.%02d, "time": "2026-03-01T07:59:%02d.125Z", "id": "L3-%06d", "unit": "g"}`, i%100, i%60, i)
	}
	return msgs
}

func TestCheckDoesNotAllocate(t *testing.T) {
	v := newValidator(t, ValidatorConfig{
		Characteristics: map[string]CharacteristicRules{"fill-weight": fillWeightRules(t)},
		IDMemory:        500,
	})
	msgs := idMessages(2000)
	subject := []byte("meas.fill-weight.L3")
	var d Decoder
	var m Measurement
	i := 0
	run := func() {
		ps, err := d.Decode(msgs[i%len(msgs)])
		i++
		if err != nil {
			t.Fatal(err)
		}
		if r, err := v.Check(testNow, subject, &ps[0], &m); r != ReasonNone {
			t.Fatal(r, err)
		}
	}
	for range len(msgs) { // warm up: the id memory fills and wraps
		run()
	}
	// Check calls stats.Reference.Centre twice (centring, and the range
	// check). Called from outside package stats, Centre allocates its
	// receiver copy (with Go 1.26: the inlined method passes the copy's
	// address to a generic function, whose escape information does not
	// cross the package boundary). Whatever Centre costs is allowed here;
	// Check itself must add nothing.
	ref := fillWeightRules(t).Reference
	text := []byte("500.12")
	perCentre := testing.AllocsPerRun(100, func() { _, _, _ = ref.Centre(text) })
	if n := testing.AllocsPerRun(1000, run); n > 2*perCentre {
		t.Errorf("%v allocations per Decode and Check, want %v (those of two calls of Centre)", n, 2*perCentre)
	}
	if perCentre > 0 {
		t.Logf("stats.Reference.Centre allocates %v times per call from package ingest", perCentre)
	}
}

// BenchmarkValidate decodes and checks one object message with every
// check active (unit, range, time, duplicate id); the ids cycle through
// more than the duplicate memory holds.
func BenchmarkValidate(b *testing.B) {
	ref, _ := stats.ParseDecimal("500")
	r := stats.NewReference(ref)
	v, err := NewValidator(ValidatorConfig{
		Characteristics: map[string]CharacteristicRules{"fill-weight": {Unit: "g", Min: ptr(400), Max: ptr(600), Reference: &r}},
		IDMemory:        10000,
	})
	if err != nil {
		b.Fatal(err)
	}
	msgs := idMessages(20000)
	subject := []byte("meas.fill-weight.L3")
	var d Decoder
	var m Measurement
	b.ReportAllocs()
	i := 0
	for b.Loop() {
		ps, err := d.Decode(msgs[i%len(msgs)])
		i++
		if err != nil {
			b.Fatal(err)
		}
		if r, err := v.Check(testNow, subject, &ps[0], &m); r != ReasonNone {
			b.Fatal(r, err)
		}
	}
}

// TestRememberID: ids put back after a restart are duplicates; others, and
// the same id of another characteristic, are not.
func TestRememberID(t *testing.T) {
	v := newValidator(t, ValidatorConfig{Characteristics: map[string]CharacteristicRules{"fill-weight": fillWeightRules(t)}})
	v.RememberID("fill-weight", []byte("L3-000123"))
	v.RememberID("fill-weight", []byte("L3-000123")) // twice is once
	v.RememberID("not-known", []byte("L3-000123"))   // no such characteristic: nothing
	var d Decoder
	var m Measurement
	assertRejected(t, v, &d, rejectCase{"", "meas.fill-weight.L3", `{"value": 500.1, "id": "L3-000123"}`, ReasonDuplicateID, "already accepted"})
	if r, err := checkOne(t, v, &d, "meas.fill-weight.L3", `{"value": 500.1, "id": "L3-000124"}`, &m); r != ReasonNone {
		t.Errorf("another id: %v %v", r, err)
	}

	off := newValidator(t, ValidatorConfig{IDMemory: -1, Characteristics: map[string]CharacteristicRules{"fill-weight": fillWeightRules(t)}})
	off.RememberID("fill-weight", []byte("L3-000123"))
	if r, err := checkOne(t, off, &d, "meas.fill-weight.L3", `{"value": 500.1, "id": "L3-000123"}`, &m); r != ReasonNone {
		t.Errorf("duplicate detection off: %v %v", r, err)
	}
}
