package main

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/alert"
	"github.com/lockstep-project/lockstep/cmd/lockstep/internal/replay"
	"github.com/lockstep-project/lockstep/ingest"
	"github.com/lockstep-project/lockstep/stats"
	"github.com/lockstep-project/lockstep/store"
)

var update = flag.Bool("update", false, "rewrite the golden files in testdata/golden")

// replayT0 is the start of the recorded stream.
var replayT0 = time.Date(2026, 12, 1, 6, 0, 0, 0, time.UTC)

// replayConfig is the configuration of the recorded stream: the defaults
// (1 min buckets, 30 min window, 1 min lateness, 10 min silence, samples of
// 64) with evaluations every 10 s.
const replayConfig = `
[defaults]
evaluate_every = "10s"

[characteristics.fill]
unit = "g"
`

// streamMsg is one recorded measurement.
type streamMsg struct {
	at    time.Time
	group string
	text  string
}

// replayStream invents a reproducible stream of fill weights (input data
// only, not a reference): four lines L1–L4 about 500 g, one value each
// about every 2.3 s, L3 running 0.04 g high from 40 min on, L2 silent from
// 50 to 62 min, for span.
func replayStream(span time.Duration) []streamMsg {
	rng := rand.New(rand.NewPCG(1, 2))
	var out []streamMsg
	groups := []string{"L1", "L2", "L3", "L4"}
	for g, name := range groups {
		for t := replayT0.Add(time.Duration(g) * 370 * time.Millisecond); t.Before(replayT0.Add(span)); t = t.Add(2300 * time.Millisecond) {
			since := t.Sub(replayT0)
			if name == "L2" && since >= 50*time.Minute && since < 62*time.Minute {
				continue
			}
			mean := 500.0
			if name == "L3" && since >= 40*time.Minute {
				mean += 0.04
			}
			out = append(out, streamMsg{at: t, group: name, text: fmt.Sprintf("%.3f", mean+0.05*rng.NormFloat64())})
		}
	}
	slices.SortStableFunc(out, func(a, b streamMsg) int { return a.at.Compare(b.at) })
	return out
}

// liveEval is one evaluation the daemon made.
type liveEval struct {
	at     time.Time
	detail []byte
}

// recordLive runs the daemon's apply and evaluation code over the stream
// with an injected clock: at each tick T = t0 + k·10 s it applies the
// messages stamped before T and evaluates, as the loop does when the
// clock reaches T. It returns the directory of the store (closed) and
// every evaluation, in order.
func recordLive(t *testing.T, span time.Duration) (string, []liveEval) {
	dir, live, _ := recordLiveAlerts(t, span)
	return dir, live
}

// recordLiveAlerts is recordLive that also returns the JSON of the alert
// events the daemon made, updates left out.
func recordLiveAlerts(t *testing.T, span time.Duration) (string, []liveEval, []string) {
	t.Helper()
	dir := t.TempDir()
	ld := newLoopDaemon(t, dir, replayConfig)
	var events []string
	ld.alerts.alertHook = func(b []byte) {
		if !strings.Contains(string(b), `"transition":"updated"`) {
			events = append(events, string(b))
		}
	}
	var clock time.Time
	ld.now = func() time.Time { return clock }
	stage := ld.newStage()
	msgs := replayStream(span)
	var live []liveEval
	i := 0
	for k := 0; ; k++ {
		tick := replayT0.Add(time.Duration(k) * 10 * time.Second)
		if tick.After(replayT0.Add(span)) {
			break
		}
		var batch []ingest.Msg
		for ; i < len(msgs) && msgs[i].at.Before(tick); i++ {
			m := msgs[i]
			batch = append(batch, ingest.Msg{
				Subject: "meas.fill." + m.group, Seq: uint64(i + 1), Stored: m.at, Arrived: m.at,
				Data: fmt.Appendf(nil, `{"value":%q,"time":%q,"id":"%s-%d"}`, m.text, m.at.Format(time.RFC3339Nano), m.group, i),
			})
		}
		clock = tick
		if len(batch) > 0 {
			b := stage.prepare(batch)
			ld.applyBatch(b)
			stage.recycle(b)
		}
		ld.evaluateDue(tick)
		// Before its first value the configured characteristic has no
		// reference yet (its empty reports say 0): the record starts with
		// the first value.
		if rep, ok := ld.book.get("fill"); ok && i > 0 && rep.summary.Evaluated.Equal(tick) {
			live = append(live, liveEval{at: tick, detail: rep.detail})
		}
		if k%30 == 0 {
			if err := ld.flush(); err != nil {
				t.Fatal(err)
			}
		}
	}
	if err := ld.flush(); err != nil {
		t.Fatal(err)
	}
	ld.close(t)
	return dir, live, events
}

// replaySpec is the replay of the recorded stream with the live settings.
func replaySpec(t *testing.T, from, to time.Time, step time.Duration, src replay.Source) replay.Spec {
	t.Helper()
	cfg := DefaultConfig()
	if err := ParseConfig(strings.NewReader(replayConfig), cfg); err != nil {
		t.Fatal(err)
	}
	set := cfg.settingsFor("fill")
	return replay.Spec{Characteristic: "fill", From: from, To: to, Step: step, Window: set.Window,
		Options: set.Stats, Source: src, StateHash: set.stateHash()}
}

// replayEvals runs a replay and returns its evaluations.
func replayEvals(t *testing.T, st *store.Store, spec replay.Spec) (*replay.Plan, []replay.Eval) {
	t.Helper()
	plan, err := replay.NewPlan(st, spec)
	if err != nil {
		t.Fatal(err)
	}
	var out []replay.Eval
	if err := plan.Run(context.Background(), func(e replay.Eval) error { out = append(out, e); return nil }); err != nil {
		t.Fatal(err)
	}
	return plan, out
}

// TestReplayReproducesLive: a replay of the recorded period with the live
// settings, at the daemon's evaluation times, gives the daemon's reports
// byte for byte (every number of the report JSON, the window bounds and
// the counts).
func TestReplayReproducesLive(t *testing.T) {
	span := 90 * time.Minute
	if testing.Short() {
		span = 55 * time.Minute
	}
	dir, live, liveEvents := recordLiveAlerts(t, span)
	if len(live) < 100 {
		t.Fatalf("the daemon made %d evaluations; the test needs a long stream", len(live))
	}
	st, err := store.OpenReadOnly(filepath.Join(dir, "lockstep.db"), store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	plan, err := replay.NewPlan(st, replaySpec(t, live[0].at, live[len(live)-1].at, 10*time.Second, replay.Auto))
	if err != nil {
		t.Fatal(err)
	}
	if plan.Source != replay.Raw {
		t.Fatalf("source %v, want raw (every raw value is retained)", plan.Source)
	}
	differ, silent, i := 0, 0, 0
	ref := stats.NewReference(plan.Record.Reference)
	// Compared inside the callback: the window is valid only there.
	err = plan.Run(context.Background(), func(e replay.Eval) error {
		lr, err := buildLive(liveInput{Name: "fill", Unit: "g", Evaluated: e.At, Eval: e.Eval, Win: e.Window, Ref: ref})
		if err != nil {
			return err
		}
		if i >= len(live) {
			return fmt.Errorf("replay made more evaluations than the daemon's %d", len(live))
		}
		if !e.At.Equal(live[i].at) || !bytes.Equal(lr.detail, live[i].detail) {
			return fmt.Errorf("evaluation %d at %v differs from the daemon's at %v:\n%s", i, e.At, live[i].at, firstDiff(lr.detail, live[i].detail))
		}
		if e.Eval.Report.Verdict.Differ {
			differ++
		}
		if len(e.Eval.Silent) > 0 {
			silent++
		}
		i++
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if i != len(live) {
		t.Fatalf("replay made %d evaluations, the daemon %d", i, len(live))
	}
	// The comparison covers evaluations that found a difference and ones
	// with a silent group, not only quiet ones.
	if differ == 0 || (!testing.Short() && silent == 0) {
		t.Errorf("the stream should hold differing windows (%d) and a silent group (%d)", differ, silent)
	}

	// The same transitions: the replay command's alert events, with the
	// live rule, are the daemon's, id for id and figure for figure.
	var events []string
	c := &ReplayCommand{Stdout: io.Discard, Stderr: io.Discard, events: func(ev alert.Event) {
		b, err := json.Marshal(ev)
		if err != nil {
			t.Fatal(err)
		}
		events = append(events, string(b))
	}}
	cfgPath := writeConfig(t, t.TempDir(), replayConfig)
	err = c.Run(context.Background(), []string{"--store", filepath.Join(dir, "lockstep.db"), "--config", cfgPath, "--characteristic", "fill",
		"--from", live[0].at.Format(time.RFC3339), "--to", live[len(live)-1].at.Format(time.RFC3339), "--step", "10s", "--json"})
	if err != nil {
		t.Fatal(err)
	}
	raised := 0
	for _, e := range liveEvents {
		if strings.Contains(e, `"transition":"raised"`) {
			raised++
		}
	}
	if raised == 0 {
		t.Fatalf("the daemon raised no alert over the stream (%d events): the comparison would be empty", len(liveEvents))
	}
	t.Logf("%d evaluations and %d alert events (%d raised) equal", len(live), len(liveEvents), raised)
	if !slices.Equal(events, liveEvents) {
		n := min(len(events), len(liveEvents))
		i := 0
		for i < n && events[i] == liveEvents[i] {
			i++
		}
		t.Fatalf("replay made %d alert events, the daemon %d; first difference at %d:\nreplay: %v\nlive:   %v",
			len(events), len(liveEvents), i, events[i:min(i+1, len(events))], liveEvents[i:min(i+1, len(liveEvents))])
	}
}

// TestReplayBucketsMatchRaw: where both are possible, a replay from the
// stored bucket states equals the replay from raw values: the same counts,
// window bounds and samples (so the same value-based tests), and the same
// F, p, Welch F, ω² and means to a relative 1e-9. The tolerance: the bucket
// states are the same accumulators the raw replay builds (added in the
// same order), but a restored window merges them in another grouping
// (window.Restore re-forms the sliding aggregate), which changes the last
// bits of each merged sum (Chan, Golub & LeVeque merges, a few ulps each
// over 30 buckets); F and p amplify that by at most SS total / SS between,
// under 1e3 here, so 1e-9 is 1e4 times the expected error and still far
// below any figure printed.
func TestReplayBucketsMatchRaw(t *testing.T) {
	dir, _ := recordLive(t, 70*time.Minute)
	st, err := store.OpenReadOnly(filepath.Join(dir, "lockstep.db"), store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	from, to := replayT0.Add(5*time.Minute), replayT0.Add(70*time.Minute)
	_, raw := replayEvals(t, st, replaySpec(t, from, to, time.Minute, replay.Raw))
	plan, bkt := replayEvals(t, st, replaySpec(t, from, to, time.Minute, replay.Buckets))
	if plan.Source != replay.Buckets || len(raw) != len(bkt) || len(raw) != 66 {
		t.Fatalf("source %v, %d raw and %d bucket evaluations, want 66 each", plan.Source, len(raw), len(bkt))
	}
	rel := func(a, b float64) float64 {
		if a == b {
			return 0
		}
		return math.Abs(a-b) / math.Max(math.Abs(a), math.Abs(b))
	}
	for i := range raw {
		a, b := raw[i].Eval, bkt[i].Eval
		if !a.From.Equal(b.From) || !a.To.Equal(b.To) || !slices.Equal(a.Counts, b.Counts) || !slices.Equal(a.Silent, b.Silent) {
			t.Fatalf("at %v: windows differ: raw %v–%v %v, buckets %v–%v %v", raw[i].At, a.From, a.To, a.Counts, b.From, b.To, b.Counts)
		}
		ra, rb := a.Report, b.Report
		if (ra.TableErr == nil) != (rb.TableErr == nil) || len(ra.Groups) != len(rb.Groups) {
			t.Fatalf("at %v: availability differs", raw[i].At)
		}
		checks := [][3]any{{"F", ra.Table.F, rb.Table.F}, {"p", ra.Table.P, rb.Table.P}, {"ω²", ra.Table.Omega2, rb.Table.Omega2}, {"grand mean", ra.GrandMean, rb.GrandMean}}
		if ra.Welch != nil && rb.Welch != nil {
			checks = append(checks, [3]any{"Welch F", ra.Welch.F, rb.Welch.F}, [3]any{"Welch p", ra.Welch.P, rb.Welch.P})
		}
		if ra.Levene != nil && rb.Levene != nil {
			checks = append(checks, [3]any{"Levene F", ra.Levene.F, rb.Levene.F})
		}
		for g := range ra.Groups {
			checks = append(checks, [3]any{"mean " + ra.Groups[g].Name, ra.Groups[g].Mean, rb.Groups[g].Mean})
		}
		for _, c := range checks {
			if d := rel(c[1].(float64), c[2].(float64)); d > 1e-9 {
				t.Errorf("at %v: %s raw %v, buckets %v (relative %.2g)", raw[i].At, c[0], c[1], c[2], d)
			}
		}
		if ra.Verdict.Differ != rb.Verdict.Differ {
			t.Errorf("at %v: verdicts differ", raw[i].At)
		}
	}
}

// TestReplayAgedOut: once the raw values before a time are gone, auto
// replays from the bucket states and says so; a step that is not a
// multiple of the bucket width is refused with the reason and a fix.
func TestReplayAgedOut(t *testing.T) {
	dir, _ := recordLive(t, 60*time.Minute)
	path := filepath.Join(dir, "lockstep.db")
	st, err := store.Open(path, store.Options{NoSync: true})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := st.Retain("fill", replayT0.Add(40*time.Minute), time.Time{}); err != nil {
		t.Fatal(err)
	}
	if err := st.Close(); err != nil {
		t.Fatal(err)
	}
	ro, err := store.OpenReadOnly(path, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer ro.Close()
	from, to := replayT0.Add(35*time.Minute), replayT0.Add(55*time.Minute)
	plan, evals := replayEvals(t, ro, replaySpec(t, from, to, time.Minute, replay.Auto))
	if plan.Source != replay.Buckets || len(evals) != 21 || len(plan.Notes) == 0 || !strings.Contains(plan.Notes[0], "bucket states") {
		t.Fatalf("source %v, %d evaluations, notes %q; want buckets, 21, a note", plan.Source, len(evals), plan.Notes)
	}
	if n := evals[0].Eval.Report.Table.N; n < 2000 {
		t.Errorf("the first window holds %d values; from bucket states it should hold the whole window", n)
	}
	_, err = replay.NewPlan(ro, replaySpec(t, from, to, 90*time.Second, replay.Auto))
	if !errors.Is(err, replay.ErrSource) || !strings.Contains(err.Error(), "multiple of the bucket width 1m0s") || !strings.Contains(err.Error(), "--step") {
		t.Errorf("a 90 s step from bucket states: %v", err)
	}
	_, err = replay.NewPlan(ro, replaySpec(t, from.Add(time.Second), to, time.Minute, replay.Auto))
	if !errors.Is(err, replay.ErrSource) || !strings.Contains(err.Error(), "bucket boundary") {
		t.Errorf("--from off a bucket boundary: %v", err)
	}
	// A chart of a window whose raw values aged out shows the bucket
	// states' samples, and says so.
	svg := filepath.Join(t.TempDir(), "w.svg")
	code, _, errOut := runCmd(t, "plot", "window", "--store", path, "--characteristic", "fill", "--at", "2026-12-01T06:50:00Z", "--output", svg)
	if code != 0 {
		t.Fatalf("plot window from bucket states: exit %d: %s", code, errOut)
	}
	checkSVG(t, svg, "values: the samples kept in the bucket states", "L4")
	// A short what-if window: the allowed lateness (1 min) is cut to fit.
	code, out, errOut := runCmd(t, "replay", "--store", path, "--characteristic", "fill", "--window", "1m", "--csv",
		"--from", "2026-12-01T06:45:00Z", "--to", "2026-12-01T06:50:00Z")
	if code != 0 || strings.Count(out, "\n") != 31+1 {
		t.Errorf("--window 1m: exit %d, %d lines, %s", code, strings.Count(out, "\n"), errOut)
	}
}

// replayFixture records a short stream once per test and returns the
// store's path.
func replayFixture(t *testing.T) string {
	t.Helper()
	dir, _ := recordLive(t, 50*time.Minute)
	return filepath.Join(dir, "lockstep.db")
}

// runCmd runs one command line and returns its exit status and outputs.
func runCmd(t *testing.T, args ...string) (int, string, string) {
	t.Helper()
	var out, errOut bytes.Buffer
	code := run(context.Background(), args, strings.NewReader(""), &out, &errOut)
	return code, out.String(), errOut.String()
}

// checkGolden compares got with testdata/golden/name, or rewrites it with
// -update.
func checkGolden(t *testing.T, name, got string) {
	t.Helper()
	path := filepath.Join("..", "..", "testdata", "golden", name)
	if *update {
		if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, []byte(got), 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run go test ./cmd/lockstep -run %s -update to create it)", err, t.Name())
	}
	if got != string(want) {
		g, w := strings.Split(got, "\n"), strings.Split(string(want), "\n")
		i := 0
		for i < len(g) && i < len(w) && g[i] == w[i] {
			i++
		}
		line := func(l []string) string {
			if i < len(l) {
				return l[i]
			}
			return "(end)"
		}
		t.Errorf("%s differs from the golden file at line %d (rerun with -update if the change is intended):\ngot:  %s\nwant: %s", name, i+1, line(g), line(w))
	}
}

// TestReplayGolden: the table, CSV and JSON lines of one replay.
func TestReplayGolden(t *testing.T) {
	path := replayFixture(t)
	cfg := writeConfig(t, t.TempDir(), replayConfig)
	base := []string{"replay", "--store", path, "--config", cfg, "--characteristic", "fill",
		"--from", "2026-12-01T06:38:00Z", "--to", "2026-12-01T06:48:00Z", "--step", "1m"}
	for _, f := range []struct{ name, flag string }{{"replay_table.txt", ""}, {"replay.csv", "--csv"}, {"replay.jsonl", "--json"}} {
		args := base
		if f.flag != "" {
			args = append(slices.Clip(base), f.flag)
		}
		code, out, errOut := runCmd(t, args...)
		if code != 0 {
			t.Fatalf("%s: exit %d: %s", f.name, code, errOut)
		}
		checkGolden(t, f.name, out)
		if f.flag == "--csv" && !strings.Contains(errOut, "Alerts raised: 1") {
			t.Errorf("CSV: the summary should go to standard error, got %q", errOut)
		}
	}
}

// firstDiff shows where two texts part, with some context.
func firstDiff(a, b []byte) string {
	i := 0
	for i < len(a) && i < len(b) && a[i] == b[i] {
		i++
	}
	lo := max(i-200, 0)
	return fmt.Sprintf("replay: …%s…\nlive:   …%s…", a[lo:min(i+200, len(a))], b[lo:min(i+200, len(b))])
}

// TestReplayProgress: a long replay shows a progress bar on standard error
// when it is a terminal, and writes nothing there otherwise.
func TestReplayProgress(t *testing.T) {
	path := replayFixture(t)
	args := []string{"--store", path, "--characteristic", "fill", "--csv",
		"--from", "2026-12-01T06:30:00Z", "--to", "2026-12-01T06:32:00Z", "--step", "1s"}
	for _, term := range []bool{false, true} {
		var out, errOut bytes.Buffer
		c := &ReplayCommand{Stdout: &out, Stderr: &errOut, Terminal: func(io.Writer) bool { return term }, ProgressMin: 100}
		if err := c.Run(context.Background(), args); err != nil {
			t.Fatal(err)
		}
		bar := strings.Contains(errOut.String(), "replay")
		if bar != term {
			t.Errorf("terminal %v: progress bar shown %v (standard error %q)", term, bar, errOut.String())
		}
		if n := strings.Count(out.String(), "\n"); n != 121+1 {
			t.Errorf("terminal %v: %d CSV lines, want a header and 121 rows", term, n)
		}
	}
}
