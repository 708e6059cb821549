package main

import (
	"context"
	"errors"
	"fmt"
	"math"
	"path/filepath"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/rs/zerolog"
	"gonum.org/v1/gonum/stat/distuv"

	"github.com/lockstep-project/lockstep/alert"
	"github.com/lockstep-project/lockstep/cmd/lockstep/internal/calib"
	"github.com/lockstep-project/lockstep/cmd/lockstep/internal/plant"
	"github.com/lockstep-project/lockstep/ingest"
	"github.com/lockstep-project/lockstep/stats"
	"github.com/lockstep-project/lockstep/store"
	"github.com/lockstep-project/lockstep/window"
)

// These tests hold the daemon's alerts against what `lockstep calibrate`
// predicts: the daemon itself (its loop, the ingest stage, the window, the
// alert monitor and machine, the store), fed by the plant simulator on a
// simulated clock, against calib.Run for the same stream and the same
// resolved rule. Both are seeded, so every figure below is deterministic.

// chanSource is an ingest.Source whose Fetch returns a pushed batch at
// once, so that a simulated minute costs the daemon's work and little
// waiting.
type chanSource struct{ ch chan []ingest.Msg }

func (s *chanSource) Fetch(ctx context.Context, _ int, maxWait time.Duration) ([]ingest.Msg, error) {
	t := time.NewTimer(maxWait)
	defer t.Stop()
	select {
	case b := <-s.ch:
		return b, nil
	case <-ctx.Done():
		return nil, ctx.Err()
	case <-t.C:
		return nil, nil
	}
}

func (s *chanSource) Ack(uint64) error          { return nil }
func (s *chanSource) Stats() ingest.SourceStats { return ingest.SourceStats{} }
func (s *chanSource) Close() error              { return nil }

// simDaemon is one daemon on its own store and simulated clock, fed one
// simulated minute at a time. Its methods return errors instead of failing
// the test, so that several run on goroutines of one test.
type simDaemon struct {
	d      *daemon
	st     *store.Store
	src    *chanSource
	clock  *simClock
	char   string
	cancel context.CancelFunc
	done   chan error

	gen  *plant.Generator
	alt  *plant.Generator // messages taken instead of gen's within altFrom–altTo; nil: none
	next [2]*plant.Message
	// altFrom and altTo bound the simulated times at which alt's messages
	// replace gen's.
	altFrom, altTo time.Time
	seq            uint64
}

// newSimDaemon starts a daemon for the config text on a store in dir, its
// clock at start, fed by gen.
func newSimDaemon(dir, text, char string, start time.Time, gen *plant.Generator) (*simDaemon, error) {
	cfg := DefaultConfig()
	cfg.NATS.URL = "nats://127.0.0.1:1"
	cfg.Store.CommitInterval = setDuration(time.Millisecond)
	if err := ParseConfig(strings.NewReader(text), cfg); err != nil {
		return nil, err
	}
	if err := cfg.Validate(); err != nil {
		return nil, err
	}
	st, err := store.Open(filepath.Join(dir, "lockstep.db"), store.Options{NoSync: true})
	if err != nil {
		return nil, err
	}
	clock := &simClock{t: start}
	d := newDaemon(cfg, st, zerolog.Nop())
	d.now, d.alerts.now = clock.now, clock.now
	src := &chanSource{ch: make(chan []ingest.Msg, 1)}
	d.src, d.dead = src, &deadBox{}
	if d.val, err = ingest.NewValidator(validatorConfig(cfg)); err != nil {
		_ = st.Close()
		return nil, err
	}
	d.met.watch(d.val.Counters(), src, nil)
	if err := d.restore(clock.now()); err != nil {
		_ = st.Close()
		return nil, err
	}
	ctx, cancel := context.WithCancel(context.Background())
	s := &simDaemon{d: d, st: st, src: src, clock: clock, char: char, cancel: cancel, done: make(chan error, 1), gen: gen}
	go func() { s.done <- d.run(ctx) }()
	return s, nil
}

// close stops the loop and closes the store.
func (s *simDaemon) close() error {
	s.cancel()
	err := <-s.done
	return errors.Join(err, s.st.Close())
}

// pull returns the next message of generator i (0 gen, 1 alt) before end.
func (s *simDaemon) pull(i int, end time.Time) *plant.Message {
	g := s.gen
	if i == 1 {
		g = s.alt
	}
	if s.next[i] == nil {
		m, ok := g.Next()
		if !ok {
			return nil
		}
		s.next[i] = &m
	}
	if !s.next[i].Time.Before(end) {
		return nil
	}
	m := s.next[i]
	s.next[i] = nil
	return m
}

// minute hands the daemon the plant's messages before end, waits until the
// loop applied them, moves the clock to end and waits for the evaluation
// at end (whose alert step comes before its report is kept).
func (s *simDaemon) minute(end time.Time) error {
	var msgs []ingest.Msg
	for {
		m := s.pull(0, end)
		if m == nil {
			break
		}
		if s.alt != nil {
			a := s.pull(1, end)
			// alt is gen's scenario with bad messages: the same times.
			if a != nil && !m.Time.Before(s.altFrom) && m.Time.Before(s.altTo) {
				m = a
			}
		}
		s.seq++
		msgs = append(msgs, ingest.Msg{Subject: m.Subject, Data: m.Payload, Seq: s.seq, Stored: m.Time, Arrived: m.Time})
	}
	if len(msgs) > 0 {
		s.src.ch <- msgs
	}
	if err := poll("the messages applied", func() bool { return s.d.met.applied.Load() == s.seq }); err != nil {
		return err
	}
	s.clock.set(end)
	return poll("the evaluation at "+end.Format(time.TimeOnly), func() bool {
		r, ok := s.d.book.get(s.char)
		return ok && r.summary.Evaluated.Equal(end)
	})
}

// poll waits for cond, for at most 10 s.
func poll(what string, cond func() bool) error {
	deadline := time.Now().Add(10 * time.Second)
	for !cond() {
		if time.Now().After(deadline) {
			return fmt.Errorf("timed out waiting for %s", what)
		}
		time.Sleep(100 * time.Microsecond)
	}
	return nil
}

// seenAlerts follows a daemon's alerts across evaluations: every alert
// seen open in the raised state, as first seen so, and when each closed.
type seenAlerts struct {
	raised  []alert.Alert
	index   map[string]int
	cleared map[string]time.Time
	open    map[string]bool
}

func newSeenAlerts() *seenAlerts {
	return &seenAlerts{index: map[string]int{}, cleared: map[string]time.Time{}, open: map[string]bool{}}
}

// look takes the daemon's alerts after the evaluation at now.
func (a *seenAlerts) look(s *simDaemon, now time.Time) {
	still := map[string]bool{}
	for _, al := range s.d.alerts.list(false) {
		still[al.ID] = true
		if _, ok := a.index[al.ID]; !ok && al.State == alert.StateRaised {
			a.index[al.ID] = len(a.raised)
			a.raised = append(a.raised, al)
		}
	}
	for id := range a.open {
		if !still[id] {
			a.cleared[id] = now
		}
	}
	a.open = still
}

// first returns the first raised alert of kind k, and false when none.
func (a *seenAlerts) first(k alert.Kind) (alert.Alert, bool) {
	for _, al := range a.raised {
		if al.Kind == k {
			return al, true
		}
	}
	return alert.Alert{}, false
}

// count returns how many alerts of kind k were raised at or after from.
func (a *seenAlerts) count(k alert.Kind, from time.Time) int {
	n := 0
	for _, al := range a.raised {
		if al.Kind == k && !al.Raised.Before(from) {
			n++
		}
	}
	return n
}

// parallel runs fn(0), …, fn(n−1) on a few goroutines (the daemons mostly
// wait on each other's hand-offs, so more than the cores pays) and returns
// the errors joined.
func parallel(n, workers int, fn func(i int) error) error {
	errs := make([]error, n)
	var wg sync.WaitGroup
	next := make(chan int)
	for range workers {
		wg.Go(func() {
			for i := range next {
				errs[i] = fn(i)
			}
		})
	}
	for i := range n {
		next <- i
	}
	close(next)
	wg.Wait()
	return errors.Join(errs...)
}

// calibChar is the characteristic of these tests: four lines at one value
// per second each, SD 1 g, regular arrivals (calibrate's values are evenly
// spaced, 60 per group and bucket), written to three decimals (the
// rounding, 0.0003 SD, is far below anything measured here).
func calibChar(events []plant.Event) plant.Characteristic {
	return plant.Characteristic{
		Name: "fill-weight", Unit: "g", Nominal: "500.000", Resolution: 3, SD: 1, Rate: 1, Arrivals: plant.Regular,
		Groups: []string{"L1", "L2", "L3", "L4"}, Events: events,
	}
}

// calibConfig is the daemon's configuration: one-minute buckets and
// evaluations, the plant's plausible range (nominal ∓ 50 SD, so that its
// out_of_range messages are rejected), and the alert rule's keys in rule
// (TOML lines).
func calibConfig(rule string) string {
	return `
[defaults]
evaluate_every = "1m"
bucket = "1m"

[characteristics.fill-weight]
unit = "g"
min = 450
max = 550

[characteristics.fill-weight.alert]
` + rule
}

// resolvedRule returns the alert rule the daemon resolves from text, for
// calibrate.
func resolvedRule(t *testing.T, text string) alert.Rule {
	t.Helper()
	cfg := DefaultConfig()
	cfg.NATS.URL = "nats://127.0.0.1:1"
	if err := ParseConfig(strings.NewReader(text), cfg); err != nil {
		t.Fatal(err)
	}
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	r, err := cfg.alertRule("fill-weight")
	if err != nil {
		t.Fatal(err)
	}
	return r
}

// calibScenario is calibrate's stream for calibChar.
func calibScenario() calib.Scenario {
	return calib.Scenario{Rates: []float64{1, 1, 1, 1}, SD: 1, Bucket: time.Minute}
}

// calibWarm is calibrate's warm-up before a shift: the longest window
// plus five buckets (calib.Run).
func calibWarm(r alert.Rule) time.Duration {
	w := 5 * time.Minute
	for _, d := range r.Windows {
		w = max(w, d.Length+5*time.Minute)
	}
	return w
}

// medianInterval returns the order statistics l and u (1-based) of a
// sample of n whose interval [x_(l), x_(u)] holds the population median
// with probability at least 1 − level, for any distribution, discrete ones
// included: l is the largest with P(Bin(n, ½) ≤ l − 1) ≤ level/2, u = n + 1
// − l (the distribution-free interval for a median; e.g. Conover,
// Practical Nonparametric Statistics, 3rd ed., 1999, sec. 3.2).
func medianInterval(n int, level float64) (l, u int) {
	b := distuv.Binomial{N: float64(n), P: 0.5}
	l = 1
	for l+1 <= n && b.CDF(float64(l)) <= level/2 {
		l++
	}
	return l, n + 1 - l
}

// shiftRun is one daemon run with one line shifted.
type shiftRun struct {
	delay   float64 // minutes from the shift to the first means raise; +Inf: none within the hold
	early   bool    // a means alert raised before the shift
	raises  []alert.Alert
	cleared map[string]time.Time
	last    []alert.Alert // the alerts open at the end
}

// clearWithin bounds the wait for a means alert to clear after the shift
// ends: the 30-minute window must lose the shifted minutes (about 30
// minutes), then every detector stay below its clearing level for
// ClearAfter evaluations; the contrast CUSUMs, which are not restarted
// while the alert is raised, can hold it longer. Measured on twelve runs
// of a 0.25 SD shift of 30 minutes: 17 to 62 minutes, median 38.
const clearWithin = 90 * time.Minute

// runShift runs the daemon on a plant whose line L3 moves by shift SD at
// onset and back after hold. With follow it runs until the means alert
// cleared after the shift ended, or clearWithin after it; otherwise it stops
// at the first means raise, or at the end of the hold.
func runShift(dir, text string, seed uint64, shift float64, onset, hold time.Duration, follow bool) (shiftRun, error) {
	start := time.Date(2026, 12, 1, 6, 0, 0, 0, time.UTC)
	stop := onset + hold + clearWithin
	sc := plant.Scenario{
		Name: "calibrated shift", Seed: seed, Start: start, Duration: stop,
		Characteristics: []plant.Characteristic{calibChar([]plant.Event{
			{Kind: plant.Shift, Group: "L3", At: onset, By: shift},
			{Kind: plant.Shift, Group: "L3", At: onset + hold, By: -shift},
		})},
	}
	gen, err := plant.New(sc)
	if err != nil {
		return shiftRun{}, err
	}
	s, err := newSimDaemon(dir, text, "fill-weight", start, gen)
	if err != nil {
		return shiftRun{}, err
	}
	seen := newSeenAlerts()
	out := shiftRun{delay: math.Inf(1)}
	var runErr error
	for m := time.Minute; m <= stop; m += time.Minute {
		end := start.Add(m)
		if runErr = s.minute(end); runErr != nil {
			break
		}
		seen.look(s, end)
		raised := seen.count(alert.KindMeansDiverge, start) > 0
		if follow && m > onset+hold && len(seen.open) == 0 && raised || !follow && (raised || m >= onset+hold) {
			break
		}
	}
	out.raises, out.cleared = seen.raised, seen.cleared
	out.last = s.d.alerts.list(false)
	if a, ok := seen.first(alert.KindMeansDiverge); ok {
		d := a.Raised.Sub(start.Add(onset))
		switch {
		case d <= 0:
			out.early = true
		case d <= hold:
			out.delay = d.Minutes()
		}
	}
	return out, errors.Join(runErr, s.close())
}

// wrongAllowed bounds the number of wrongly named raises among n daemon
// runs, given w of r in calibrate: with p the one-sided 99 % upper
// Clopper–Pearson bound of calibrate's rate (the Beta(w+1, r−w) quantile),
// the smallest k with P(Bin(n, p) > k) ≤ 0.5 %. A rare wrong name is
// chance (a one-minute window whose F fires on another line's noise
// added to the shift); a daemon that names the wrong line as a rule fails.
func wrongAllowed(w, r, n int) int {
	p := distuv.Beta{Alpha: float64(w + 1), Beta: float64(max(r-w, 1))}.Quantile(0.99)
	b := distuv.Binomial{N: float64(n), P: p}
	k := 0
	for k < n && 1-b.CDF(float64(k)) > 0.005 {
		k++
	}
	return k
}

// TestAlertDelayMatchesCalibrate: with the default rule, for a shift of
// 1 SD and of 0.25 SD in one of four lines at one value per second, the
// daemon's median time to raise over independent seeded runs agrees with
// calibrate's; the raises name the shifted line and the right direction
// (as often as calibrate's do, see wrongAllowed); the alert clears after
// the shift ends, not before, and is raised once (checked on the first
// few runs, which go on until the clearing; the others stop at the raise).
// Each run is the daemon's loop on a store of its own, the line shifted
// after calibrate's warm-up (the longest window and five minutes) and back
// after calibrate's horizon, so that a run without a raise by then is
// censored as calibrate censors it.
//
// The agreement: calibrate's median, from 400 runs, must lie in the
// distribution-free 99 % interval for the median of the daemon's runs
// (order statistics, see medianInterval; valid for the discrete, censored
// minutes). Calibrate's own median is far tighter than that interval
// (400 runs against 30), so its error is left out; the check is a test
// of the daemon's median at a level of at most 1 %, fixed seeds making it
// deterministic.
func TestAlertDelayMatchesCalibrate(t *testing.T) {
	runs, follow := 30, 4
	if testing.Short() {
		// The interval is then the 1st to the 8th of 8 (99.2 %): weak at
		// 0.25 SD, but it still fails a daemon whose every run is off the
		// predicted median (at 1 SD, where nearly every run raises at the
		// first evaluation, a daemon that raises later as a rule).
		runs, follow = 8, 2
	}
	text := calibConfig("")
	rule := resolvedRule(t, text)
	onset := calibWarm(rule)
	for si, tc := range []struct {
		shift float64
		hold  time.Duration
	}{{1, 10 * time.Minute}, {0.25, 30 * time.Minute}} {
		t.Run(fmt.Sprintf("shift %g SD", tc.shift), func(t *testing.T) {
			res, err := calib.Run(context.Background(), calib.Config{
				Scenario: calibScenario(), Rule: rule,
				Alphas: []float64{rule.Alpha}, Confirms: []int{rule.Confirm},
				Shifts: []float64{tc.shift}, ShiftRuns: 400, Horizon: tc.hold,
				Days: 0.01, MaxFalse: 1, BaselineK: 0.5, Seed: 4, Workers: 2,
			})
			if err != nil {
				t.Fatal(err)
			}
			want := res.Points[0].Delays[0]
			dirs := make([]string, runs)
			for i := range dirs {
				dirs[i] = t.TempDir()
			}
			out := make([]shiftRun, runs)
			err = parallel(runs, 6, func(i int) error {
				var err error
				out[i], err = runShift(dirs[i], text, uint64(100*si+i+1), tc.shift, onset, tc.hold, i < follow)
				return err
			})
			if err != nil {
				t.Fatal(err)
			}
			var delays []float64
			wrong := 0
			shiftEnd := time.Date(2026, 12, 1, 6, 0, 0, 0, time.UTC).Add(onset + tc.hold)
			for i, o := range out {
				if o.early {
					t.Logf("run %d: a means alert before the shift; left out, as calibrate leaves such runs out", i)
					continue
				}
				delays = append(delays, o.delay)
				n := 0
				for _, a := range o.raises {
					if a.Kind != alert.KindMeansDiverge {
						t.Errorf("run %d: a %s alert raised: %+v", i, a.Kind, a)
						continue
					}
					n++
					if len(a.Groups) == 0 || a.Groups[0] != "L3" || a.Direction != 1 {
						wrong++
						t.Logf("run %d: raised %v, direction %+d at %v, %s; not L3 named first, high",
							i, a.Groups, a.Direction, a.Raised.Format(time.TimeOnly), a.Reason)
					}
					c, ok := o.cleared[a.ID]
					switch {
					case i >= follow: // not followed to its clearing
					case !ok:
						t.Errorf("run %d: alert raised at %v not cleared within %v of the shift's end; open at the end: %+v", i, a.Raised.Format(time.TimeOnly), clearWithin, o.last)
					case !c.After(shiftEnd):
						t.Errorf("run %d: alert cleared at %v, while the shift was still on (until %v)", i, c.Format(time.TimeOnly), shiftEnd.Format(time.TimeOnly))
					}
				}
				if n > 1 {
					t.Errorf("run %d: %d means alerts raised for one shift, want one", i, n)
				}
			}
			sorted := slices.Clone(delays)
			slices.Sort(sorted)
			l, u := medianInterval(len(sorted), 0.01)
			lo, hi := sorted[l-1], sorted[u-1]
			t.Logf("calibrate (400 runs): median %v, p90 %v min, raised %d of %d; daemon (%d runs): minutes %v, 99 %% median interval [%v, %v]",
				want.Median, want.P90, want.Raised, want.Runs, len(sorted), sorted, lo, hi)
			if !(lo <= want.Median && want.Median <= hi) {
				t.Errorf("calibrate's median time to raise %v min lies outside the daemon's 99 %% interval for its median [%v, %v] (minutes %v)",
					want.Median, lo, hi, sorted)
			}
			if max := wrongAllowed(want.Wrong, want.Raised, len(delays)); wrong > max {
				t.Errorf("%d of %d daemon raises named another line first or the wrong direction; calibrate %d of %d, which allows at most %d",
					wrong, len(delays), want.Wrong, want.Raised, max)
			}
		})
	}
}

// evalPath is the daemon's evaluation path without its loop and store:
// the plant's payloads through ingest's Decoder and Validator, the
// accepted values into the characteristic's window.Window, and at each
// minute Evaluate, buildAlertInput and the daemon's alerting step (its
// alert.Monitor and alert.Machine), as daemon.evaluate and
// evaluateAlerts do. It is for the long in-control runs, which the full
// loop would make too slow for a unit test.
type evalPath struct {
	set      charSettings
	win      *window.Window
	val      *ingest.Validator
	dec      ingest.Decoder
	al       *alerting
	ac       *alertChar
	ref      stats.Reference
	refSet   bool
	accepted uint64
	gen      *plant.Generator
	next     *plant.Message
	m        ingest.Measurement
}

func newEvalPath(text string, gen *plant.Generator) (*evalPath, error) {
	cfg := DefaultConfig()
	cfg.NATS.URL = "nats://127.0.0.1:1"
	if err := ParseConfig(strings.NewReader(text), cfg); err != nil {
		return nil, err
	}
	if err := cfg.Validate(); err != nil {
		return nil, err
	}
	p := &evalPath{set: cfg.settingsFor("fill-weight"), gen: gen}
	var err error
	if p.win, err = window.New(p.set.Window); err != nil {
		return nil, err
	}
	if p.val, err = ingest.NewValidator(validatorConfig(cfg)); err != nil {
		return nil, err
	}
	p.al = newAlerting(cfg, zerolog.Nop(), prometheus.NewRegistry())
	if p.ac, err = p.al.char("fill-weight", "g", nil); err != nil {
		return nil, err
	}
	return p, nil
}

// minute adds the plant's values before end and evaluates at end; it
// returns the alert events of the evaluation.
func (p *evalPath) minute(end time.Time) ([]alert.Event, error) {
	for {
		if p.next == nil {
			m, ok := p.gen.Next()
			if !ok {
				break
			}
			p.next = &m
		}
		if !p.next.Time.Before(end) {
			break
		}
		msg := p.next
		p.next = nil
		pls, err := p.dec.Decode(msg.Payload)
		if err != nil {
			return nil, fmt.Errorf("decode a plant payload: %w", err)
		}
		for i := range pls {
			if r, err := p.val.Check(msg.Time, []byte(msg.Subject), &pls[i], &p.m); r != ingest.ReasonNone {
				return nil, fmt.Errorf("check a plant payload: %w", err)
			}
			if !p.refSet {
				p.ref, p.refSet = p.m.Reference, true
			}
			if r := p.win.Add(p.win.GroupBytes(p.m.Group), p.m.Time, p.m.Value); r != window.Added {
				return nil, fmt.Errorf("add a plant value at %v: %v", p.m.Time, r)
			}
			p.accepted++
		}
	}
	ev := p.win.Evaluate(end, p.set.Stats, p.ref)
	in := buildAlertInput(p.win, ev, end, p.ac.rule, p.ac.prev, p.accepted, 0, "g", p.ref)
	p.accepted = 0
	p.al.step(p.ac, in)
	_, _, evs := p.al.take()
	return evs, nil
}

// poissonSame returns the two-sided p-value of the exact conditional test
// that counts x1 over exposure t1 and x2 over t2 come from Poisson
// processes of the same rate: given x1 + x2 = n, x1 is Bin(n, t1/(t1+t2))
// (Przyborowski & Wilenski 1940, "Homogeneity of results in testing
// samples from Poisson series", Biometrika 31, 313–323); twice the
// smaller tail, at most 1.
func poissonSame(x1, x2 int64, t1, t2 float64) float64 {
	b := distuv.Binomial{N: float64(x1 + x2), P: t1 / (t1 + t2)}
	lo := b.CDF(float64(x1))
	hi := 1.0
	if x1 > 0 {
		hi = 1 - b.CDF(float64(x1-1))
	}
	return math.Min(1, 2*math.Min(lo, hi))
}

// TestFalseRaisesMatchCalibrate: on in-control plant streams (four lines
// at one value per second, no event), the daemon's evaluation path gives
// as many false means raises per evaluation as calibrate estimates for the
// same rule. The rule is the default one at a deliberately high alpha
// (0.05, clearing level 0.05, confirm 1: calibrate measures about 0.02
// raises per evaluation) so that a short test counts dozens. The
// comparison is the exact conditional test of two Poisson rates
// (poissonSame) at the 1 % level; false raises are rare, separated events
// (a raise clears only after five quiet evaluations), so their count is
// close to Poisson, if anything less dispersed, which makes the test
// conservative. The seeds are fixed: the outcome is deterministic.
func TestFalseRaisesMatchCalibrate(t *testing.T) {
	// 8-hour shifts of in-control stream. About 60 raises: the test passes
	// only while calibrate's rate is within about 0.67–1.33 times the
	// daemon's observed one (worked out with R's ppois for 59 raises in
	// 2880 evaluations); under -short about 20 raises, 0.48–1.63 times.
	shifts := 6
	if testing.Short() {
		shifts = 2
	}
	text := calibConfig("alpha = 0.05\nclear_alpha = 0.05\nconfirm = 1\n")
	rule := resolvedRule(t, text)
	res, err := calib.Run(context.Background(), calib.Config{
		Scenario: calibScenario(), Rule: rule,
		Alphas: []float64{rule.Alpha}, Confirms: []int{rule.Confirm},
		Days: 60, MaxFalse: 1, BaselineK: 0.5, Seed: 9, Workers: 2,
	})
	if err != nil {
		t.Fatal(err)
	}
	want := res.Points[0].False
	warm := calibWarm(rule)
	evals := 8 * 60
	raises := make([]int64, shifts)
	err = parallel(shifts, 2, func(i int) error {
		start := time.Date(2026, 12, 1, 6, 0, 0, 0, time.UTC)
		gen, err := plant.New(plant.Scenario{
			Name: "in control", Seed: uint64(500 + i), Start: start, Duration: warm + time.Duration(evals)*time.Minute,
			Characteristics: []plant.Characteristic{calibChar(nil)},
		})
		if err != nil {
			return err
		}
		p, err := newEvalPath(text, gen)
		if err != nil {
			return err
		}
		for m := time.Minute; m <= warm+time.Duration(evals)*time.Minute; m += time.Minute {
			evs, err := p.minute(start.Add(m))
			if err != nil {
				return err
			}
			for _, ev := range evs {
				if ev.Transition == alert.TransitionRaised && ev.Alert.Kind == alert.KindMeansDiverge && m > warm {
					raises[i]++
				}
			}
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	var got int64
	for _, n := range raises {
		got += n
	}
	td := float64(shifts * evals)
	pv := poissonSame(got, want.Raises, td, float64(want.Evaluations))
	t.Logf("daemon path: %d false raises in %v evaluations (%.4f each; per 8 h %v); calibrate: %d in %d (%.4f each, %.2f per 30 days, 95 %% %.2f–%.2f); p = %.3g",
		got, td, float64(got)/td, raises, want.Raises, want.Evaluations, float64(want.Raises)/float64(want.Evaluations), want.Per30d, want.Low, want.High, pv)
	if pv < 0.01 {
		t.Errorf("the daemon's false-raise rate %.4f per evaluation differs from calibrate's %.4f (exact conditional Poisson test p = %.3g < 0.01)",
			float64(got)/td, float64(want.Raises)/float64(want.Evaluations), pv)
	}
}

// TestInputAndSilenceAlertsOnPlant: the daemon, fed a plant in which line
// L2 sends nothing from minute 10 to minute 30 and 30 % of all messages
// are bad (every kind the plant makes) from minute 40 to minute 50, raises
// a group-silent alert naming L2 once L2 has been silent for silent_after
// (10 minutes) and an input-rejected alert at the first evaluation after
// the bad messages start; each clears after clear_after (2) evaluations
// once its cause has ended; no other alert is raised.
func TestInputAndSilenceAlertsOnPlant(t *testing.T) {
	start := time.Date(2026, 12, 1, 6, 0, 0, 0, time.UTC)
	sc := plant.Scenario{
		Name: "silence and rejects", Seed: 21, Start: start, Duration: 70 * time.Minute,
		Characteristics: []plant.Characteristic{calibChar([]plant.Event{
			{Kind: plant.Silence, Group: "L2", At: 10 * time.Minute, Duration: 20 * time.Minute},
		})},
	}
	gen, err := plant.New(sc)
	if err != nil {
		t.Fatal(err)
	}
	sc.Bad = plant.Bad{Rate: 0.3}
	bad, err := plant.New(sc)
	if err != nil {
		t.Fatal(err)
	}
	s, err := newSimDaemon(t.TempDir(), calibConfig("clear_after = 2\n"), "fill-weight", start, gen)
	if err != nil {
		t.Fatal(err)
	}
	s.alt, s.altFrom, s.altTo = bad, start.Add(40*time.Minute), start.Add(50*time.Minute)
	seen := newSeenAlerts()
	for m := time.Minute; m <= 70*time.Minute; m += time.Minute {
		if err := s.minute(start.Add(m)); err != nil {
			_ = s.close()
			t.Fatal(err)
		}
		seen.look(s, start.Add(m))
	}
	if err := s.close(); err != nil {
		t.Fatal(err)
	}
	at := func(m int) time.Time { return start.Add(time.Duration(m) * time.Minute) }
	check := func(k alert.Kind, groups []string, raiseFrom, raiseTo, clearFrom, clearTo int) alert.Alert {
		t.Helper()
		a, ok := seen.first(k)
		if !ok {
			t.Errorf("no %s alert raised; raised: %+v", k, seen.raised)
			return a
		}
		if !slices.Equal(a.Groups, groups) {
			t.Errorf("%s alert names %v, want %v", k, a.Groups, groups)
		}
		if a.Raised.Before(at(raiseFrom)) || a.Raised.After(at(raiseTo)) {
			t.Errorf("%s alert raised at %v, want from %v to %v", k, a.Raised.Format(time.TimeOnly), at(raiseFrom).Format(time.TimeOnly), at(raiseTo).Format(time.TimeOnly))
		}
		c, ok := seen.cleared[a.ID]
		if !ok || c.Before(at(clearFrom)) || c.After(at(clearTo)) {
			t.Errorf("%s alert cleared at %v (%v), want from %v to %v", k, c.Format(time.TimeOnly), ok, at(clearFrom).Format(time.TimeOnly), at(clearTo).Format(time.TimeOnly))
		}
		t.Logf("%s: raised %v, cleared %v: %s", k, a.Raised.Format(time.TimeOnly), c.Format(time.TimeOnly), a.Reason)
		return a
	}
	// Silent from the evaluation 10 minutes after L2's last value (just
	// before minute 10), for two evaluations after it reports again.
	check(alert.KindGroupSilent, []string{"L2"}, 20, 20, 32, 32)
	// Rejected from the evaluation at minute 41 (the minute 40–41 holds
	// bad messages), cleared two evaluations after the first clean minute.
	r := check(alert.KindInputRejected, nil, 41, 41, 52, 52)
	if !(r.RejectRate > 0.2 && r.RejectRate < 0.4) {
		t.Errorf("reject rate %v at the raise, want about 0.3", r.RejectRate)
	}
	for _, a := range seen.raised {
		if a.Kind != alert.KindGroupSilent && a.Kind != alert.KindInputRejected {
			t.Errorf("unexpected %s alert: %+v", a.Kind, a)
		}
	}
	if n := seen.count(alert.KindGroupSilent, start) + seen.count(alert.KindInputRejected, start); n != 2 {
		t.Errorf("%d silent and rejected alerts raised, want one of each: %+v", n, seen.raised)
	}
}

// TestAlertSpansHoldTheirLength: with the default window (30 minutes)
// and the default rule (window F detectors of 1 and 30 minutes), every
// detector's span holds the whole buckets its bounds name: at one value
// per second per line, 60 values per minute of the span.
//
// It fails today: the daemon's window keeps the buckets of the last
// Length counted from the bucket now falls in (window.fromIdx), so at an
// evaluation on a bucket boundary it has already dropped the first bucket
// of the 30-minute span [now − 30m, now) that buildAlertInput asks
// SpanSums for: the span holds 29 minutes (1740 values per line) under
// bounds that say 30. calibrate's simulation keeps Length + 1 bucket
// (calib.stream) and so measures 30-minute spans; the daemon's are a
// minute shorter than configured and than calibrated.
func TestAlertSpansHoldTheirLength(t *testing.T) {
	start := time.Date(2026, 12, 1, 6, 0, 0, 0, time.UTC)
	gen, err := plant.New(plant.Scenario{Name: "spans", Seed: 1, Start: start, Duration: time.Hour,
		Characteristics: []plant.Characteristic{calibChar(nil)}})
	if err != nil {
		t.Fatal(err)
	}
	text := calibConfig("")
	p, err := newEvalPath(text, gen)
	if err != nil {
		t.Fatal(err)
	}
	if p.set.Window.Length != 30*time.Minute {
		t.Fatalf("window %v, want the default 30m", p.set.Window.Length)
	}
	for m := time.Minute; m <= 40*time.Minute; m += time.Minute {
		if _, err := p.minute(start.Add(m)); err != nil {
			t.Fatal(err)
		}
	}
	end := start.Add(40 * time.Minute)
	ev := p.win.Evaluate(end, p.set.Stats, p.ref)
	in := buildAlertInput(p.win, ev, end, p.ac.rule, p.ac.prev, 0, 0, "g", p.ref)
	for _, s := range in.Spans {
		want := int64(s.To.Sub(s.From) / time.Second)
		for g, a := range s.Groups {
			if a.N != want {
				t.Errorf("span %v [%v, %v) of %s: %d values, want %d (one per second)",
					s.Length, s.From.Format(time.TimeOnly), s.To.Format(time.TimeOnly), in.Groups[g], a.N, want)
			}
		}
	}
}
