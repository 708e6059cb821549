package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"net/http"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/ingest"
	"github.com/lockstep-project/lockstep/stats"
	"github.com/lockstep-project/lockstep/store"
)

// plantValues returns the messages of one characteristic: n values for each
// group, interleaved, as decimal strings with two decimals around base
// (in hundredths), group g shifted by shift[g] hundredths; and the values by
// group, in publishing order.
func plantValues(char string, groups []string, n int, base int, shift []int) ([]message, map[string][]string) {
	var msgs []message
	byGroup := map[string][]string{}
	for i := range n {
		for g, name := range groups {
			c := base + shift[g] + (i*37+g*11)%29 - 14
			text := fmt.Sprintf("%d.%02d", c/100, c%100)
			msgs = append(msgs, message{subject: "meas." + char + "." + name, data: `{"value":"` + text + `"}`})
			byGroup[name] = append(byGroup[name], text)
		}
	}
	return msgs, byGroup
}

// expectedReport analyses the values as lockstep check would: centred on
// the first value, every value kept.
func expectedReport(t *testing.T, first string, groups []string, byGroup map[string][]string) stats.Report {
	t.Helper()
	d, err := stats.ParseDecimal(first)
	if err != nil {
		t.Fatal(err)
	}
	ref := stats.NewReference(d)
	var gs []stats.Group
	for _, name := range groups {
		g := stats.Group{Name: name}
		for _, text := range byGroup[name] {
			v, _, err := ref.CentreString(text)
			if err != nil {
				t.Fatal(err)
			}
			g.Acc.Add(v)
			g.Values = append(g.Values, v)
		}
		gs = append(gs, g)
	}
	return stats.Analyse(ref, gs, stats.DefaultOptions())
}

// TestRunTwoCharacteristics runs the daemon with no config file against a
// JetStream server, publishes two characteristics and reads the reports
// through the HTTP API: groups, F and p as stats.Analyse gives them on the
// same values.
func TestRunTwoCharacteristics(t *testing.T) {
	ns := startNATS(t)
	nc := connectNATS(t, ns.url)
	fillGroups, sealGroups := []string{"L1", "L2", "L3"}, []string{"J1", "J2", "J3", "J4"}
	fill, fillBy := plantValues("fill-weight", fillGroups, 40, 50000, []int{0, 3, -2})
	seal, sealBy := plantValues("seal-temp", sealGroups, 25, 18530, []int{0, 0, 40, 0})
	var msgs []message
	for i := range max(len(fill), len(seal)) {
		if i < len(fill) {
			msgs = append(msgs, fill[i])
		}
		if i < len(seal) {
			msgs = append(msgs, seal[i])
		}
	}
	publishJS(t, nc, msgs)

	d := startDaemon(t, daemonArgs(ns.url, t.TempDir())...)
	for _, tc := range []struct {
		name   string
		groups []string
		by     map[string][]string
		n      int64
	}{
		{"fill-weight", fillGroups, fillBy, int64(len(fill))},
		{"seal-temp", sealGroups, sealBy, int64(len(seal))},
	} {
		got := d.waitReport(tc.name, tc.n, 10*time.Second)
		want := expectedReport(t, tc.by[tc.groups[0]][0], tc.groups, tc.by)
		if got.Reference != want.Reference.Decimal().String() {
			t.Errorf("%s: reference %s; want %s", tc.name, got.Reference, want.Reference.Decimal())
		}
		if len(got.Groups) != len(want.Groups) {
			t.Fatalf("%s: %d groups; want %d", tc.name, len(got.Groups), len(want.Groups))
		}
		for i, g := range want.Groups {
			gg := got.Groups[i]
			if gg.Name != g.Name || gg.N != g.N || gg.Mean == nil || relErr(*gg.Mean, g.Mean) > 1e-13 {
				t.Errorf("%s: group %d = %s n=%d mean=%v; want %s n=%d mean=%v", tc.name, i, gg.Name, gg.N, gg.Mean, g.Name, g.N, g.Mean)
			}
		}
		for key, w := range map[string]float64{"f": want.Table.F, "p": want.Table.P, "ss_between": want.Table.SSBetween, "ss_within": want.Table.SSWithin} {
			if v := got.Anova[key]; v == nil || relErr(*v, w) > 1e-9 {
				t.Errorf("%s: anova %s = %v; want %v", tc.name, key, v, w)
			}
		}
		if got.Window.To.Sub(got.Window.From) != 30*time.Minute || got.Window.Buckets < 1 {
			t.Errorf("%s: window %+v; want the default 30 min", tc.name, got.Window)
		}
		if got.Incomplete || len(got.Silent) != 0 {
			t.Errorf("%s: incomplete %v, silent %v", tc.name, got.Incomplete, got.Silent)
		}
	}

	var list struct {
		Characteristics []jsonSummary `json:"characteristics"`
	}
	if st := d.get("/api/v1/characteristics", &list); st != http.StatusOK || len(list.Characteristics) != 2 {
		t.Fatalf("list: status %d, %+v", st, list)
	}
	for _, s := range list.Characteristics {
		if s.F == nil || s.P == nil || s.Verdict == "" || len(s.Groups) < 3 || s.Evaluated.IsZero() {
			t.Errorf("list entry %+v lacks state", s)
		}
	}
	if st := d.get("/api/v1/characteristics/no-such", nil); st != http.StatusNotFound {
		t.Errorf("unknown characteristic: status %d; want 404", st)
	}
	if v, ok := d.metric(`lockstep_measurements_total{result="accepted"}`); !ok || v != float64(len(msgs)) {
		t.Errorf("accepted = %v, %v; want %d", v, ok, len(msgs))
	}
	d.waitMetric("lockstep_cursor_sequence", float64(len(msgs)), 5*time.Second)
	if err := d.stop(); err != nil {
		t.Fatalf("stop: %v", err)
	}
}

// TestRunEmbedded runs the daemon with its embedded NATS server, stops it
// and runs it again on the same store and JetStream directory: the stream
// and the consumer survive, and nothing is counted twice.
func TestRunEmbedded(t *testing.T) {
	dir := t.TempDir()
	args := []string{"--nats", "embedded", "--nats-listen", "127.0.0.1:0", "--store", filepath.Join(dir, "state.db"),
		"--http", "127.0.0.1:0", "--evaluate-every", "50ms", "--log-level", "warn"}
	msgs, _ := plantValues("cap-torque", []string{"H1", "H2"}, 30, 250, []int{0, 5})

	d := startDaemon(t, args...)
	nc := connectNATS(t, d.info.NATS)
	publishJS(t, nc, msgs[:40])
	d.waitReport("cap-torque", 40, 10*time.Second)
	nc.Close()
	if err := d.stop(); err != nil {
		t.Fatalf("stop: %v", err)
	}
	if _, err := filepath.Glob(filepath.Join(dir, "state-jetstream", "*")); err != nil {
		t.Fatal(err)
	}

	d = startDaemon(t, args...)
	nc = connectNATS(t, d.info.NATS)
	publishJS(t, nc, msgs[40:])
	rep := d.waitReport("cap-torque", int64(len(msgs)), 10*time.Second)
	if rep.total() != int64(len(msgs)) {
		t.Errorf("counted %d values; want %d", rep.total(), len(msgs))
	}
	if err := d.stop(); err != nil {
		t.Fatalf("stop: %v", err)
	}
	st, err := store.OpenReadOnly(filepath.Join(dir, "state.db"), store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	n := 0
	if err := st.Raw("cap-torque", time.Time{}, time.Time{}, func(store.RawValue) error { n++; return nil }); err != nil {
		t.Fatal(err)
	}
	if n != len(msgs) {
		t.Errorf("store holds %d raw values; want %d", n, len(msgs))
	}

}

// TestRunStreamMadeAnew: a store whose cursor lies beyond the end of the
// stream (deleted and made anew) is refused, rather than skipping every
// message up to the old cursor.
func TestRunStreamMadeAnew(t *testing.T) {
	dir := t.TempDir()
	ns := startNATS(t)
	msgs, _ := plantValues("cap-torque", []string{"H1", "H2"}, 10, 250, []int{0, 5})
	publishJS(t, connectNATS(t, ns.url), msgs)
	d := startDaemon(t, daemonArgs(ns.url, dir)...)
	d.waitMetric("lockstep_cursor_sequence", float64(len(msgs)), 10*time.Second)
	if err := d.stop(); err != nil {
		t.Fatal(err)
	}

	fresh := startNATS(t)
	publishJS(t, connectNATS(t, fresh.url), msgs[:3])
	cmd := &RunCommand{Stdout: io.Discard, Stderr: io.Discard, Getenv: func(string) string { return "" }}
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	err := cmd.Run(ctx, daemonArgs(fresh.url, dir))
	if err == nil || !strings.Contains(err.Error(), "made anew") || !strings.Contains(err.Error(), "applied messages up to 20") {
		t.Errorf("run against a new stream: %v", err)
	}
}

// TestRunMissingStream: against a server without the stream and without
// --create-stream, run fails with ErrStreamNotFound instead of panicking
// on the half-made source.
func TestRunMissingStream(t *testing.T) {
	ns := startE2ENATS(t, "")
	cmd := &RunCommand{Stdout: io.Discard, Stderr: io.Discard, Getenv: func(string) string { return "" }}
	err := cmd.Run(context.Background(), []string{"--nats", ns.url(), "--stream", "NOPE",
		"--store", filepath.Join(t.TempDir(), "l.db"), "--http", "127.0.0.1:0"})
	if !errors.Is(err, ingest.ErrStreamNotFound) {
		t.Fatalf("Run with a missing stream: %v, want ingest.ErrStreamNotFound", err)
	}
}
