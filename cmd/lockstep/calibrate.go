package main

import (
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"runtime"
	"strconv"
	"strings"
	"sync"
	"text/tabwriter"
	"time"

	"github.com/schollz/progressbar/v3"

	"github.com/lockstep-project/lockstep/alert"
	"github.com/lockstep-project/lockstep/cmd/lockstep/internal/calib"
	"github.com/lockstep-project/lockstep/store"
)

// CalibrateCommand measures alert settings on simulated streams.
type CalibrateCommand struct {
	Stdout, Stderr io.Writer
}

// Usage returns the help text of lockstep calibrate.
func (c *CalibrateCommand) Usage() string {
	return `Usage: lockstep calibrate [options]

Runs lockstep's own window and alert monitor over simulated in-control
streams of parallel groups and measures, for a grid of significance levels
(--alphas) and confirmation counts (--confirms): the false raises per 8-hour
shift and per 30 days (with a 95 % interval), and the median and 90th
percentile of the minutes to raise when one group shifts (--shifts), and
whether a drift that moves every group together raises. It recommends the
most sensitive grid point whose false raises stay within --max-false.
Beside it, held at the --max-false rate, two per-group textbook charts: a
Shewhart chart of each group's subgroup means and a per-group CUSUM on each
group's own target; they raise under a common drift, a between-group
monitor should not.

The stream: values normal with the within-group SD, each group at its rate,
in buckets of --bucket (also the evaluation interval); the means detectors
are the default rule's unless --windows or --cusums say otherwise.
The simulation does not replace watching the real stream: treat its figures
as a guide to settings, not a guarantee (lockstep is advisory).

Stream options (flags, or --store with --characteristic):
  --rates LIST        values per second of each group, e.g. 1,1,1,1 (default 1,1,1,1)
  --sd X              within-group SD, in the characteristic's unit (default 1)
  --bucket D          bucket and evaluation interval (default 1m)
  --store FILE        read the rates and the pooled within-bucket SD of
                      --characteristic from a store file, read-only, over
                      --since (default the last 7 days it holds); a running
                      daemon holds its file: calibrate from a backup
                      (lockstep's online backup), stop the daemon, or give
                      --rates and --sd
  --characteristic C  the characteristic to read from --store
  --since D           how far back from the newest bucket to read (default 168h)

Grid and detectors:
  --alphas LIST       significance levels, the means detectors' budget per
                      evaluation (default 2e-5,4e-5,8e-5)
  --confirms LIST     confirmation counts (default 1,2)
  --windows LIST      window F detectors as length:share (default 1m:0.01,30m:0.01)
  --cusums LIST       contrast CUSUMs as k:share (default 0.85:0.58,0.35:0.40)
  --test T            auto, classic or welch (default auto)

Measurement:
  --shifts LIST       shifts of one group to time, in SDs (default 1,0.25,0.1)
  --practical X       time a shift of X in the characteristic's unit instead
                      (X / --sd SDs), when --shifts is not given
  --days N            days of in-control stream (default 360)
  --runs N            runs per shift (default 200)
  --horizon D         how long a run waits for a raise (default 4h)
  --drift X           common drift of every group, in SDs (default 3)
  --drift-over D      over this long (default 4h)
  --drift-runs N      runs of the drift (default 50)
  --max-false R       target of false raises, as N/PERIOD with a period of
                      h, d or a Go duration, e.g. 1/30d, 2/8h (default 1/30d)
  --baseline-k X      the per-group CUSUM's k (default 0.5)
  --seed N            random seed: the same seed, options and version give
                      the same figures (default 1)
  --workers N         goroutines (default: the number of CPUs)
  --json              write the result as JSON instead of a table

A progress bar goes to standard error when it is a terminal.
Exit status: 0 done, 1 an error (no such store or characteristic, the store
in use), 2 a usage mistake.
`
}

// Run parses the options, runs the calibration and writes the result.
func (c *CalibrateCommand) Run(ctx context.Context, args []string) error {
	fs := newFlagSet("calibrate")
	rates := fs.String("rates", "", "")
	sd := fs.Float64("sd", 1, "")
	bucket := fs.Duration("bucket", time.Minute, "")
	storePath := fs.String("store", "", "")
	charName := fs.String("characteristic", "", "")
	since := fs.Duration("since", 7*24*time.Hour, "")
	alphas := fs.String("alphas", "2e-5,4e-5,8e-5", "")
	confirms := fs.String("confirms", "1,2", "")
	windows := fs.String("windows", "", "")
	cusums := fs.String("cusums", "", "")
	test := fs.String("test", "auto", "")
	shifts := fs.String("shifts", "", "")
	practical := fs.Float64("practical", 0, "")
	days := fs.Float64("days", 360, "")
	runs := fs.Int("runs", 200, "")
	horizon := fs.Duration("horizon", 4*time.Hour, "")
	drift := fs.Float64("drift", 3, "")
	driftOver := fs.Duration("drift-over", 4*time.Hour, "")
	driftRuns := fs.Int("drift-runs", 50, "")
	maxFalse := fs.String("max-false", "1/30d", "")
	baseK := fs.Float64("baseline-k", 0.5, "")
	seed := fs.Uint64("seed", 1, "")
	workers := fs.Int("workers", runtime.NumCPU(), "")
	asJSON := fs.Bool("json", false, "")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) > 0 {
		return fmt.Errorf("%w: unexpected argument %q", errUsage, pos[0])
	}
	set := map[string]bool{}
	fs.Visit(func(f *flagT) { set[f.Name] = true })

	cfg := calib.Config{
		Scenario:  calib.Scenario{SD: *sd, Bucket: *bucket},
		Rule:      alert.DefaultRule(),
		Horizon:   *horizon,
		Days:      *days,
		ShiftRuns: *runs,
		Drift:     *drift, DriftOver: *driftOver, DriftRuns: *driftRuns,
		BaselineK: *baseK, Seed: *seed, Workers: *workers,
	}
	usage := func(err error) error { return fmt.Errorf("%w: %v", errUsage, err) }
	if *storePath != "" {
		if set["rates"] || set["sd"] {
			return usage(errors.New("--store reads the rates and the SD: leave out --rates and --sd"))
		}
		if *charName == "" {
			return usage(errors.New("--store needs --characteristic"))
		}
		r, s, err := streamFromStore(*storePath, *charName, *since, *bucket)
		if err != nil {
			return err
		}
		cfg.Scenario.Rates, cfg.Scenario.SD = r, s
	} else {
		if *charName != "" {
			return usage(errors.New("--characteristic needs --store"))
		}
		if *rates == "" {
			*rates = "1,1,1,1"
		}
		if cfg.Scenario.Rates, err = parseFloats(*rates); err != nil {
			return usage(fmt.Errorf("--rates: %w", err))
		}
	}
	if cfg.Alphas, err = parseFloats(*alphas); err != nil {
		return usage(fmt.Errorf("--alphas: %w", err))
	}
	if cfg.Confirms, err = parseInts(*confirms); err != nil {
		return usage(fmt.Errorf("--confirms: %w", err))
	}
	switch {
	case *shifts != "":
		if cfg.Shifts, err = parseFloats(*shifts); err != nil {
			return usage(fmt.Errorf("--shifts: %w", err))
		}
	case *practical > 0:
		cfg.Shifts = []float64{*practical / cfg.Scenario.SD}
	case set["practical"]:
		return usage(fmt.Errorf("--practical %v is not positive", *practical))
	default:
		cfg.Shifts = []float64{1, 0.25, 0.1}
	}
	if *windows != "" {
		if cfg.Rule.Windows, err = parseWindows(*windows); err != nil {
			return usage(fmt.Errorf("--windows: %w", err))
		}
	}
	if *cusums != "" {
		if cfg.Rule.CUSUMs, err = parseCUSUMs(*cusums); err != nil {
			return usage(fmt.Errorf("--cusums: %w", err))
		}
	}
	if cfg.Rule.Test, err = alert.ParseTestChoice(*test); err != nil {
		return usage(fmt.Errorf("--test: %w", err))
	}
	perBucket, err := parseRate(*maxFalse)
	if err != nil {
		return usage(fmt.Errorf("--max-false: %w", err))
	}
	cfg.MaxFalse = perBucket * float64(30*24*time.Hour)
	if *workers < 1 {
		return usage(fmt.Errorf("--workers %d is below 1", *workers))
	}
	if err := cfg.Validate(); err != nil {
		return usage(err)
	}
	if isTerminal(c.Stderr) {
		bar := progressbar.NewOptions64(1, progressbar.OptionSetWriter(c.Stderr),
			progressbar.OptionSetDescription("calibrate"), progressbar.OptionSetPredictTime(true),
			progressbar.OptionClearOnFinish(), progressbar.OptionThrottle(100*time.Millisecond))
		var mu sync.Mutex
		var high int64
		cfg.Progress = func(done, total int64) {
			mu.Lock()
			defer mu.Unlock()
			if done > high {
				high = done
				bar.ChangeMax64(total)
				_ = bar.Set64(done)
			}
		}
		defer func() { _ = bar.Finish() }()
	}
	res, err := calib.Run(ctx, cfg)
	if err != nil {
		return err
	}
	if *asJSON {
		return writeCalibJSON(c.Stdout, &cfg, &res)
	}
	return writeCalibTable(c.Stdout, &cfg, &res)
}

// flagT is the standard flag type, named for fs.Visit's callback.
type flagT = flag.Flag

// streamFromStore reads each group's rate and the pooled within-bucket SD
// of a characteristic from a store file opened read-only, over the span
// since before its newest bucket.
func streamFromStore(path, char string, since, bucket time.Duration) ([]float64, float64, error) {
	st, err := store.OpenReadOnly(path, store.Options{Timeout: time.Second})
	if err != nil {
		if errors.Is(err, store.ErrInUse) {
			return nil, 0, fmt.Errorf("read store: %w; a running daemon holds its file: calibrate from a backup, stop the daemon, or give --rates and --sd", err)
		}
		return nil, 0, fmt.Errorf("read store: %w", err)
	}
	defer st.Close()
	type acc struct {
		n  int64
		m2 float64
		bk int64
	}
	var order []string
	groups := map[string]*acc{}
	var newest time.Time
	if err := st.Buckets(char, time.Time{}, time.Time{}, func(b store.BucketState) error {
		if b.Start.After(newest) {
			newest = b.Start
		}
		return nil
	}); err != nil {
		return nil, 0, fmt.Errorf("read store: %w", err)
	}
	if newest.IsZero() {
		return nil, 0, fmt.Errorf("read store: characteristic %q has no buckets in %s", char, path)
	}
	from := newest.Add(-since)
	starts := map[time.Time]bool{}
	if err := st.Buckets(char, from, time.Time{}, func(b store.BucketState) error {
		g := groups[b.Group]
		if g == nil {
			g = &acc{}
			groups[b.Group] = g
			order = append(order, b.Group)
		}
		starts[b.Start] = true
		g.n += b.Acc.N
		g.m2 += b.Acc.M2
		if b.Acc.N > 0 {
			g.bk++
		}
		return nil
	}); err != nil {
		return nil, 0, fmt.Errorf("read store: %w", err)
	}
	span := float64(len(starts)) * bucket.Seconds()
	var rates []float64
	var m2, df float64
	for _, name := range order {
		g := groups[name]
		rates = append(rates, float64(g.n)/span)
		m2 += g.m2
		df += float64(g.n - g.bk)
	}
	if len(rates) < 2 || df < 1 || m2 <= 0 {
		return nil, 0, fmt.Errorf("read store: characteristic %q has %d groups and %v within-bucket degrees of freedom since %s: too little to calibrate on", char, len(rates), df, from.Format(time.RFC3339))
	}
	return rates, math.Sqrt(m2 / df), nil
}

func parseFloats(s string) ([]float64, error) {
	var out []float64
	for f := range strings.SplitSeq(s, ",") {
		x, err := strconv.ParseFloat(strings.TrimSpace(f), 64)
		if err != nil || math.IsNaN(x) || math.IsInf(x, 0) {
			return nil, fmt.Errorf("%q is not a number", f)
		}
		out = append(out, x)
	}
	return out, nil
}

func parseInts(s string) ([]int, error) {
	var out []int
	for f := range strings.SplitSeq(s, ",") {
		x, err := strconv.Atoi(strings.TrimSpace(f))
		if err != nil {
			return nil, fmt.Errorf("%q is not a whole number", f)
		}
		out = append(out, x)
	}
	return out, nil
}

// parsePair splits "a:b".
func parsePair(f string) (string, float64, error) {
	a, b, ok := strings.Cut(strings.TrimSpace(f), ":")
	if !ok {
		return "", 0, fmt.Errorf("%q is not of the form VALUE:SHARE", f)
	}
	share, err := strconv.ParseFloat(b, 64)
	if err != nil {
		return "", 0, fmt.Errorf("%q: share %q is not a number", f, b)
	}
	return a, share, nil
}

func parseWindows(s string) ([]alert.WindowF, error) {
	var out []alert.WindowF
	for f := range strings.SplitSeq(s, ",") {
		a, share, err := parsePair(f)
		if err != nil {
			return nil, err
		}
		d, err := time.ParseDuration(a)
		if err != nil {
			return nil, fmt.Errorf("%q: length %q is not a duration such as 5m", f, a)
		}
		out = append(out, alert.WindowF{Length: d, Share: share})
	}
	return out, nil
}

func parseCUSUMs(s string) ([]alert.ContrastCUSUM, error) {
	var out []alert.ContrastCUSUM
	for f := range strings.SplitSeq(s, ",") {
		a, share, err := parsePair(f)
		if err != nil {
			return nil, err
		}
		k, err := strconv.ParseFloat(a, 64)
		if err != nil {
			return nil, fmt.Errorf("%q: k %q is not a number", f, a)
		}
		out = append(out, alert.ContrastCUSUM{K: k, Share: share})
	}
	return out, nil
}

// parseRate parses N/PERIOD (PERIOD: 30d, 8h, 1d, or a Go duration; a bare
// unit counts as 1 of it) and returns N per nanosecond.
func parseRate(s string) (float64, error) {
	a, b, ok := strings.Cut(s, "/")
	if !ok {
		return 0, fmt.Errorf("%q is not of the form N/PERIOD, e.g. 1/30d", s)
	}
	n, err := strconv.ParseFloat(a, 64)
	if err != nil || !(n > 0) || math.IsInf(n, 0) {
		return 0, fmt.Errorf("%q: %q is not a positive number", s, a)
	}
	var d time.Duration
	if num, ok := strings.CutSuffix(b, "d"); ok {
		if num == "" {
			num = "1"
		}
		x, err := strconv.ParseFloat(num, 64)
		if err != nil || !(x > 0) || x > 1e5 {
			return 0, fmt.Errorf("%q: period %q is not a number of days", s, b)
		}
		d = time.Duration(x * float64(24*time.Hour))
	} else {
		if b == "h" || b == "m" || b == "s" {
			b = "1" + b
		}
		if d, err = time.ParseDuration(b); err != nil || d <= 0 {
			return 0, fmt.Errorf("%q: period %q is not a positive duration such as 8h or 30d", s, b)
		}
	}
	return n / float64(d), nil
}

// minutes formats a time to raise.
func minutes(x float64) string {
	if math.IsInf(x, 1) {
		return "none"
	}
	return strconv.FormatFloat(x, 'f', 0, 64)
}

func writeCalibTable(w io.Writer, cfg *calib.Config, res *calib.Result) error {
	sc := cfg.Scenario
	fmt.Fprintf(w, "Stream: %d groups at %s values/s, SD %g, evaluated every %v; %.0f days in control, %d runs per shift, horizon %v.\n",
		len(sc.Rates), joinFloats(sc.Rates), sc.SD, sc.Bucket, cfg.Days, cfg.ShiftRuns, cfg.Horizon)
	fmt.Fprintf(w, "Detectors: %s. Target: at most %g false raises per 30 days.\n\n", describeDetectors(cfg.Rule), cfg.MaxFalse)
	tw := tabwriter.NewWriter(w, 2, 4, 2, ' ', tabwriter.AlignRight)
	head := "alpha\tconfirm\tfalse/8h\tfalse/30d\t95 % interval\t"
	for _, s := range cfg.Shifts {
		head += fmt.Sprintf("%g SD med\tp90\t", s)
	}
	head += fmt.Sprintf("drift %g SD\t\n", cfg.Drift)
	fmt.Fprint(tw, head)
	for i, p := range res.Points {
		mark := ""
		if i == res.Recommended {
			mark = " *"
		}
		fmt.Fprintf(tw, "%g%s\t%d\t%.3f\t%.2f\t%.2f–%.2f\t", p.Alpha, mark, p.Confirm, p.False.Per8h, p.False.Per30d, p.False.Low, p.False.High)
		for _, d := range p.Delays {
			fmt.Fprintf(tw, "%s\t%s\t", minutes(d.Median), minutes(d.P90))
		}
		fmt.Fprintf(tw, "%d of %d raised (chance %.1f)\t\n", p.Drift.Raised, p.Drift.Runs, p.Drift.Chance)
	}
	if err := tw.Flush(); err != nil {
		return fmt.Errorf("write table: %w", err)
	}
	fmt.Fprintln(w, "Times are minutes from the shift to the raise; \"none\": not within the horizon.")
	fmt.Fprintln(w, "Drift: runs that raised while every group drifted together; chance: how many the in-control false-raise rate alone predicts.")
	if r := res.Recommended; r >= 0 {
		p := res.Points[r]
		fmt.Fprintf(w, "\nRecommended (*): alpha %g, confirm %d — the most sensitive setting measured at or below %g false raises per 30 days (%.2f, 95 %% interval %.2f–%.2f).\n",
			p.Alpha, p.Confirm, cfg.MaxFalse, p.False.Per30d, p.False.Low, p.False.High)
	} else {
		fmt.Fprintf(w, "\nNo grid point stays at or below %g false raises per 30 days: try smaller alphas or larger confirm counts.\n", cfg.MaxFalse)
	}
	fmt.Fprintf(w, "\nPer-group baselines, held at %g false raises per 30 days (known SD, each group's own target):\n", cfg.MaxFalse)
	tw = tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
	for _, b := range res.Baselines {
		fmt.Fprintf(tw, "  %s (%s)\tfalse/30d %.2f\t", b.Name, b.Settings, b.False.Per30d)
		for _, d := range b.Delays {
			fmt.Fprintf(tw, "%g SD: %s/%s\t", d.Shift, minutes(d.Median), minutes(d.P90))
		}
		fmt.Fprintf(tw, "drift: %d of %d raised, median %s min\t\n", b.Drift.Raised, b.Drift.Runs, minutes(b.Drift.Median))
	}
	if err := tw.Flush(); err != nil {
		return fmt.Errorf("write table: %w", err)
	}
	fmt.Fprintln(w, "The per-group charts also raise when every group moves together (a common cause, such as a raw-material lot); the between-group monitor compares the groups with each other and does not.")
	return nil
}

func joinFloats(xs []float64) string {
	s := make([]string, len(xs))
	for i, x := range xs {
		s[i] = strconv.FormatFloat(x, 'g', -1, 64)
	}
	return strings.Join(s, ",")
}

func describeDetectors(r alert.Rule) string {
	var parts []string
	for _, d := range r.Windows {
		parts = append(parts, fmt.Sprintf("%s F %v (share %g)", r.Test, d.Length, d.Share))
	}
	for _, c := range r.CUSUMs {
		parts = append(parts, fmt.Sprintf("contrast CUSUM k=%g (share %g)", c.K, c.Share))
	}
	return strings.Join(parts, ", ")
}

// calibJSON is the JSON form of a calibration.
type calibJSON struct {
	Rates       []float64        `json:"rates"`
	SD          float64          `json:"sd"`
	Bucket      string           `json:"bucket"`
	Days        float64          `json:"days"`
	Runs        int              `json:"runs_per_shift"`
	Horizon     string           `json:"horizon"`
	Seed        uint64           `json:"seed"`
	MaxFalse    float64          `json:"max_false_per_30d"`
	Detectors   string           `json:"detectors"`
	Grid        []calibPointJSON `json:"grid"`
	Recommended *calibPointJSON  `json:"recommended"`
	Baselines   []calibPointJSON `json:"baselines"`
}

type calibPointJSON struct {
	Name        string           `json:"name,omitempty"`
	Settings    string           `json:"settings,omitempty"`
	Alpha       float64          `json:"alpha,omitempty"`
	Confirm     int              `json:"confirm,omitempty"`
	FalseRaises int64            `json:"false_raises"`
	Evaluations int64            `json:"evaluations"`
	Per8h       float64          `json:"false_per_8h"`
	Per30d      float64          `json:"false_per_30d"`
	Per30dLow   float64          `json:"false_per_30d_low"`
	Per30dHigh  float64          `json:"false_per_30d_high"`
	Shifts      []calibDelayJSON `json:"shifts"`
	DriftRuns   int              `json:"drift_runs"`
	DriftRaised int              `json:"drift_raised"`
	DriftChance float64          `json:"drift_raised_by_chance"`
}

type calibDelayJSON struct {
	Shift  float64  `json:"shift_sd"`
	Runs   int      `json:"runs"`
	Raised int      `json:"raised"`
	Wrong  int      `json:"wrong_group"`
	Median *float64 `json:"median_minutes"` // null: not within the horizon
	P90    *float64 `json:"p90_minutes"`
}

func delaysJSON(ds []calib.Delay) []calibDelayJSON {
	fin := func(x float64) *float64 {
		if math.IsInf(x, 0) {
			return nil
		}
		return &x
	}
	var out []calibDelayJSON
	for _, d := range ds {
		out = append(out, calibDelayJSON{Shift: d.Shift, Runs: d.Runs, Raised: d.Raised, Wrong: d.Wrong, Median: fin(d.Median), P90: fin(d.P90)})
	}
	return out
}

func writeCalibJSON(w io.Writer, cfg *calib.Config, res *calib.Result) error {
	out := calibJSON{Rates: cfg.Scenario.Rates, SD: cfg.Scenario.SD, Bucket: cfg.Scenario.Bucket.String(),
		Days: cfg.Days, Runs: cfg.ShiftRuns, Horizon: cfg.Horizon.String(), Seed: cfg.Seed,
		MaxFalse: cfg.MaxFalse, Detectors: describeDetectors(cfg.Rule), Grid: []calibPointJSON{}}
	rate := func(p *calibPointJSON, r calib.Rate) {
		p.FalseRaises, p.Evaluations, p.Per8h, p.Per30d, p.Per30dLow, p.Per30dHigh = r.Raises, r.Evaluations, r.Per8h, r.Per30d, r.Low, r.High
	}
	for _, p := range res.Points {
		j := calibPointJSON{Alpha: p.Alpha, Confirm: p.Confirm, Shifts: delaysJSON(p.Delays), DriftRuns: p.Drift.Runs, DriftRaised: p.Drift.Raised, DriftChance: p.Drift.Chance}
		rate(&j, p.False)
		out.Grid = append(out.Grid, j)
	}
	if res.Recommended >= 0 {
		out.Recommended = &out.Grid[res.Recommended]
	}
	for _, b := range res.Baselines {
		j := calibPointJSON{Name: b.Name, Settings: b.Settings, Shifts: delaysJSON(b.Delays), DriftRuns: b.Drift.Runs, DriftRaised: b.Drift.Raised, DriftChance: b.Drift.Chance}
		rate(&j, b.False)
		out.Baselines = append(out.Baselines, j)
	}
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	if err := enc.Encode(out); err != nil {
		return fmt.Errorf("write JSON: %w", err)
	}
	return nil
}
