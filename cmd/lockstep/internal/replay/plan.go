package replay

import (
	"context"
	"errors"
	"fmt"
	"slices"
	"strings"
	"time"

	"github.com/lockstep-project/lockstep/stats"
	"github.com/lockstep-project/lockstep/store"
	"github.com/lockstep-project/lockstep/window"
)

// Plan is a Spec checked against a store: where the windows come from, the
// groups in the order the windows intern them, and how many evaluations
// the replay makes. Make it with NewPlan, run it with Run.
type Plan struct {
	Spec   Spec
	Record store.Characteristic
	// Source is Raw or Buckets: what Auto resolved to.
	Source Source
	// Groups are the groups with values in the period (and its warm-up),
	// in the order the replayed windows list them: by their first bucket,
	// and within it by their first value (raw) or by name (buckets).
	Groups []string
	// Evaluations is the number of evaluations Run makes.
	Evaluations int64
	// Notes say what the reader should know about the replay (partial
	// windows, skipped values, why a source was chosen).
	Notes []string
	// Skipped counts, after Run, the raw values whose text no longer
	// centres on the characteristic's reference.
	Skipped int64

	st     Store
	cfg    window.Config // with defaults
	warm   time.Time     // where reading starts; zero: the first stored value
	bucket time.Duration
}

// NewPlan checks spec against st. Its errors name what does not fit and
// what to do: an unknown characteristic (wrapping store.ErrNotFound, with
// the stored names), a bad period or step (ErrRange), a period with no
// stored data, a source that cannot replay it (ErrSource), a window
// setting out of range (window.ErrConfig).
func NewPlan(st Store, spec Spec) (*Plan, error) {
	if err := spec.check(); err != nil {
		return nil, err
	}
	spec.From, spec.To = spec.From.UTC(), spec.To.UTC()
	w, err := window.New(spec.Window)
	if err != nil {
		return nil, fmt.Errorf("replay window: %w", err)
	}
	p := &Plan{Spec: spec, st: st, cfg: w.Config(), Evaluations: int64(spec.To.Sub(spec.From)/spec.Step) + 1}
	p.bucket = p.cfg.Bucket
	if p.Record, err = FindRecord(st, spec.Characteristic); err != nil {
		return nil, err
	}
	count := p.cfg.Count > 0
	if !count {
		p.warm = spec.From.Add(-p.cfg.Length - p.bucket)
	}
	if err := p.chooseSource(count); err != nil {
		return nil, err
	}
	if p.Groups, err = p.groups(); err != nil {
		return nil, err
	}
	return p, nil
}

// FindRecord returns the stored record of name.
func FindRecord(st Store, name string) (store.Characteristic, error) {
	recs, err := st.Characteristics()
	if err != nil {
		return store.Characteristic{}, fmt.Errorf("read characteristics: %w", err)
	}
	var names []string
	for _, r := range recs {
		if r.Name == name {
			return r, nil
		}
		names = append(names, r.Name)
	}
	have := "the store holds none"
	if len(names) > 0 {
		const most = 20
		if len(names) > most {
			names = append(names[:most], fmt.Sprintf("… (%d more)", len(names)-most))
		}
		have = "the store holds " + strings.Join(names, ", ")
	}
	return store.Characteristic{}, fmt.Errorf("find characteristic: %w: %q; %s", store.ErrNotFound, name, have)
}

// first returns the time of the first raw value and the start of the first
// bucket state in [from, to), zero when there is none.
func first(st Store, char string, from, to time.Time) (raw, bucket time.Time, err error) {
	err = st.Raw(char, from, to, func(rv store.RawValue) error {
		raw = rv.Time
		return errStop
	})
	if err != nil && !errors.Is(err, errStop) {
		return raw, bucket, fmt.Errorf("read raw values: %w", err)
	}
	err = st.Buckets(char, from, to, func(bs store.BucketState) error {
		bucket = bs.Start
		return errStop
	})
	if err != nil && !errors.Is(err, errStop) {
		return raw, bucket, fmt.Errorf("read bucket states: %w", err)
	}
	return raw, bucket, nil
}

// chooseSource resolves Auto and checks that the source can replay the
// period.
func (p *Plan) chooseSource(count bool) error {
	s := p.Spec
	name := s.Characteristic
	raw0, bucket0, err := first(p.st, name, time.Time{}, time.Time{})
	if err != nil {
		return err
	}
	if raw0.IsZero() && bucket0.IsZero() {
		return fmt.Errorf("%w: the store holds no values of %q: no raw values or bucket states yet, or retention removed them all", ErrRange, name)
	}
	inRaw, inBucket, err := first(p.st, name, p.warm, s.To)
	if err != nil {
		return err
	}
	if inRaw.IsZero() && inBucket.IsZero() {
		return fmt.Errorf("%w: no stored values of %q from %s to %s; its first stored value is at %s",
			ErrRange, name, fmtTime(p.warmOrFrom()), fmtTime(s.To), fmtTime(earliest(raw0, bucket0)))
	}
	// The raw values have aged out when bucket states reach further back.
	agedOut := !bucket0.IsZero() && (raw0.IsZero() || bucket0.Before(floorTime(raw0, p.bucket))) &&
		(raw0.IsZero() || raw0.After(p.warm))
	switch {
	case s.Source == Raw || (s.Source == Auto && (count || !agedOut)):
		p.Source = Raw
		if agedOut {
			p.Notes = append(p.Notes, fmt.Sprintf("raw values of %q are retained from %s on, and bucket states from %s: windows before %s hold only part of their values (replay with --source buckets for the whole period)",
				name, fmtTime(raw0), fmtTime(bucket0), fmtTime(raw0.Add(p.cfg.Length))))
		}
		return nil
	case count:
		return fmt.Errorf("%w: a count-based window (count %d) keeps no bucket states: replay it from raw values", ErrSource, p.cfg.Count)
	}
	p.Source = Buckets
	if s.Source == Auto {
		p.Notes = append(p.Notes, fmt.Sprintf("raw values of %q are retained only from %s on: replaying from the stored bucket states (merged per bucket; equal to a raw replay to rounding)", name, fmtTime(raw0)))
	}
	return p.checkBuckets()
}

// checkBuckets checks that the window, the step and the period fit the
// stored bucket states.
func (p *Plan) checkBuckets() error {
	s, b := p.Spec, p.bucket
	var bad []string
	if p.cfg.Length%b != 0 {
		bad = append(bad, fmt.Sprintf("the window %v is not a multiple of the bucket width %v", p.cfg.Length, b))
	}
	if s.Step%b != 0 {
		bad = append(bad, fmt.Sprintf("the step %v is not a multiple of the bucket width %v (use --step %v or a multiple)", s.Step, b, max(b, s.Step/b*b)))
	}
	if ns := s.From.UnixNano(); ns%int64(b) != 0 {
		bad = append(bad, fmt.Sprintf("--from %s is not on a bucket boundary (use %s)", fmtTime(s.From), fmtTime(floorTime(s.From, b))))
	}
	if len(bad) > 0 {
		why := "the raw values that would allow it have aged out"
		if s.Source == Buckets {
			why = "or replay from raw values (--source raw) where they are retained"
		}
		return fmt.Errorf("%w: bucket states hold whole buckets of %v, so %s; %s",
			ErrSource, b, strings.Join(bad, ", and "), why)
	}
	if s.StateHash != 0 && p.Record.SettingsHash != s.StateHash {
		return fmt.Errorf("%w: the bucket states of %q were stored with other bucket or sample settings than the window of this replay: give the daemon's configuration with --config",
			ErrSource, s.Characteristic)
	}
	return nil
}

func (p *Plan) warmOrFrom() time.Time {
	if p.warm.IsZero() {
		return p.Spec.From
	}
	return p.warm
}

func earliest(a, b time.Time) time.Time {
	switch {
	case a.IsZero():
		return b
	case b.IsZero() || a.Before(b):
		return a
	}
	return b
}

// floorTime is the start of the bucket of width b that holds t.
func floorTime(t time.Time, b time.Duration) time.Time {
	ns := t.UnixNano()
	q := ns / int64(b)
	if ns%int64(b) != 0 && ns < 0 {
		q--
	}
	return time.Unix(0, q*int64(b)).UTC()
}

// groups lists the groups of the period in the order the windows will
// intern them. A time-based window finds them from the bucket states (one
// per group and bucket, far fewer than the values), ordering the groups
// first seen in the same bucket by their first raw value; the raw values
// are scanned whole only where no bucket states cover them.
func (p *Plan) groups() ([]string, error) {
	name, to := p.Spec.Characteristic, p.Spec.To
	type firstSeen struct {
		name  string
		start time.Time
	}
	var seen []firstSeen
	known := map[string]bool{}
	var firstBucket time.Time
	if p.cfg.Count == 0 {
		err := p.st.Buckets(name, p.warm, to, func(bs store.BucketState) error {
			if firstBucket.IsZero() {
				firstBucket = bs.Start
			}
			if !known[bs.Group] {
				known[bs.Group] = true
				seen = append(seen, firstSeen{bs.Group, bs.Start})
			}
			return nil
		})
		if err != nil {
			return nil, fmt.Errorf("read bucket states: %w", err)
		}
	}
	if p.Source == Buckets {
		out := make([]string, len(seen))
		for i, s := range seen {
			out[i] = s.name
		}
		return out, nil
	}
	// Raw: groups whose values precede the bucket states (or all, without
	// bucket states), in the order of their first value.
	var out []string
	rawTo := to
	if !firstBucket.IsZero() {
		rawTo = firstBucket
	}
	inOut := map[string]bool{}
	err := p.st.Raw(name, p.warm, rawTo, func(rv store.RawValue) error {
		if !inOut[rv.Group] {
			inOut[rv.Group] = true
			out = append(out, rv.Group)
		}
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("read raw values: %w", err)
	}
	// Then the groups by first bucket; ties within a bucket by first value.
	for i := 0; i < len(seen); {
		j := i
		for j < len(seen) && seen[j].start.Equal(seen[i].start) {
			j++
		}
		var tied []string
		for _, s := range seen[i:j] {
			if !inOut[s.name] {
				tied = append(tied, s.name)
			}
		}
		if len(tied) > 1 {
			order, err := p.rawOrder(seen[i].start, tied)
			if err != nil {
				return nil, err
			}
			tied = order
		}
		for _, g := range tied {
			inOut[g] = true
			out = append(out, g)
		}
		i = j
	}
	return out, nil
}

// rawOrder orders the groups by their first raw value in the bucket that
// starts at start; groups without one keep their order, after the others.
func (p *Plan) rawOrder(start time.Time, groups []string) ([]string, error) {
	want := map[string]bool{}
	for _, g := range groups {
		want[g] = true
	}
	var out []string
	err := p.st.Raw(p.Spec.Characteristic, start, start.Add(p.bucket), func(rv store.RawValue) error {
		if want[rv.Group] {
			delete(want, rv.Group)
			out = append(out, rv.Group)
			if len(want) == 0 {
				return errStop
			}
		}
		return nil
	})
	if err != nil && !errors.Is(err, errStop) {
		return nil, fmt.Errorf("read raw values: %w", err)
	}
	for _, g := range groups {
		if !slices.Contains(out, g) {
			out = append(out, g)
		}
	}
	return out, nil
}

// Run makes the replay's evaluations in time order and hands each to fn,
// which may stop the replay by returning an error (Run returns it as it
// is). It reads the store in one pass: the raw values or the bucket
// states from the warm-up (one window length and one bucket before From;
// for a count-based window, from the first stored value) to To.
func (p *Plan) Run(ctx context.Context, fn func(Eval) error) error {
	win, err := window.New(p.Spec.Window)
	if err != nil {
		return fmt.Errorf("replay window: %w", err)
	}
	for _, g := range p.Groups {
		win.Group(g)
	}
	ref := stats.NewReference(p.Record.Reference)
	next, k := p.Spec.From, int64(0)
	done := false
	// evalBefore makes every evaluation due before t (all of them for a
	// zero t).
	evalBefore := func(t time.Time) error {
		for k < p.Evaluations && (t.IsZero() || !t.Before(next)) {
			ev := win.Evaluate(next, p.Spec.Options, ref)
			if err := fn(Eval{At: next, Eval: ev, Window: win}); err != nil {
				return err
			}
			k++
			next = p.Spec.From.Add(time.Duration(k) * p.Spec.Step)
		}
		if k == p.Evaluations {
			done = true
			return errStop
		}
		return nil
	}
	cc := ctxCheck{ctx: ctx}
	var errFn error
	stop := func(err error) error {
		if err != nil && !errors.Is(err, errStop) {
			errFn = err
		}
		return err
	}
	switch p.Source {
	case Buckets:
		err = p.st.Buckets(p.Spec.Characteristic, p.warm, p.Spec.To, func(bs store.BucketState) error {
			if err := cc.err(); err != nil {
				return stop(err)
			}
			if err := evalBefore(bs.Start); err != nil {
				return stop(err)
			}
			g := win.Group(bs.Group)
			if err := win.Restore(bs.Start, g, bs.Acc, bs.Sample); err != nil {
				return stop(fmt.Errorf("%w: the stored bucket states do not fit the replay's window (were the bucket or sample settings changed?): give the daemon's configuration with --config, or replay from raw values: %w", ErrSource, err))
			}
			return nil
		})
	default:
		err = p.st.Raw(p.Spec.Characteristic, p.warm, p.Spec.To, func(rv store.RawValue) error {
			if err := cc.err(); err != nil {
				return stop(err)
			}
			if err := evalBefore(rv.Time); err != nil {
				return stop(err)
			}
			v, _, err := ref.CentreString(rv.Text)
			if err != nil {
				p.Skipped++
				return nil
			}
			win.Add(win.Group(rv.Group), rv.Time, v)
			return nil
		})
	}
	if errFn != nil {
		return errFn
	}
	if err != nil && !errors.Is(err, errStop) {
		return fmt.Errorf("replay %q: %w", p.Spec.Characteristic, err)
	}
	if !done {
		if err := evalBefore(time.Time{}); err != nil && !errors.Is(err, errStop) {
			return err
		}
	}
	if p.Skipped > 0 {
		p.Notes = append(p.Notes, fmt.Sprintf("%d raw values were skipped: their text does not centre on the reference %s", p.Skipped, p.Record.Reference))
	}
	return nil
}
