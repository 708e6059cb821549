package main

import (
	"errors"
	"fmt"
	"hash/fnv"
	"math"
	"net"
	"strconv"
	"strings"
	"time"
	"unicode/utf8"

	"github.com/rs/zerolog"

	"github.com/lockstep-project/lockstep/alert"
	"github.com/lockstep-project/lockstep/ingest"
	"github.com/lockstep-project/lockstep/stats"
	"github.com/lockstep-project/lockstep/window"
)

// maxStoredSample is the most values per group and bucket a store bucket
// state holds (store.BucketState.Sample).
const maxStoredSample = 4096

// charSettings are the resolved settings of one characteristic: built-in
// defaults, then [defaults], then its own section.
type charSettings struct {
	Name          string
	Configured    bool // it has a [characteristics.NAME] section
	Unit          string
	Nominal       *stats.Decimal
	Min, Max      *float64
	Window        window.Config
	Stats         stats.Options
	EvaluateEvery time.Duration
}

// settingsFor resolves the settings of the characteristic name, which need
// not be configured. Call it on a validated Config.
func (c *Config) settingsFor(name string) charSettings {
	s := charSettings{
		Name: name,
		Window: window.Config{
			Bucket: window.DefaultBucket, Length: window.DefaultLength, Lateness: window.DefaultLateness,
			SilentAfter: window.DefaultSilentAfter, Sample: window.DefaultSample,
		},
		Stats:         stats.DefaultOptions(),
		EvaluateEvery: defaultEvaluateEvery,
	}
	s.overlay(c.Defaults)
	if cc, ok := c.Characteristics[name]; ok {
		s.Configured = true
		s.overlay(cc.Settings)
		s.Unit, s.Min, s.Max = cc.Unit, cc.Min, cc.Max
		if d, err := nominalDecimal(cc.Nominal); err == nil && cc.Nominal != nil {
			s.Nominal = &d
		}
	}
	if r, err := c.alertRule(name); err == nil {
		s.Window.Keep = spanKeep(r, s.Window)
	}
	return s
}

// spanKeep is the window.Config.Keep the alert detectors of rule r need:
// each window F span is the last whole buckets before now, so a span as long
// as the window reaches one bucket before it, and a longer one further.
// Keep holds those buckets (a multiple of the bucket, 0 when none is needed).
func spanKeep(r alert.Rule, w window.Config) time.Duration {
	if w.Bucket <= 0 || w.Count > 0 {
		return 0
	}
	var keep time.Duration
	for _, d := range r.Windows {
		n := max(d.Length/w.Bucket, 1) // buckets in the span, as alertinput.go counts them
		keep = max(keep, (n+1)*w.Bucket-w.Length)
	}
	return keep
}

// overlay takes the fields that o sets. An explicit zero switches lateness,
// silence and the sample off (window.Config takes a negative value for it).
func (s *charSettings) overlay(o Settings) {
	off := func(d Duration, dst *time.Duration) {
		switch {
		case d.Set && d.D == 0:
			*dst = -1
		case d.Set:
			*dst = d.D
		}
	}
	if o.Bucket.Set {
		s.Window.Bucket = o.Bucket.D
	}
	if o.Window.Set {
		s.Window.Length = o.Window.D
	}
	off(o.Lateness, &s.Window.Lateness)
	off(o.SilentAfter, &s.Window.SilentAfter)
	if o.Sample != nil {
		s.Window.Sample = *o.Sample
		if *o.Sample == 0 {
			s.Window.Sample = -1
		}
	}
	if o.Count != nil {
		s.Window.Count = *o.Count
	}
	if o.Alpha != nil {
		s.Stats.Alpha = *o.Alpha
	}
	if o.Confidence != nil {
		s.Stats.Confidence = *o.Confidence
	}
	if o.Power != nil {
		s.Stats.Power = *o.Power
	}
	if o.EvaluateEvery.Set {
		s.EvaluateEvery = o.EvaluateEvery.D
	}
}

// stateHash identifies the settings that shape the stored bucket states
// (their width and their samples, or a count-based window), so that a
// restart can tell that the stored states no longer fit.
func (s charSettings) stateHash() uint64 {
	h := fnv.New64a()
	fmt.Fprintf(h, "bucket=%d sample=%d count=%d", s.Window.Bucket, s.Window.Sample, s.Window.Count)
	return h.Sum64()
}

// rules returns the validation rules of the characteristic.
func (s charSettings) rules() ingest.CharacteristicRules {
	r := ingest.CharacteristicRules{Unit: s.Unit, Min: s.Min, Max: s.Max}
	if s.Nominal != nil {
		ref := stats.NewReference(*s.Nominal)
		r.Reference = &ref
	}
	return r
}

// nominalDecimal reads a nominal given as a decimal string or a TOML number.
// A float is taken by its shortest text, which is its literal for up to 15
// significant digits; a string keeps every digit.
func nominalDecimal(v any) (stats.Decimal, error) {
	switch x := v.(type) {
	case nil:
		return stats.Decimal{}, nil
	case string:
		return stats.ParseDecimal(strings.TrimSpace(x))
	case int64:
		return stats.ParseDecimal(strconv.FormatInt(x, 10))
	case float64:
		return stats.ParseDecimal(strconv.FormatFloat(x, 'g', -1, 64))
	}
	return stats.Decimal{}, fmt.Errorf("a %T: give a decimal such as \"500.00\"", v)
}

// Validate reports every setting that is out of range, each naming its
// section (and characteristic) and key.
func (c *Config) Validate() error {
	var errs []error
	bad := func(where, format string, args ...any) {
		errs = append(errs, fmt.Errorf("%s %s", where, fmt.Sprintf(format, args...)))
	}
	n := &c.NATS
	if n.URL != natsEmbedded {
		for _, u := range strings.Split(n.URL, ",") {
			if strings.TrimSpace(u) == "" {
				bad("[nats]", "url %q: give embedded, or server URLs separated by commas", n.URL)
				break
			}
		}
	}
	if n.URL == natsEmbedded {
		if _, _, err := splitHostPort(n.Listen); err != nil {
			bad("[nats]", "listen %q: %v", n.Listen, err)
		}
	}
	switch n.Source {
	case "jetstream", "core":
	default:
		bad("[nats]", "source %q: use jetstream or core", n.Source)
	}
	for _, f := range []struct{ key, v string }{{"stream", n.Stream}, {"consumer", n.Consumer}} {
		if f.v == "" || strings.ContainsAny(f.v, ".*> \t\r\n/\\") {
			bad("[nats]", "%s %q: use letters, digits, - and _", f.key, f.v)
		}
	}
	if n.Subjects == "" {
		bad("[nats]", "subjects is empty: give a subject filter such as meas.>")
	}
	if n.Subjects != "" && subjectMatches(n.Subjects, ingest.DeadLetterSubject(n.RejectPrefix, "x")) {
		bad("[nats]", "subjects %q takes in the dead-letter subjects %s: rejects would come back as input; narrow subjects or change reject_prefix",
			n.Subjects, ingest.DeadLetterSubject(n.RejectPrefix, "<characteristic>"))
	}
	if n.Batch < 0 {
		bad("[nats]", "batch %d: must not be negative", n.Batch)
	}
	if n.AckWait.D < 0 {
		bad("[nats]", "ack_wait %v: must not be negative", n.AckWait.D)
	}

	in := &c.Ingest
	if _, err := ingest.ParseSubjectTemplate(in.Template); err != nil {
		bad("[ingest]", "template %q: %v", in.Template, err)
	}
	if _, err := ingest.ParseUnknownPolicy(in.Unknown); err != nil {
		bad("[ingest]", "unknown %q: use accept or reject", in.Unknown)
	}
	if in.Time != "stored" && in.Time != "arrival" {
		bad("[ingest]", "time %q: use stored or arrival", in.Time)
	}
	for _, f := range []struct {
		key string
		d   Duration
	}{{"max_future", in.MaxFuture}, {"max_age", in.MaxAge}} {
		if f.d.D < 0 {
			bad("[ingest]", "%s %v: must not be negative (0 switches the check off)", f.key, f.d.D)
		}
	}
	if in.IDMemory != nil && *in.IDMemory < 0 {
		bad("[ingest]", "id_memory %d: must not be negative (0 switches duplicate detection off)", *in.IDMemory)
	}
	if in.MaxCharacteristics < 0 {
		bad("[ingest]", "max_characteristics %d: must not be negative", in.MaxCharacteristics)
	}

	st := &c.Store
	if st.Path == "" {
		bad("[store]", "path is empty")
	}
	if st.CommitValues < 1 || st.CommitValues > 1_000_000 {
		bad("[store]", "commit_values %d: use 1 to 1000000", st.CommitValues)
	}
	if st.CommitInterval.D <= 0 {
		bad("[store]", "commit_interval %v: must be positive", st.CommitInterval.D)
	}
	if st.RetainRaw.D < 0 || st.RetainBuckets.D < 0 {
		bad("[store]", "retain_raw and retain_buckets must not be negative (0 keeps everything)")
	}
	if _, _, err := splitHostPort(c.HTTP.Listen); err != nil {
		bad("[http]", "listen %q: %v", c.HTTP.Listen, err)
	}
	if _, err := zerolog.ParseLevel(strings.ToLower(c.Log.Level)); err != nil || c.Log.Level == "" {
		bad("[log]", "level %q: use trace, debug, info, warn or error", c.Log.Level)
	}
	switch c.Log.Format {
	case "auto", "json", "console":
	default:
		bad("[log]", "format %q: use auto, json or console", c.Log.Format)
	}

	errs = append(errs, checkSettings("[defaults]", c.Defaults, c.settingsFor(""), c)...)
	errs = append(errs, c.checkAlerts()...)
	for name, cc := range c.Characteristics {
		where := fmt.Sprintf("characteristic %q:", name)
		if p := charNameProblem(name); p != "" {
			bad(where, "the name %s", p)
			continue
		}
		errs = append(errs, checkCharacteristic(where, cc)...)
		errs = append(errs, checkSettings(where, cc.Settings, c.settingsFor(name), c)...)
	}
	return errors.Join(errs...)
}

// checkSettings checks one set of settings as written (o) and as resolved
// (s), which catches combinations such as a window that is not a multiple
// of an inherited bucket.
func checkSettings(where string, o Settings, s charSettings, c *Config) []error {
	var errs []error
	bad := func(format string, args ...any) {
		errs = append(errs, fmt.Errorf("%s %s", where, fmt.Sprintf(format, args...)))
	}
	for _, f := range []struct {
		key string
		d   Duration
	}{{"bucket", o.Bucket}, {"window", o.Window}, {"evaluate_every", o.EvaluateEvery}} {
		if f.d.Set && f.d.D <= 0 {
			bad("%s %v: must be positive", f.key, f.d.D)
		}
	}
	for _, f := range []struct {
		key string
		d   Duration
	}{{"lateness", o.Lateness}, {"silent_after", o.SilentAfter}} {
		if f.d.D < 0 {
			bad("%s %v: must not be negative (0 switches it off)", f.key, f.d.D)
		}
	}
	if o.Sample != nil && (*o.Sample < 0 || *o.Sample > maxStoredSample) {
		bad("sample %d: use 0 to %d values per group and bucket", *o.Sample, maxStoredSample)
	}
	if o.Count != nil && (*o.Count < 0 || *o.Count > window.MaxCount) {
		bad("count %d: use 0 (a time-based window) to %d values per group", *o.Count, window.MaxCount)
	}
	for _, f := range []struct {
		key string
		v   *float64
	}{{"alpha", o.Alpha}, {"confidence", o.Confidence}, {"power", o.Power}} {
		if f.v != nil && !(*f.v > 0 && *f.v < 1) {
			bad("%s %v: must be between 0 and 1 (exclusive)", f.key, *f.v)
		}
	}
	if len(errs) > 0 {
		return errs
	}
	if err := s.Window.Validate(); err != nil {
		bad("bucket, window, lateness, silent_after, sample or count: %v", err)
	}
	if keep := c.Store.RetainBuckets.D; keep > 0 && keep < s.Window.Length+max(s.Window.Lateness, 0)+2*s.Window.Bucket {
		bad("window %v: [store] retain_buckets %v must cover the window, the lateness and two buckets, or a restart cannot rebuild it",
			s.Window.Length, keep)
	}
	return errs
}

// checkCharacteristic checks the fields only a characteristic has.
func checkCharacteristic(where string, cc CharacteristicConfig) []error {
	var errs []error
	bad := func(format string, args ...any) {
		errs = append(errs, fmt.Errorf("%s %s", where, fmt.Sprintf(format, args...)))
	}
	if len(cc.Unit) > ingest.MaxNameLen || !utf8.ValidString(cc.Unit) || strings.ContainsFunc(cc.Unit, isControl) {
		bad("unit %q: use at most %d bytes of text without control characters", cc.Unit, ingest.MaxNameLen)
	}
	var nominal *float64
	if cc.Nominal != nil {
		d, err := nominalDecimal(cc.Nominal)
		if err != nil {
			bad("nominal %v: not a decimal number: %v", cc.Nominal, err)
		} else {
			f := d.Float64()
			nominal = &f
		}
	}
	for _, f := range []struct {
		key string
		v   *float64
	}{{"min", cc.Min}, {"max", cc.Max}} {
		if f.v != nil && (math.IsNaN(*f.v) || math.IsInf(*f.v, 0)) {
			bad("%s %v: give a finite bound, or none", f.key, *f.v)
		}
	}
	if cc.Min != nil && cc.Max != nil && *cc.Min > *cc.Max {
		bad("min %v is above max %v: swap them", *cc.Min, *cc.Max)
	}
	if nominal != nil && ((cc.Min != nil && *nominal < *cc.Min) || (cc.Max != nil && *nominal > *cc.Max)) {
		bad("nominal %v lies outside the plausible range [min, max]", cc.Nominal)
	}
	return errs
}

// charNameProblem says why name cannot be a characteristic, or "".
func charNameProblem(name string) string {
	switch {
	case name == "":
		return "is empty"
	case len(name) > ingest.MaxNameLen:
		return fmt.Sprintf("is longer than %d bytes", ingest.MaxNameLen)
	case !utf8.ValidString(name) || strings.ContainsFunc(name, isControl):
		return "is not text without control characters"
	case strings.ContainsAny(name, ". *>\t"):
		return "must be one subject token: no '.', ' ', '*' or '>'"
	}
	return ""
}

// subjectMatches reports whether the NATS subject filter (tokens, * for one,
// > for the rest) takes in subject.
func subjectMatches(filter, subject string) bool {
	ft, st := strings.Split(filter, "."), strings.Split(subject, ".")
	for i, f := range ft {
		switch {
		case f == ">":
			return len(st) > i
		case i >= len(st):
			return false
		case f != "*" && f != st[i]:
			return false
		}
	}
	return len(ft) == len(st)
}

func isControl(r rune) bool { return r < 0x20 || r == 0x7f }

// splitHostPort reads HOST:PORT with a port from 0 to 65535.
func splitHostPort(hp string) (string, int, error) {
	host, ps, err := net.SplitHostPort(hp)
	if err != nil {
		return "", 0, errors.New("use HOST:PORT, such as 127.0.0.1:8420")
	}
	port, err := strconv.Atoi(ps)
	if err != nil || port < 0 || port > 65535 {
		return "", 0, fmt.Errorf("port %q: use 0 to 65535", ps)
	}
	return host, port, nil
}
