package ingest

import (
	"bytes"
	"fmt"
	"hash/maphash"
	"math"
	"strconv"
	"time"
	"unicode/utf8"

	"github.com/lockstep-project/lockstep/stats"
)

// Defaults of ValidatorConfig.
const (
	DefaultMaxFuture          = 5 * time.Minute
	DefaultMaxAge             = 7 * 24 * time.Hour
	DefaultIDMemory           = 100000
	DefaultMaxCharacteristics = 1000
)

// MaxNameLen is the longest characteristic or group name accepted, in bytes.
const MaxNameLen = 128

// Limits of what lockstep keeps of a measurement (the store's raw values and
// the windows' event times); Check rejects a measurement beyond them, so
// that it is counted with its reason and never fails a store commit.
const (
	// MaxValueText is the longest decimal text of a value, in bytes.
	MaxValueText = 256
	// MaxIDLen is the longest id, in bytes.
	MaxIDLen = 255
	// maxEventNs bounds event times: ±2⁶² ns around the Unix epoch
	// (1823-11-12 to 2116-02-20), the range of window.Window.
	maxEventNs = 1 << 62
)

// UnknownPolicy says what happens to measurements of a characteristic that
// the configuration does not name.
type UnknownPolicy uint8

// Policies for unknown characteristics.
const (
	// UnknownAccept accepts them with default rules: any unit, no
	// plausible range, centred on their first value. The default.
	UnknownAccept UnknownPolicy = iota
	// UnknownReject rejects them as unknown_characteristic.
	UnknownReject
)

// String returns "accept" or "reject".
func (p UnknownPolicy) String() string {
	if p == UnknownReject {
		return "reject"
	}
	return "accept"
}

// ParseUnknownPolicy reads "accept" or "reject".
func ParseUnknownPolicy(s string) (UnknownPolicy, error) {
	switch s {
	case "accept":
		return UnknownAccept, nil
	case "reject":
		return UnknownReject, nil
	}
	return UnknownAccept, fmt.Errorf("ingest: unknown characteristics %q: %w: use accept or reject", short(s), ErrOption)
}

// CharacteristicRules are the validation settings of one characteristic.
type CharacteristicRules struct {
	// Unit is the characteristic's unit, e.g. "g". A measurement whose
	// payload names another unit (compared byte for byte, so "g" is not
	// "G") is rejected as wrong_unit; one that names none is accepted. ""
	// accepts any unit.
	Unit string
	// Min and Max bound the plausible range, inclusive, in the data's
	// units; nil leaves that side open. A value outside is rejected as
	// out_of_range: a sensor fault or a unit or decimal-point error, not a
	// process shift.
	Min, Max *float64
	// Reference is what the characteristic's values are centred on,
	// typically its nominal; nil means its first accepted value.
	Reference *stats.Reference
}

// ValidatorConfig configures a Validator. The zero value is usable: the
// default template, every characteristic accepted with default rules.
type ValidatorConfig struct {
	// Template maps subjects to characteristic, group and labels; nil means
	// DefaultSubjectTemplate.
	Template *SubjectTemplate
	// Characteristics holds the rules of each configured characteristic,
	// by name (the subject token). The map is copied.
	Characteristics map[string]CharacteristicRules
	// Unknown says what to do with characteristics not in
	// Characteristics; default UnknownAccept.
	Unknown UnknownPolicy
	// MaxFuture is how far a measurement's time may lie ahead of now
	// (clock skew between gateway and daemon); 0 means DefaultMaxFuture
	// (5 minutes), negative means no limit.
	MaxFuture time.Duration
	// MaxAge is how far a measurement's time may lie behind now; 0 means
	// DefaultMaxAge (7 days), negative means no limit. Danger: after an
	// outage longer than MaxAge, a durable consumer catching up rejects the
	// backlog as too_old; keep MaxAge at least as long as the stream's
	// retention, or disable it for a catch-up.
	MaxAge time.Duration
	// IDMemory is how many of the most recent ids each characteristic
	// remembers to reject duplicates (first in, first out); 0 means
	// DefaultIDMemory (100 000), negative turns duplicate detection off.
	// Memory is 24 to 40 bytes per id remembered (see idMemory), grown as
	// ids arrive.
	IDMemory int
	// MaxCharacteristics bounds the unknown characteristics accepted under
	// UnknownAccept, so that stray subjects cannot grow memory without
	// limit; 0 means DefaultMaxCharacteristics (1000). Measurements of
	// further ones are rejected as unknown_characteristic.
	MaxCharacteristics int
	// Counters receives a count for every measurement checked; nil means
	// a Counters of the Validator's own (see Validator.Counters).
	Counters *Counters
}

// Measurement is one accepted measurement. Its byte slices are views into
// the subject and the payload (see Payload): copy what must be kept.
type Measurement struct {
	// Characteristic is the characteristic's name.
	Characteristic string
	// Group is the group's name, from the subject or the payload.
	Group []byte
	// Time is the payload's time, or the now of Check when it had none.
	Time time.Time
	// Text is the value's decimal text, exactly as sent.
	Text []byte
	// Value is the value centred on Reference: value − reference, computed
	// exactly in decimal and rounded once (see stats.Reference.Centre).
	Value float64
	// Exact is false in the rare cases where Centre had to round the
	// value and the reference separately.
	Exact bool
	// ID is the payload's id, or empty.
	ID []byte
	// Reference is what Value is centred on. It is fixed for the
	// characteristic from its first accepted value when none is
	// configured; the store must persist it before any sums that use it,
	// and restore it with Validator.SetReference after a restart.
	Reference stats.Reference
	// Subject holds what the subject said, including its labels.
	Subject SubjectMatch
}

// Validator turns payloads into measurements or rejects them with a
// reason, counting each in its Counters.
//
// A Validator keeps state: each characteristic's reference and its recent
// ids. It is not safe for concurrent use; give each consumer goroutine its
// own, or serialise the calls. Its Counters are safe to read concurrently.
type Validator struct {
	tmpl      *SubjectTemplate
	chars     map[string]*charState
	unknown   UnknownPolicy
	maxFuture time.Duration
	maxAge    time.Duration
	idMemory  int
	maxChars  int
	added     int // unknown characteristics accepted so far
	counters  *Counters
	seed      maphash.Seed
	last      *charState   // the characteristic of the last Check, if known
	match     SubjectMatch // Check's match of the subject, reused
	pmatch    SubjectMatch // Prefetch's
	prefetch  []*uint64    // places noted by Prefetch, at most maxPrefetch
}

// charState is what a Validator knows of one characteristic.
type charState struct {
	name   string
	rules  CharacteristicRules
	ref    stats.Reference
	hasRef bool
	ids    idMemory

	prefetched uint64 // see Prefetch
}

// NewValidator returns a Validator for cfg, or an error wrapping ErrOption
// that names the setting at fault.
func NewValidator(cfg ValidatorConfig) (*Validator, error) {
	v := &Validator{
		tmpl:      cfg.Template,
		chars:     make(map[string]*charState, len(cfg.Characteristics)),
		prefetch:  make([]*uint64, 0, maxPrefetch),
		unknown:   cfg.Unknown,
		maxFuture: orDefault(cfg.MaxFuture, DefaultMaxFuture),
		maxAge:    orDefault(cfg.MaxAge, DefaultMaxAge),
		idMemory:  orDefault(cfg.IDMemory, DefaultIDMemory),
		maxChars:  cfg.MaxCharacteristics,
		counters:  cfg.Counters,
		seed:      maphash.MakeSeed(),
	}
	if v.tmpl == nil {
		t, err := ParseSubjectTemplate(DefaultSubjectTemplate)
		if err != nil {
			return nil, err
		}
		v.tmpl = t
	}
	if v.counters == nil {
		v.counters = new(Counters)
	}
	switch {
	case cfg.Unknown > UnknownReject:
		return nil, fmt.Errorf("ingest: Unknown is %d: %w: use UnknownAccept or UnknownReject", cfg.Unknown, ErrOption)
	case v.maxChars < 0:
		return nil, fmt.Errorf("ingest: MaxCharacteristics is %d: %w: use 0 for the default of %d, or a positive number",
			v.maxChars, ErrOption, DefaultMaxCharacteristics)
	case v.maxChars == 0:
		v.maxChars = DefaultMaxCharacteristics
	}
	for name, rules := range cfg.Characteristics {
		if err := checkRules(name, rules); err != nil {
			return nil, err
		}
		cs := &charState{name: name, rules: rules}
		if rules.Reference != nil {
			cs.ref, cs.hasRef = *rules.Reference, true
		}
		v.chars[name] = cs
	}
	return v, nil
}

// orDefault returns x, or def when x is zero.
func orDefault[T time.Duration | int](x, def T) T {
	if x == 0 {
		return def
	}
	return x
}

// checkRules checks the rules of the characteristic name.
func checkRules(name string, r CharacteristicRules) error {
	fail := func(format string, args ...any) error {
		return fmt.Errorf("ingest: characteristic %q: %s: %w", short(name), fmt.Sprintf(format, args...), ErrOption)
	}
	if problem := nameProblem([]byte(name)); problem != "" {
		return fail("the name %s", problem)
	}
	if name == "" || bytes.ContainsAny([]byte(name), ". *>") {
		return fail("the name must be one subject token: not empty, without '.', ' ', '*' or '>'")
	}
	if problem := nameProblem([]byte(r.Unit)); problem != "" {
		return fail("unit %q %s", short(r.Unit), problem)
	}
	for _, b := range []struct {
		what string
		x    *float64
	}{{"Min", r.Min}, {"Max", r.Max}} {
		if b.x != nil && (math.IsNaN(*b.x) || math.IsInf(*b.x, 0)) {
			return fail("%s is %v; give a finite bound, or none", b.what, *b.x)
		}
	}
	if r.Min != nil && r.Max != nil && *r.Min > *r.Max {
		return fail("Min %v is above Max %v; swap them", *r.Min, *r.Max)
	}
	return nil
}

// nameProblem describes why b cannot be a characteristic or group name
// (or a unit), or returns "". It does not allocate.
func nameProblem(b []byte) string {
	if len(b) > MaxNameLen {
		return "is longer than " + strconv.Itoa(MaxNameLen) + " bytes"
	}
	if !utf8.Valid(b) {
		return "is not valid UTF-8"
	}
	for _, c := range b {
		if c < 0x20 || c == 0x7f {
			return "contains a control character"
		}
	}
	return ""
}

// Counters returns the counters the Validator counts in.
func (v *Validator) Counters() *Counters { return v.counters }

// Template returns the subject template.
func (v *Validator) Template() *SubjectTemplate { return v.tmpl }

// Reference returns the reference of the characteristic name, and false when
// it has none yet (it is not configured, and no value of it was accepted).
func (v *Validator) Reference(name string) (stats.Reference, bool) {
	if cs := v.chars[name]; cs != nil && cs.hasRef {
		return cs.ref, true
	}
	return stats.Reference{}, false
}

// SetReference fixes the reference of the characteristic name, as restored
// from the store after a restart, before any measurement of it is checked.
// It fails, wrapping ErrOption, when the characteristic already has a
// different reference, or is unknown and unknown characteristics are
// rejected.
func (v *Validator) SetReference(name string, ref stats.Reference) error {
	cs := v.chars[name]
	switch {
	case cs == nil && v.unknown == UnknownReject:
		return fmt.Errorf("ingest: set reference of %q: %w: the characteristic is not configured and unknown characteristics are rejected", short(name), ErrOption)
	case cs == nil:
		if problem := nameProblem([]byte(name)); problem != "" || name == "" {
			return fmt.Errorf("ingest: set reference of %q: %w: the name %s", short(name), ErrOption, problem)
		}
		cs = &charState{name: name}
		v.chars[name] = cs
		v.added++
	case cs.hasRef && cs.ref.Decimal() != ref.Decimal():
		return fmt.Errorf("ingest: set reference of %q to %s: %w: it is already %s; the stored sums and the configuration disagree",
			short(name), ref.Decimal(), ErrOption, cs.ref.Decimal())
	}
	cs.ref, cs.hasRef = ref, true
	return nil
}

// Reject counts a message that Decoder.Decode refused as a whole and
// returns its reason and a *RejectError naming the characteristic as far as
// the subject tells it. Such a message never reaches Check.
func (v *Validator) Reject(subject []byte, err error) (Reason, error) {
	r := ReasonOf(err)
	if r == ReasonNone {
		r = ReasonNotParseable
	}
	v.counters.Add(r)
	m, _ := v.tmpl.Match(subject)
	return r, &RejectError{Reason: r, Characteristic: string(m.Characteristic), Err: err}
}

// Check validates one payload that arrived on subject at now. It returns
// ReasonNone and fills in out when the measurement is accepted; otherwise
// it returns the reason and a *RejectError, and leaves out alone. Either way
// the outcome is counted in the Validator's Counters.
//
// Where the characteristic and the group come from: the characteristic is
// always the subject's <characteristic> token; the group is the subject's
// <group> token, or, when the template has none, the payload's "group"
// field. The subject takes precedence because the subject is what NATS
// routes and partitions by; when the payload names the characteristic or
// group as well and disagrees with the subject, the measurement is rejected
// as not_parseable, since one of the two is misconfigured.
//
// Checks in order, the first that fails giving the reason: a payload error
// (Payload.Err); the subject against the template; characteristic and group
// names (at most MaxNameLen bytes of UTF-8 without control characters);
// no_group; unknown_characteristic; the lengths of the value text and the
// id (MaxValueText: not_a_number; MaxIDLen: not_parseable); the value
// (not_a_number, not_finite, out_of_range of float64); wrong_unit; the plausible range (out_of_range);
// from_future and too_old (a payload without time takes now; times outside
// 1823 to 2116 are refused whatever the limits); duplicate_id.
// A rejected measurement changes nothing but the counters: its id is not
// remembered and it does not fix a reference.
//
// Apart from what stats.Reference.Centre allocates, Check does not allocate
// for an accepted measurement, except when it fixes a characteristic's
// reference or first sees an unknown characteristic, and while the id
// memory grows.
func (v *Validator) Check(now time.Time, subject []byte, p *Payload, out *Measurement) (Reason, error) {
	if re := v.check(now, subject, p, out); re != nil {
		v.counters.Add(re.Reason)
		return re.Reason, re
	}
	v.counters.Add(ReasonNone)
	return ReasonNone, nil
}

func (v *Validator) check(now time.Time, subject []byte, p *Payload, out *Measurement) *RejectError {
	m := &v.match
	if !v.tmpl.match(subject, m) {
		return reject(ReasonNotParseable, p.Characteristic, fmt.Sprintf(
			"subject %q does not match the subject template %q; publish to %s or change the template",
			short(string(subject)), v.tmpl.String(), v.tmpl.Filter()), nil)
	}
	char := m.Characteristic
	if p.Err != nil {
		return reject(ReasonOf(p.Err), char, "", p.Err)
	}
	if len(p.Characteristic) > 0 && !bytes.Equal(p.Characteristic, char) {
		return reject(ReasonNotParseable, char, fmt.Sprintf(
			"the subject names characteristic %q but the payload's \"characteristic\" field says %q; make the publisher agree, or drop the field",
			short(string(char)), short(string(p.Characteristic))), nil)
	}
	// The characteristic's state, if known (no side effects): a known name
	// was checked when it became known, so only others need nameProblem.
	cs := v.last
	if cs == nil || cs.name != string(char) {
		cs = v.chars[string(char)]
	}
	if cs == nil {
		if problem := nameProblem(char); problem != "" {
			return reject(ReasonNotParseable, nil, fmt.Sprintf("characteristic name %q %s", short(string(char)), problem), nil)
		}
	}
	group := m.Group
	switch {
	case !v.tmpl.HasGroup():
		group = p.Group
	case len(p.Group) > 0 && !bytes.Equal(p.Group, group):
		return reject(ReasonNotParseable, char, fmt.Sprintf(
			"the subject names group %q but the payload's \"group\" field says %q; make the publisher agree, or drop the field",
			short(string(group)), short(string(p.Group))), nil)
	}
	if len(group) == 0 {
		return reject(ReasonNoGroup, char, fmt.Sprintf(
			"no group: the subject %q has no <group> token and the payload no \"group\" field; add one of them",
			short(string(subject))), nil)
	}
	if problem := nameProblem(group); problem != "" {
		return reject(ReasonNotParseable, char, fmt.Sprintf("group name %q %s", short(string(group)), problem), nil)
	}

	if cs == nil {
		switch {
		case v.unknown == UnknownReject:
			return reject(ReasonUnknownCharacteristic, char, fmt.Sprintf(
				"characteristic %q is not configured; add it to the configuration, or accept unknown characteristics",
				short(string(char))), nil)
		case v.added >= v.maxChars:
			return reject(ReasonUnknownCharacteristic, char, fmt.Sprintf(
				"characteristic %q is not configured and %d unknown characteristics are already accepted; configure it, or check the publishers' subjects",
				short(string(char)), v.maxChars), nil)
		}
	}
	var rules CharacteristicRules
	var ref stats.Reference
	hasRef := false
	if cs != nil {
		rules, ref, hasRef = cs.rules, cs.ref, cs.hasRef
	}

	if len(p.Value) > MaxValueText {
		return reject(ReasonNotANumber, char, fmt.Sprintf(
			"value text is %d bytes, more than the %d lockstep keeps; send the measurement with fewer digits", len(p.Value), MaxValueText), nil)
	}
	if len(p.ID) > MaxIDLen {
		return reject(ReasonNotParseable, char, fmt.Sprintf(
			"id is %d bytes, more than the %d lockstep keeps; use a shorter id", len(p.ID), MaxIDLen), nil)
	}

	// The value. The first value of a characteristic without a reference
	// becomes its reference, once the measurement is accepted.
	if !hasRef {
		d, err := stats.ParseDecimal(string(p.Value))
		if err != nil {
			return valueReject(char, p, err)
		}
		ref = stats.NewReference(d)
	}
	x, exact, err := ref.Centre(p.Value)
	if err != nil {
		return valueReject(char, p, err)
	}
	if rules.Unit != "" && len(p.Unit) > 0 && string(p.Unit) != rules.Unit {
		return reject(ReasonWrongUnit, char, fmt.Sprintf(
			"unit %q, but characteristic %q is measured in %q; convert at the gateway, or correct the characteristic's unit",
			short(string(p.Unit)), short(string(char)), rules.Unit), nil)
	}
	if rules.Min != nil || rules.Max != nil {
		var zero stats.Reference
		abs, _, _ := zero.Centre(p.Value) // cannot fail: Centre above read the text
		side, bound := "", 0.0
		switch {
		case rules.Min != nil && abs < *rules.Min:
			side, bound = "below the plausible minimum", *rules.Min
		case rules.Max != nil && abs > *rules.Max:
			side, bound = "above the plausible maximum", *rules.Max
		}
		if side != "" {
			return reject(ReasonOutOfRange, char, fmt.Sprintf(
				"value %s is %s %s of characteristic %q; check the sensor, the unit and the decimal point, or widen the range",
				short(string(p.Value)), side, strconv.FormatFloat(bound, 'g', -1, 64), short(string(char))), nil)
		}
	}

	t := now
	if p.HasTime {
		t = p.Time
	}
	switch {
	case t.Before(time.Unix(0, -maxEventNs)):
		return reject(ReasonTooOld, char, "time "+t.Format(time.RFC3339)+
			" is before 1823, which lockstep does not keep; check the publisher's clock and time unit", nil)
	case t.After(time.Unix(0, maxEventNs)):
		return reject(ReasonFromFuture, char, "time "+t.Format(time.RFC3339)+
			" is after 2116, which lockstep does not keep; check the publisher's clock and time unit", nil)
	}
	if ahead := t.Sub(now); v.maxFuture >= 0 && ahead > v.maxFuture {
		return reject(ReasonFromFuture, char, fmt.Sprintf(
			"time %s is %v ahead of now (%s), more than the %v allowed; check the publisher's clock",
			t.Format(time.RFC3339Nano), ahead, now.UTC().Format(time.RFC3339Nano), v.maxFuture), nil)
	}
	if behind := now.Sub(t); v.maxAge >= 0 && behind > v.maxAge {
		msg := fmt.Sprintf("time %s is %v before now (%s), more than the %v allowed",
			t.Format(time.RFC3339Nano), behind, now.UTC().Format(time.RFC3339Nano), v.maxAge)
		if t.Year() == 1970 {
			msg += "; a time in 1970 usually means Unix seconds were sent where milliseconds are expected"
		} else {
			msg += "; check the publisher's clock, or raise the maximum age for a catch-up"
		}
		return reject(ReasonTooOld, char, msg, nil)
	}

	var h uint64
	slot := -1 // where the id goes in cs.ids, if known
	checkID := len(p.ID) > 0 && v.idMemory > 0
	if checkID {
		h = maphash.Bytes(v.seed, p.ID)
		dup := false
		if cs != nil {
			slot, dup = cs.ids.lookup(h)
		}
		if dup {
			return reject(ReasonDuplicateID, char, fmt.Sprintf(
				"id %q was already accepted for characteristic %q (among its last %d ids); the publisher sent it twice",
				short(string(p.ID)), short(string(char)), v.idMemory), nil)
		}
	}

	// Accepted: only now change state.
	if cs == nil {
		cs = &charState{name: string(char)}
		v.chars[cs.name] = cs
		v.added++
	}
	if !cs.hasRef {
		cs.ref, cs.hasRef = ref, true
	}
	v.last = cs
	if checkID {
		cs.ids.add(h, slot, v.idMemory)
	}
	// Field by field, and only the labels the template has: the whole
	// Measurement, with its SubjectMatch, is over 400 bytes.
	out.Characteristic = cs.name
	out.Group = group
	out.Time = t
	out.Text = p.Value
	out.Value = x
	out.Exact = exact
	out.ID = p.ID
	out.Reference = cs.ref
	out.Subject.Characteristic, out.Subject.Group, out.Subject.n = m.Characteristic, m.Group, m.n
	copy(out.Subject.labels[:m.n], m.labels[:m.n])
	return nil
}

// Prefetch notes the places of the duplicate-id memory that the Checks of
// payloads, which arrived on subject, will read first; LoadPrefetched reads
// them. It changes nothing else, and is only a hint: call Check as usual
// afterwards. The duplicate-id memory of a characteristic is megabytes at
// the default size, and each lookup misses the cache; noting the places for
// several messages, then reading them in one tight loop, lets the misses
// overlap, and the Checks then find them in cache. It notes at most
// maxPrefetch places between two calls of LoadPrefetched, and does not
// allocate.
func (v *Validator) Prefetch(subject []byte, ps []Payload) {
	if v.idMemory <= 0 || len(ps) == 0 || len(v.prefetch) == cap(v.prefetch) {
		return
	}
	m := &v.pmatch
	if !v.tmpl.match(subject, m) {
		return
	}
	cs := v.last
	if cs == nil || cs.name != string(m.Characteristic) {
		if cs = v.chars[string(m.Characteristic)]; cs == nil {
			return
		}
	}
	// cs.prefetched is the sequence number of the next id whose expiry to
	// note: the ids noted since the memory last took one are ahead of it.
	cs.prefetched = max(cs.prefetched, cs.ids.next)
	for i := range ps {
		if len(ps[i].ID) > 0 && cap(v.prefetch)-len(v.prefetch) >= 2 {
			v.prefetch = cs.ids.slots(v.prefetch, maphash.Bytes(v.seed, ps[i].ID), cs.prefetched, v.idMemory)
			cs.prefetched++
		}
	}
}

// maxPrefetch is the most places Prefetch notes.
const maxPrefetch = 64

// LoadPrefetched reads the places Prefetch noted and forgets them. Its
// result means nothing; keep it (add it to a field, say) so that the reads
// are kept.
func (v *Validator) LoadPrefetched() uint64 {
	var x uint64
	for _, p := range v.prefetch {
		x += *p
	}
	clear(v.prefetch)
	v.prefetch = v.prefetch[:0]
	return x
}

// RememberID puts id into the duplicate memory of the characteristic name,
// as if a measurement with that id had just been accepted: call it after a
// restart, before any measurement is checked, with the ids of the stored
// raw values, oldest first, so that a measurement sent again across the
// restart is still rejected as duplicate_id. It does nothing when duplicate
// detection is off, for an empty id, for an id already remembered, and for
// a characteristic the Validator does not know (restore its reference with
// SetReference first).
func (v *Validator) RememberID(name string, id []byte) {
	cs := v.chars[name]
	if cs == nil || len(id) == 0 || v.idMemory <= 0 {
		return
	}
	h := maphash.Bytes(v.seed, id)
	if slot, ok := cs.ids.lookup(h); !ok {
		cs.ids.add(h, slot, v.idMemory)
	}
}

// Forget removes the id of m, accepted by Check, from the duplicate memory,
// so that the same measurement is accepted when it is delivered again: call
// it for the measurements of a batch whose commit failed before the batch is
// redelivered.
func (v *Validator) Forget(m *Measurement) {
	if len(m.ID) == 0 || v.idMemory <= 0 {
		return
	}
	if cs := v.chars[m.Characteristic]; cs != nil {
		cs.ids.forget(maphash.Bytes(v.seed, m.ID))
	}
}

// reject returns a *RejectError; it copies char.
func reject(r Reason, char []byte, msg string, err error) *RejectError {
	return &RejectError{Reason: r, Characteristic: string(char), Msg: msg, Err: err}
}

// valueReject explains why the payload's value cannot be used; err is an
// error of stats.ParseDecimal or Reference.Centre.
func valueReject(char []byte, p *Payload, err error) *RejectError {
	r := ReasonOf(err)
	q := strconv.Quote(short(string(p.Value)))
	var msg string
	switch r {
	case ReasonNotFinite:
		msg = "value " + q + " is not a finite number; send measured values only, and leave out readings the sensor could not take"
	case ReasonOutOfRange:
		msg = "value " + q + " is out of the range of binary numbers, or too far from the characteristic's reference; check the value and its unit"
	case ReasonNotANumber:
		switch {
		case len(p.Value) == 0:
			msg = "value is empty; send the measurement as a number such as 500.12"
		case bytes.IndexByte(p.Value, ',') >= 0:
			msg = "value " + q + " is not a number; use '.' as the decimal separator"
		default:
			msg = "value " + q + " is not a decimal number; send the measurement as a number such as 500.12"
		}
	default:
		msg = "value " + q + " cannot be read: " + err.Error()
	}
	if p.Offset > 0 {
		msg = "measurement at byte " + strconv.Itoa(p.Offset) + ": " + msg
	}
	return &RejectError{Reason: r, Characteristic: string(char), Msg: msg, Err: err}
}
