package main

import (
	"cmp"
	"encoding/json"
	"slices"
	"sync"
	"time"

	"github.com/lockstep-project/lockstep/stats"
	"github.com/lockstep-project/lockstep/window"
)

// jsonLive is the JSON of a characteristic's latest evaluation, served at
// /api/v1/characteristics/{name}: the fields of lockstep check --json
// (jsonReport, embedded so that its names are the same) and what a live
// window adds. "rows" is the number of values analysed; "inexact_values"
// counts, since the daemon started, the values that could not be centred
// exactly.
type jsonLive struct {
	Characteristic string    `json:"characteristic"`
	Evaluated      time.Time `json:"evaluated"`
	jsonReport
	Window     jsonWindow  `json:"window"`
	Counts     []jsonCount `json:"counts"`
	Silent     []string    `json:"silent"`
	Incomplete bool        `json:"incomplete"`
	// Quantiles describe the spread of each analysed group's kept values,
	// for box plots (quantiles.go); empty when the window keeps no sample.
	Quantiles []jsonQuantiles `json:"quantiles"`
}

// jsonWindow bounds an evaluated window: [from, to), and the buckets in it
// that hold values (0 for a count-based window).
type jsonWindow struct {
	From    time.Time `json:"from"`
	To      time.Time `json:"to"`
	Buckets int       `json:"buckets"`
}

// jsonCount is one group's share of a window, silent groups included.
type jsonCount struct {
	Name   string     `json:"name"`
	N      int64      `json:"n"`
	Silent bool       `json:"silent"`
	Last   *time.Time `json:"last"`
}

// jsonSummary is one line of /api/v1/characteristics: the state of a
// characteristic as of its latest evaluation. f and p are the one-way
// table's (anova.f, anova.p of the report); the verdict may rest on Welch's
// F instead, as its text says.
type jsonSummary struct {
	Name       string      `json:"name"`
	Unit       string      `json:"unit,omitempty"`
	Evaluated  time.Time   `json:"evaluated"`
	Window     jsonWindow  `json:"window"`
	Groups     []jsonCount `json:"groups"`
	F          *float64    `json:"f"`
	P          *float64    `json:"p"`
	Differ     bool        `json:"differ"`
	Verdict    string      `json:"verdict"`
	Incomplete bool        `json:"incomplete"`
	// What the dashboard's tile shows besides (the report's verdict and
	// minimum_detectable_shift.largest): the test that decided (F or Welch
	// F) with its F and p, the groups named with their shifts, the group
	// whose spread stands out, and the smallest shift of one group alone
	// that the F test detects with the report's power.
	Test                   string           `json:"test,omitempty"`
	TestF                  *float64         `json:"test_f"`
	TestP                  *float64         `json:"test_p"`
	Divergent              []jsonDivergence `json:"divergent"`
	Spread                 *jsonSpread      `json:"spread"`
	MinimumDetectableShift *float64         `json:"minimum_detectable_shift"`
}

// liveReport is a characteristic's latest evaluation, ready to serve: never
// modified once built.
type liveReport struct {
	summary jsonSummary
	detail  []byte
}

// liveInput is what one evaluation produced, with what the daemon knows
// about the characteristic besides.
type liveInput struct {
	Name       string
	Unit       string
	Evaluated  time.Time
	Eval       window.Evaluation
	Inexact    int64
	Incomplete string // why the window may miss values; "" when complete
	// Win and Ref, when Win is set, give the kept values of the window for
	// the quantiles (keptValues); nil: no quantiles.
	Win *window.Window
	Ref stats.Reference
}

// buildLive turns an evaluation into a liveReport.
func buildLive(in liveInput) (*liveReport, error) {
	ev := in.Eval
	j := jsonLive{
		Characteristic: in.Name,
		Evaluated:      in.Evaluated.UTC(),
		jsonReport:     toJSON(ev.Report, checkInfo{Unit: in.Unit}),
		Window:         jsonWindow{From: ev.From.UTC(), To: ev.To.UTC(), Buckets: ev.Buckets},
		Counts:         make([]jsonCount, len(ev.Counts)),
		Silent:         ev.Silent,
		Incomplete:     in.Incomplete != "",
	}
	j.Rows, j.Inexact = ev.Report.Table.N, in.Inexact
	if j.Silent == nil {
		j.Silent = []string{}
	}
	if j.Groups == nil {
		j.Groups = []jsonGroup{}
	}
	if in.Incomplete != "" {
		j.Notes = append(slices.Clip(j.Notes), in.Incomplete)
	}
	for i, c := range ev.Counts {
		jc := jsonCount{Name: c.Name, N: c.N, Silent: c.Silent}
		if !c.Last.IsZero() {
			t := c.Last.UTC()
			jc.Last = &t
		}
		j.Counts[i] = jc
	}
	j.Quantiles = groupQuantiles(keptValues(in.Win, ev, in.Ref))
	detail, err := json.MarshalIndent(j, "", "  ")
	if err != nil {
		return nil, err
	}
	sum := jsonSummary{
		Name: in.Name, Unit: in.Unit, Evaluated: j.Evaluated, Window: j.Window, Groups: j.Counts,
		F: j.Anova.F, P: j.Anova.P, Differ: j.Verdict.Differ, Verdict: j.Verdict.Text, Incomplete: j.Incomplete,
		Test: j.Verdict.Test, TestF: j.Verdict.F, TestP: j.Verdict.P, Divergent: j.Verdict.Divergent, Spread: j.Verdict.Spread,
	}
	if j.Shift != nil {
		sum.MinimumDetectableShift = j.Shift.Largest
	}
	return &liveReport{
		summary: sum,
		detail:  append(detail, '\n'),
	}, nil
}

// reportBook holds the latest report of every characteristic: the loop puts,
// the HTTP API reads.
type reportBook struct {
	mu      sync.RWMutex
	reports map[string]*liveReport
	// onPut, when set before the loop starts, is called with the summary of
	// every report put, after it is in the book, on the putting goroutine:
	// the server-sent events (sse.go). It must return quickly.
	onPut func(jsonSummary)
}

func newReportBook() *reportBook { return &reportBook{reports: make(map[string]*liveReport)} }

// put replaces the report of its characteristic.
func (b *reportBook) put(r *liveReport) {
	b.mu.Lock()
	b.reports[r.summary.Name] = r
	b.mu.Unlock()
	if b.onPut != nil {
		b.onPut(r.summary)
	}
}

// get returns the latest report of name.
func (b *reportBook) get(name string) (*liveReport, bool) {
	b.mu.RLock()
	defer b.mu.RUnlock()
	r, ok := b.reports[name]
	return r, ok
}

// summaries returns the state of every characteristic, by name.
func (b *reportBook) summaries() []jsonSummary {
	b.mu.RLock()
	out := make([]jsonSummary, 0, len(b.reports))
	for _, r := range b.reports {
		out = append(out, r.summary)
	}
	b.mu.RUnlock()
	slices.SortFunc(out, func(a, b jsonSummary) int { return cmp.Compare(a.Name, b.Name) })
	return out
}
