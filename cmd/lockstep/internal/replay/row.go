package replay

import (
	"math"
	"strings"
	"time"

	"github.com/lockstep-project/lockstep/stats"
	"github.com/lockstep-project/lockstep/window"
)

// GroupRow is one group's part of a Row.
type GroupRow struct {
	Name   string   `json:"name"`
	N      int64    `json:"n"`
	Silent bool     `json:"silent"`
	Mean   *float64 `json:"mean"`     // nil when silent or empty
	Lower  *float64 `json:"ci_lower"` // confidence interval of the mean
	Upper  *float64 `json:"ci_upper"`
}

// Transition is one change of an alert's state at an evaluation, as the
// rule's monitor and the alert life cycle made it.
type Transition struct {
	Kind  string `json:"kind"`            // means-diverge, spread-diverge, group-silent, …
	Key   string `json:"key,omitempty"`   // the group of a group-silent condition
	Phase string `json:"phase"`           // the alert's transition: watch, raised or cleared
	Group string `json:"group,omitempty"` // the named group, if any
}

// Row is what a replay prints of one evaluation. Numbers that are not
// available are nil (null in JSON, "-" in the table and empty in CSV).
type Row struct {
	Time      time.Time  `json:"time"`
	From      time.Time  `json:"window_from"`
	To        time.Time  `json:"window_to"`
	Groups    []GroupRow `json:"groups"`
	GrandMean *float64   `json:"grand_mean"`
	F         *float64   `json:"f"`
	P         *float64   `json:"p"`
	WelchF    *float64   `json:"welch_f"`
	WelchP    *float64   `json:"welch_p"`
	Omega2    *float64   `json:"omega2"`
	// Test is the test the verdict rests on ("F" or "Welch F"), and
	// Differ whether it found the means to differ at the significance level.
	Test   string `json:"test"`
	Differ bool   `json:"differ"`
	// Diverging names the group(s) the analysis of means found out,
	// joined by "+", with the first one's shift against the others.
	Diverging string   `json:"diverging"`
	Shift     *float64 `json:"shift"`
	// Transitions are the alert transitions at this evaluation; Raised
	// whether an alert is raised after it.
	Transitions []Transition `json:"transitions"`
	Raised      bool         `json:"raised"`
	// Limits of the analysis of means (grand mean ± half-width) by group,
	// for the charts; not printed.
	limits map[string][2]float64
}

func num(v float64) *float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return &v
}

// NewRow summarises one evaluation. groups is the plan's group order; a
// group the window learnt later is appended.
func NewRow(e Eval, groups []string) Row {
	ev, rep := e.Eval, &e.Eval.Report
	r := Row{Time: e.At.UTC(), From: ev.From.UTC(), To: ev.To.UTC(), Test: rep.Verdict.Test}
	summ := make(map[string]*stats.GroupSummary, len(rep.Groups))
	for i := range rep.Groups {
		summ[rep.Groups[i].Name] = &rep.Groups[i]
	}
	counts := make(map[string]window.GroupCount, len(ev.Counts))
	for _, c := range ev.Counts {
		counts[c.Name] = c
	}
	add := func(name string) {
		c, ok := counts[name]
		g := GroupRow{Name: name, N: c.N, Silent: !ok || c.Silent}
		if s := summ[name]; s != nil && s.N > 0 {
			g.Silent = false
			g.Mean = num(s.Mean)
			if s.CIErr == nil {
				g.Lower, g.Upper = num(s.Lower), num(s.Upper)
			}
		}
		r.Groups = append(r.Groups, g)
	}
	seen := make(map[string]bool, len(groups))
	for _, g := range groups {
		seen[g] = true
		add(g)
	}
	for _, c := range ev.Counts {
		if !seen[c.Name] {
			add(c.Name)
		}
	}
	if rep.TableErr == nil {
		r.GrandMean = num(rep.GrandMean)
		r.F, r.P, r.Omega2 = num(rep.Table.F), num(rep.Table.P), num(rep.Table.Omega2)
	}
	if rep.Welch != nil {
		r.WelchF, r.WelchP = num(rep.Welch.F), num(rep.Welch.P)
	}
	v := rep.Verdict
	r.Differ = v.Available && v.Differ
	if len(v.Divergent) > 0 {
		names := make([]string, len(v.Divergent))
		for i, d := range v.Divergent {
			names[i] = d.Name
		}
		r.Diverging = strings.Join(names, "+")
		r.Shift = num(v.Divergent[0].Shift)
	}
	if m := rep.Means; m != nil && rep.TableErr == nil {
		r.limits = make(map[string][2]float64, len(m.Groups))
		for _, d := range m.Groups {
			if d.Group < len(rep.Groups) {
				r.limits[rep.Groups[d.Group].Name] = [2]float64{rep.GrandMean - d.HalfWidth, rep.GrandMean + d.HalfWidth}
			}
		}
	}
	return r
}

// Summary closes a replay: how many alerts the rule raised, when first,
// and how long at least one was raised.
type Summary struct {
	Evaluations int64      `json:"evaluations"`
	Source      string     `json:"source"`
	Raised      int        `json:"alerts_raised"`
	FirstRaise  *time.Time `json:"first_raise"`
	TimeRaised  Duration   `json:"time_raised"`
	Notes       []string   `json:"notes"`
}

// Duration prints as Go duration text in JSON ("1h2m0s").
type Duration time.Duration

// MarshalText writes the duration as time.Duration's String.
func (d Duration) MarshalText() ([]byte, error) { return []byte(time.Duration(d).String()), nil }

// Tally builds a Summary from the rows, in time order.
type Tally struct {
	s      Summary
	since  time.Time
	raised bool
	last   time.Time
	spans  [][2]time.Time
}

// Add counts one row.
func (t *Tally) Add(r *Row) {
	t.s.Evaluations++
	for _, tr := range r.Transitions {
		if tr.Phase == "raised" {
			t.s.Raised++
			if t.s.FirstRaise == nil {
				at := r.Time
				t.s.FirstRaise = &at
			}
		}
	}
	switch {
	case r.Raised && !t.raised:
		t.since = r.Time
	case !r.Raised && t.raised:
		t.s.TimeRaised += Duration(r.Time.Sub(t.since))
		t.spans = append(t.spans, [2]time.Time{t.since, r.Time})
	}
	t.raised, t.last = r.Raised, r.Time
}

// Summary returns the summary so far; a span still raised counts up to the
// last evaluation.
func (t *Tally) Summary(source string, notes []string) Summary {
	s := t.s
	s.Source, s.Notes = source, notes
	if s.Notes == nil {
		s.Notes = []string{}
	}
	if t.raised {
		s.TimeRaised += Duration(t.last.Sub(t.since))
	}
	return s
}

// Spans returns the intervals during which an alert was raised.
func (t *Tally) Spans() [][2]time.Time {
	out := append([][2]time.Time(nil), t.spans...)
	if t.raised {
		out = append(out, [2]time.Time{t.since, t.last})
	}
	return out
}

// Limits returns the analysis-of-means decision limits of group name in
// the row's window, and false when there are none.
func (r *Row) Limits(name string) (lo, hi float64, ok bool) {
	l, ok := r.limits[name]
	return l[0], l[1], ok
}
