package main

import (
	"context"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"time"

	"github.com/lockstep-project/lockstep/cmd/lockstep/internal/chart"
	"github.com/lockstep-project/lockstep/cmd/lockstep/internal/replay"
	"github.com/lockstep-project/lockstep/stats"
	"github.com/lockstep-project/lockstep/store"
)

// PlotCommand draws charts of stored data.
type PlotCommand struct {
	Stdout, Stderr io.Writer
}

// Usage returns the help text of lockstep plot.
func (c *PlotCommand) Usage() string {
	return `Usage: lockstep plot window --store FILE --characteristic NAME --at T --output FILE [options]

Draws one window of a characteristic as the daemon evaluated it at time T: a
box plot of each group's values (median, quartiles, whiskers to the furthest
values within 1.5 interquartile ranges, points beyond), the grand mean and
each group's analysis-of-means decision limits, annotated with F, p and the
group the analysis names. The values are the retained raw values of the
window, or, where they have aged out, the samples kept in the stored bucket
states. PNG or SVG by the extension of --output.

For the course of a whole period, see "lockstep replay --plot FILE".

Options:
  --store FILE           the store, opened read-only (default lockstep.db, or [store] path of --config)
  --config FILE          the daemon's configuration: the characteristic's live settings
  --characteristic NAME  the characteristic
  --at T                 the evaluation time: RFC 3339 with a zone (2026-12-01T10:30:00Z)
  --window D             window length (default the live setting)
  --alpha A              significance level of the tests and limits (default the live setting)
  --output FILE          the chart to write: FILE.png or FILE.svg

Exit status: 0 when the chart was written, 1 on a problem, 2 on a usage mistake.
`
}

// Run parses the options and draws.
func (c *PlotCommand) Run(ctx context.Context, args []string) error {
	if len(args) == 0 || args[0] != "window" {
		if len(args) > 0 && (args[0] == "--help" || args[0] == "-h") {
			return errHelp
		}
		return fmt.Errorf("%w: say what to draw: lockstep plot window …", errUsage)
	}
	fs := newFlagSet("plot window")
	var f replayFlags
	fs.StringVar(&f.storePath, "store", "", "")
	fs.StringVar(&f.configPath, "config", "", "")
	fs.StringVar(&f.char, "characteristic", "", "")
	fs.StringVar(&f.window, "window", "", "")
	fs.Float64Var(&f.alpha, "alpha", 0, "")
	at := fs.String("at", "", "")
	out := fs.String("output", "", "")
	pos, err := parseFlags(fs, args[1:])
	if err != nil {
		return err
	}
	if len(pos) > 0 {
		return fmt.Errorf("%w: unexpected argument %q", errUsage, pos[0])
	}
	if *out == "" {
		return fmt.Errorf("%w: give --output FILE.png or FILE.svg", errUsage)
	}
	format, err := chartFormat(*out)
	if err != nil {
		return fmt.Errorf("%w: --output: %v", errUsage, err)
	}
	if *at == "" {
		return fmt.Errorf("%w: give the evaluation time with --at T", errUsage)
	}
	f.from, f.to = *at, *at
	cfg, err := loadSettings(f.configPath)
	if err != nil {
		return err
	}
	spec, set, err := f.spec(cfg, true)
	if err != nil {
		return err
	}
	spec.Step = max(spec.Window.Bucket, time.Second) // one evaluation; a bucket keeps a bucket-state replay valid
	st, plan, err := f.plan(cfg, spec, "plot")
	if err != nil {
		return err
	}
	defer st.Close()
	var ev replay.Eval
	if err := plan.Run(ctx, func(e replay.Eval) error { ev = e; return nil }); err != nil {
		return err
	}
	row := replay.NewRow(ev, plan.Groups)
	unit := plan.Record.Unit
	if set.Unit != "" {
		unit = set.Unit
	}
	boxes, err := windowBoxes(st, plan, ev, &row, unit)
	if err != nil {
		return err
	}
	if err := writeChart(*out, format, boxes.WriteTo); err != nil {
		return err
	}
	fmt.Fprintf(c.Stdout, "wrote %s: %s\n", *out, boxes.Subtitle)
	return nil
}

// windowBoxes gathers the values of the evaluated window, by group.
func windowBoxes(st *store.Store, plan *replay.Plan, ev replay.Eval, row *replay.Row, unit string) (*chart.Boxes, error) {
	rep := &ev.Eval.Report
	index := map[string]int{}
	b := &chart.Boxes{Unit: unit, GrandMean: math.NaN(),
		Title: fmt.Sprintf("%s: window %s to %s (UTC)", plan.Spec.Characteristic,
			ev.Eval.From.UTC().Format("2006-01-02 15:04:05"), ev.At.UTC().Format("15:04:05"))}
	// By name, for the reader; the analysis's own order is the window's.
	groups := slices.Clone(rep.Groups)
	slices.SortStableFunc(groups, func(a, b stats.GroupSummary) int { return strings.Compare(a.Name, b.Name) })
	for _, g := range groups {
		lo, hi, ok := row.Limits(g.Name)
		if !ok {
			lo, hi = math.NaN(), math.NaN()
		}
		index[g.Name] = len(b.Groups)
		b.Groups = append(b.Groups, chart.BoxGroup{Name: g.Name, Lower: lo, Upper: hi})
	}
	for _, d := range rep.Verdict.Divergent {
		if i, ok := index[d.Name]; ok {
			b.Groups[i].Named = true
		}
	}
	if row.GrandMean != nil {
		b.GrandMean = *row.GrandMean
	}
	b.Subtitle = windowSubtitle(row, unit, plan.Spec.Options.Alpha)
	name := plan.Spec.Characteristic
	var err error
	if plan.Source == replay.Buckets {
		b.Title += "; values: the samples kept in the bucket states"
		ref := stats.NewReference(plan.Record.Reference)
		err = st.Buckets(name, ev.Eval.From, ev.At, func(bs store.BucketState) error {
			if i, ok := index[bs.Group]; ok {
				for _, v := range bs.Sample {
					b.Groups[i].Values = append(b.Groups[i].Values, ref.Uncentre(v))
				}
			}
			return nil
		})
	} else {
		err = st.Raw(name, ev.Eval.From, ev.At, func(rv store.RawValue) error {
			if i, ok := index[rv.Group]; ok {
				d, err := stats.ParseDecimal(rv.Text)
				if err == nil {
					b.Groups[i].Values = append(b.Groups[i].Values, d.Float64())
				}
			}
			return nil
		})
	}
	if err != nil {
		return nil, fmt.Errorf("read the window's values: %w", err)
	}
	return b, nil
}

// windowSubtitle is the one-line annotation of a window chart.
func windowSubtitle(r *replay.Row, unit string, alpha float64) string {
	if r.F == nil || r.P == nil {
		return "F not available (fewer than two groups with values, or no spread within groups)"
	}
	s := fmt.Sprintf("F = %.4g, p = %.3g", *r.F, *r.P)
	if r.WelchF != nil && r.WelchP != nil {
		s += fmt.Sprintf("; Welch F = %.4g, p = %.3g", *r.WelchF, *r.WelchP)
	}
	switch {
	case r.Diverging != "" && r.Shift != nil:
		s += fmt.Sprintf("; named: %s, shift %+.4g %s (%s, α = %g)", r.Diverging, *r.Shift, unit, r.Test, alpha)
	case r.Differ:
		s += fmt.Sprintf("; means differ (%s, α = %g), no single group named", r.Test, alpha)
	default:
		s += fmt.Sprintf("; no group named (α = %g)", alpha)
	}
	return s
}

// writeChart writes a chart to path through a temporary file, so that a
// failed drawing leaves no half-written file.
func writeChart(path, format string, draw func(io.Writer, string) error) error {
	dir := filepath.Dir(path)
	tmp, err := os.CreateTemp(dir, ".lockstep-chart-*")
	if err != nil {
		return fmt.Errorf("write chart: %w", err)
	}
	defer os.Remove(tmp.Name())
	if err := draw(tmp, format); err != nil {
		tmp.Close()
		return err
	}
	if err := tmp.Close(); err != nil {
		return fmt.Errorf("write chart %s: %w", path, err)
	}
	if err := os.Rename(tmp.Name(), path); err != nil {
		return fmt.Errorf("write chart %s: %w", path, err)
	}
	return nil
}

// timelineChart collects a replay's rows for its chart.
type timelineChart struct {
	tl chart.Timeline
}

func newTimelineChart(plan *replay.Plan, unit string) *timelineChart {
	s := plan.Spec
	return &timelineChart{tl: chart.Timeline{
		Title: fmt.Sprintf("%s: replay %s to %s, window %v, step %v", s.Characteristic,
			s.From.Format("2006-01-02 15:04"), s.To.Format("2006-01-02 15:04"), s.Window.Length, s.Step),
		Unit: unit, Groups: plan.Groups, Confidence: s.Options.Confidence,
	}}
}

func orNaN(v *float64) float64 {
	if v == nil {
		return math.NaN()
	}
	return *v
}

func (c *timelineChart) add(r *replay.Row) {
	n := len(c.tl.Groups)
	pt := chart.Point{Time: r.Time, Mean: make([]float64, n), Lower: make([]float64, n), Upper: make([]float64, n),
		GrandMean: orNaN(r.GrandMean), P: orNaN(r.P), WelchP: orNaN(r.WelchP)}
	for i := range n {
		g := r.Groups[i]
		pt.Mean[i], pt.Lower[i], pt.Upper[i] = orNaN(g.Mean), orNaN(g.Lower), orNaN(g.Upper)
	}
	c.tl.Add(pt)
}

func (c *timelineChart) write(path string, raised [][2]time.Time, alpha float64) error {
	format, err := chartFormat(path)
	if err != nil {
		return err
	}
	c.tl.Raised, c.tl.Alpha = raised, alpha
	return writeChart(path, format, c.tl.WriteTo)
}
