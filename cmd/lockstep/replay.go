package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"strings"
	"time"

	"github.com/schollz/progressbar/v3"

	"github.com/lockstep-project/lockstep/alert"
	"github.com/lockstep-project/lockstep/cmd/lockstep/internal/replay"
	"github.com/lockstep-project/lockstep/stats"
	"github.com/lockstep-project/lockstep/store"
	"github.com/lockstep-project/lockstep/window"
)

// ReplayCommand re-runs the evaluations of one characteristic over a stored
// period.
type ReplayCommand struct {
	Stdout, Stderr io.Writer
	// Terminal reports whether w is a terminal (nil: look at the file);
	// it decides on the progress bar.
	Terminal func(w io.Writer) bool
	// ProgressMin is the number of evaluations from which a replay shows
	// its progress bar (0: progressMin).
	ProgressMin int64
	// events, when set, gets the replay's alert events (for tests).
	events func(alert.Event)
}

// Usage returns the help text of lockstep replay.
func (c *ReplayCommand) Usage() string {
	return `Usage: lockstep replay --store FILE --characteristic NAME --from T --to T [options]

Re-runs the evaluations of one characteristic over a stored period, as the
daemon would have made them, and prints one row per evaluation: the time,
n and mean of every group, F and p (classic and Welch), the effect size ω²,
the group the analysis of means names with its shift, and the alert
transitions; then a summary. An evaluation at time T sees the values stamped
before T. Evaluations are at --from, --from + --step, … up to --to.

The windows are rebuilt exactly from the retained raw values, or from the
stored bucket states where the raw values have aged out (then --window,
--step and --from must fall on the bucket width). The store is opened
read-only: a backup copy, or the file of a stopped daemon. While the daemon
runs it holds the file: take a copy with "lockstep backup COPY" and replay
the copy.

lockstep is advisory: a replay shows what the rule would have said, not what
should be done about product or people.

Options:
  --store FILE           the store (default lockstep.db, or [store] path of --config)
  --config FILE          the daemon's configuration: the characteristic's live
                         settings (window, bucket, sample, evaluate_every, levels)
  --characteristic NAME  the characteristic to replay
  --from T, --to T       the period: RFC 3339 with a zone (2026-12-01T06:00:00Z) or a date
  --window D             window length (default the live setting, e.g. 30m)
  --step D               time between evaluations (default the live evaluate_every)
  --source S             auto (default), raw or buckets
  --alpha A              significance level of each row's tests and limits (default
                         the live setting)

The alert rule is the characteristic's live rule ([alerts] and
[characteristics.NAME.alert] of --config, else the defaults); what if it were
otherwise:
  --significance A       the false-alarm budget of the means detectors per evaluation
  --practical D          the smallest shift worth an alert, in the unit (0: off)
  --confirm N            evaluations a condition must hold to be raised
  --clear-after N        quiet evaluations that clear a raised alert
  --test T               test of equal means: auto, classic or welch

Rejected messages and acknowledgements are not stored, so a replay raises no
input-rejected alert and acknowledges nothing.
  --csv                  print CSV instead of the table (the summary goes to standard error)
  --json                 print JSON lines: one object per evaluation, then {"summary": …}
  --plot FILE            also draw the replay: group means with 95 % intervals and
                         the grand mean over p on a log scale (FILE.png or FILE.svg)

Exit status: 0 when the replay ran, 1 on a problem (the store is in use, not
a lockstep store, no such characteristic, no data in the period), 2 on a
usage mistake.
`
}

// replayFlags are the options replay and plot share.
type replayFlags struct {
	storePath, configPath, char string
	from, to                    string
	window, step                string
	alpha                       float64
}

// readOnlyStore opens a store for reading, saying how to proceed when the
// daemon holds it.
func readOnlyStore(path, what string) (*store.Store, error) {
	st, err := store.OpenReadOnly(path, store.Options{})
	if errors.Is(err, store.ErrInUse) {
		return nil, fmt.Errorf("%w\nThe daemon holds the file. Take a consistent copy through it and %s the copy:\n  lockstep backup --http ADDRESS copy.db   (ADDRESS: the daemon's [http] listen, default %s)\n  lockstep %s --store copy.db …",
			err, what, defaultHTTPListen, what)
	}
	return st, err
}

// loadSettings reads the configuration (or the defaults) and returns it.
func loadSettings(configPath string) (*Config, error) {
	cfg := DefaultConfig()
	if configPath != "" {
		if err := LoadConfig(configPath, cfg); err != nil {
			return nil, err
		}
		if cfg.NATS.URL == "" {
			cfg.NATS.URL = natsEmbedded // as lockstep run does
		}
		if err := cfg.Validate(); err != nil {
			return nil, fmt.Errorf("check config %s: %w", configPath, err)
		}
	}
	return cfg, nil
}

// spec builds the replay's Spec from the flags and the live settings.
func (f *replayFlags) spec(cfg *Config, needRange bool) (replay.Spec, charSettings, error) {
	var s replay.Spec
	if f.char == "" {
		return s, charSettings{}, fmt.Errorf("%w: give --characteristic NAME", errUsage)
	}
	set := cfg.settingsFor(f.char)
	s.Characteristic, s.Window, s.Options, s.Step = f.char, set.Window, set.Stats, set.EvaluateEvery
	s.StateHash = set.stateHash()
	var err error
	if needRange {
		if f.from == "" || f.to == "" {
			return s, set, fmt.Errorf("%w: give the period with --from T and --to T", errUsage)
		}
		if s.From, err = replay.ParseTime(f.from); err != nil {
			return s, set, fmt.Errorf("%w: --from: %v", errUsage, err)
		}
		if s.To, err = replay.ParseTime(f.to); err != nil {
			return s, set, fmt.Errorf("%w: --to: %v", errUsage, err)
		}
	}
	if f.window != "" {
		if s.Window.Length, err = replay.ParseDuration(f.window); err != nil {
			return s, set, fmt.Errorf("%w: --window: %v", errUsage, err)
		}
		// The allowed lateness must stay shorter than the window; it
		// changes which buckets are closed, not the sums.
		if w := s.Window; w.Lateness >= w.Length {
			s.Window.Lateness = w.Length - w.Bucket
			if s.Window.Lateness <= 0 {
				s.Window.Lateness = -1 // none (0 would mean the default)
			}
		}
	}
	if f.step != "" {
		if s.Step, err = replay.ParseDuration(f.step); err != nil {
			return s, set, fmt.Errorf("%w: --step: %v", errUsage, err)
		}
	}
	if f.alpha != 0 {
		if err := checkLevel("--alpha", f.alpha); err != nil {
			return s, set, err
		}
		s.Options.Alpha = f.alpha
	}
	return s, set, nil
}

// plan opens the store of --store (else the config's) read-only, for the
// command what, and plans spec over it; the caller closes the store.
func (f *replayFlags) plan(cfg *Config, spec replay.Spec, what string) (*store.Store, *replay.Plan, error) {
	path := f.storePath
	if path == "" {
		path = cfg.Store.Path
	}
	st, err := readOnlyStore(path, what)
	if err != nil {
		return nil, nil, err
	}
	plan, err := replay.NewPlan(st, spec)
	if err != nil {
		st.Close()
		return nil, nil, err
	}
	return st, plan, nil
}

// Run parses the options and replays.
func (c *ReplayCommand) Run(ctx context.Context, args []string) error {
	fs := newFlagSet("replay")
	var f replayFlags
	fs.StringVar(&f.storePath, "store", "", "")
	fs.StringVar(&f.configPath, "config", "", "")
	fs.StringVar(&f.char, "characteristic", "", "")
	fs.StringVar(&f.from, "from", "", "")
	fs.StringVar(&f.to, "to", "", "")
	fs.StringVar(&f.window, "window", "", "")
	fs.StringVar(&f.step, "step", "", "")
	fs.Float64Var(&f.alpha, "alpha", 0, "")
	sourceText := fs.String("source", "auto", "")
	asCSV := fs.Bool("csv", false, "")
	asJSON := fs.Bool("json", false, "")
	plotPath := fs.String("plot", "", "")
	var rf ruleFlags
	rf.register(fs)
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) > 0 {
		return fmt.Errorf("%w: unexpected argument %q", errUsage, pos[0])
	}
	if *asCSV && *asJSON {
		return fmt.Errorf("%w: give --csv or --json, not both", errUsage)
	}
	source, err := replay.ParseSource(*sourceText)
	if err != nil {
		return fmt.Errorf("%w: --%v", errUsage, err)
	}
	if *plotPath != "" {
		if _, err := chartFormat(*plotPath); err != nil {
			return fmt.Errorf("%w: --plot: %v", errUsage, err)
		}
	}
	cfg, err := loadSettings(f.configPath)
	if err != nil {
		return err
	}
	spec, set, err := f.spec(cfg, true)
	if err != nil {
		return err
	}
	spec.Source = source
	rule, err := cfg.alertRule(spec.Characteristic)
	if err != nil {
		return err
	}
	if err := rf.apply(&rule); err != nil {
		return err
	}
	// The alert spans of the (what-if) rule over the (what-if) window, as
	// the daemon keeps them.
	spec.Window.Keep = spanKeep(rule, spec.Window)
	st, plan, err := f.plan(cfg, spec, "replay")
	if err != nil {
		return err
	}
	defer st.Close()
	unit := plan.Record.Unit
	if set.Unit != "" {
		unit = set.Unit
	}
	var w replay.Writer
	switch {
	case *asCSV:
		w = replay.NewCSVWriter(c.Stdout, plan.Groups, c.Stderr)
	case *asJSON:
		w = replay.NewJSONWriter(c.Stdout)
	default:
		w = replay.NewTableWriter(c.Stdout, plan.Groups, replay.Decimals(plan.Record.Reference), unit)
	}
	var chart *timelineChart
	if *plotPath != "" {
		chart = newTimelineChart(plan, unit)
	}
	bar := c.progress(plan.Evaluations)
	var tally replay.Tally
	alerts, err := newReplayAlerts(spec.Characteristic, unit, rule, stats.NewReference(plan.Record.Reference))
	if err != nil {
		return err
	}
	alerts.events = c.events
	err = plan.Run(ctx, func(e replay.Eval) error {
		row := replay.NewRow(e, plan.Groups)
		alerts.step(e, &row)
		tally.Add(&row)
		if chart != nil {
			chart.add(&row)
		}
		if bar != nil {
			_ = bar.Add(1)
		}
		return w.Row(&row)
	})
	if bar != nil {
		_ = bar.Finish()
	}
	if err != nil {
		return err
	}
	if err := w.Summary(tally.Summary(plan.Source.String(), plan.Notes)); err != nil {
		return fmt.Errorf("write replay: %w", err)
	}
	if chart != nil {
		if err := chart.write(*plotPath, tally.Spans(), spec.Options.Alpha); err != nil {
			return err
		}
	}
	return nil
}

// progressMin is the number of evaluations from which a replay shows a
// progress bar on a terminal.
const progressMin = 2000

// progress returns a progress bar on standard error when it is a terminal
// and the replay is long, else nil.
func (c *ReplayCommand) progress(n int64) *progressbar.ProgressBar {
	isTerm := c.Terminal
	if isTerm == nil {
		isTerm = isTerminal
	}
	least := c.ProgressMin
	if least <= 0 {
		least = progressMin
	}
	if n < least || !isTerm(c.Stderr) {
		return nil
	}
	return progressbar.NewOptions64(n,
		progressbar.OptionSetWriter(c.Stderr),
		progressbar.OptionSetDescription("replay"),
		progressbar.OptionShowCount(),
		progressbar.OptionThrottle(200*time.Millisecond),
		progressbar.OptionClearOnFinish(),
	)
}

// chartFormat returns "png" or "svg" from a file name's extension.
func chartFormat(path string) (string, error) {
	switch {
	case strings.HasSuffix(strings.ToLower(path), ".png"):
		return "png", nil
	case strings.HasSuffix(strings.ToLower(path), ".svg"):
		return "svg", nil
	}
	return "", fmt.Errorf("%q: name a .png or .svg file", path)
}

// replayAlerts runs the characteristic's alert rule over the replay's
// evaluations, as the daemon does after each of its own: an alert.Monitor
// (detectors, confirmation, clearing) fed by buildAlertInput, and an
// alert.Machine (the life cycle), whose events are the row's transitions.
// What the store does not keep is not replayed: rejected messages (the
// input-rejected condition never holds) and acknowledgements (alerts go
// from raised to cleared).
type replayAlerts struct {
	rule   alert.Rule
	mon    *alert.Monitor
	mach   *alert.Machine
	unit   string
	ref    stats.Reference
	prev   time.Time
	totals window.Totals
	raised map[string]bool // open raised alerts by id
	// events, when set, gets every event but the updates (for tests).
	events func(alert.Event)
}

// newReplayAlerts returns the rule's monitor and machine for the replay.
func newReplayAlerts(name, unit string, rule alert.Rule, ref stats.Reference) (*replayAlerts, error) {
	mon, err := alert.NewMonitor(rule)
	if err != nil {
		return nil, fmt.Errorf("replay alert rule: %w", err)
	}
	mach, err := alert.NewMachine(alert.MachineOptions{Characteristic: name, Unit: unit})
	if err != nil {
		return nil, fmt.Errorf("replay alert rule: %w", err)
	}
	return &replayAlerts{rule: rule, mon: mon, mach: mach, unit: unit, ref: ref, raised: map[string]bool{}}, nil
}

// step runs one evaluation through the monitor and the machine and puts
// the transitions into the row.
func (a *replayAlerts) step(e replay.Eval, r *replay.Row) {
	tot := e.Window.Totals()
	accepted := (tot.Added + tot.Late + tot.Expired) - (a.totals.Added + a.totals.Late + a.totals.Expired)
	a.totals = tot
	in := buildAlertInput(e.Window, e.Eval, e.At, a.rule, a.prev, accepted, 0, a.unit, a.ref)
	a.prev = e.At
	evs := a.mach.Step(e.At, a.mon.Step(in))
	for _, ev := range evs {
		if ev.Transition == alert.TransitionUpdated {
			continue
		}
		if a.events != nil {
			a.events(ev)
		}
		switch ev.Transition {
		case alert.TransitionRaised:
			a.raised[ev.Alert.ID] = true
		case alert.TransitionCleared:
			delete(a.raised, ev.Alert.ID)
		}
		r.Transitions = append(r.Transitions, replay.Transition{
			Kind: ev.Alert.Kind.String(), Key: ev.Alert.Key, Phase: ev.Transition.String(),
			Group: strings.Join(ev.Alert.Groups, "+"),
		})
	}
	r.Raised = len(a.raised) > 0
}

// ruleFlags are replay's what-if overrides of the alert rule.
type ruleFlags struct {
	significance, practical float64
	confirm, clearAfter     int
	test                    string
}

func (f *ruleFlags) register(fs *flag.FlagSet) {
	fs.Float64Var(&f.significance, "significance", 0, "")
	fs.Float64Var(&f.practical, "practical", -1, "")
	fs.IntVar(&f.confirm, "confirm", 0, "")
	fs.IntVar(&f.clearAfter, "clear-after", 0, "")
	fs.StringVar(&f.test, "test", "", "")
}

// apply overrides the live rule with the flags given.
func (f *ruleFlags) apply(r *alert.Rule) error {
	if f.significance != 0 {
		if !(f.significance > 0 && f.significance < 1) {
			return fmt.Errorf("%w: --significance %v: give a false-alarm budget between 0 and 1, such as 4e-5", errUsage, f.significance)
		}
		r.Alpha = f.significance
	}
	if f.practical >= 0 {
		r.Practical = f.practical
	}
	if f.confirm != 0 {
		r.Confirm = f.confirm
	}
	if f.clearAfter != 0 {
		r.ClearAfter = f.clearAfter
	}
	if f.test != "" {
		t, err := alert.ParseTestChoice(f.test)
		if err != nil {
			return fmt.Errorf("%w: --test: %v", errUsage, err)
		}
		r.Test = t
	}
	if err := r.Validate(); err != nil {
		return fmt.Errorf("%w: the alert rule with these options: %v", errUsage, err)
	}
	return nil
}
