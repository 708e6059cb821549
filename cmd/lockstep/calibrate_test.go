package main

import (
	"encoding/json"
	"errors"
	"math"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/alert"
	"github.com/lockstep-project/lockstep/stats"
	"github.com/lockstep-project/lockstep/store"
)

// quickCalib is a calibration small enough for a unit test.
var quickCalib = []string{"calibrate", "--days", "1", "--runs", "4", "--drift-runs", "2", "--horizon", "1h",
	"--drift-over", "1h", "--alphas", "1e-4", "--confirms", "1,2", "--workers", "2"}

func TestCalibrateTableAndJSON(t *testing.T) {
	code, out, errOut := runCmd(t, quickCalib...)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	for _, want := range []string{"alpha", "false/30d", "1 SD med", "per-group Shewhart chart", "per-group CUSUM on its own target", "drift"} {
		if !strings.Contains(out, want) {
			t.Errorf("table lacks %q:\n%s", want, out)
		}
	}
	if errOut != "" {
		t.Errorf("progress written to a non-terminal: %q", errOut)
	}
	code, js, errOut := runCmd(t, append(quickCalib, "--json", "--seed", "5")...)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	var got calibJSON
	if err := json.Unmarshal([]byte(js), &got); err != nil {
		t.Fatalf("JSON: %v\n%s", err, js)
	}
	if len(got.Grid) != 2 || len(got.Baselines) != 2 || got.Seed != 5 || len(got.Grid[0].Shifts) != 3 {
		t.Errorf("JSON holds %d grid points, %d baselines, seed %d, %d shifts; want 2, 2, 5, 3", len(got.Grid), len(got.Baselines), got.Seed, len(got.Grid[0].Shifts))
	}
	if got.Grid[0].Evaluations != 1440 {
		t.Errorf("%d in-control evaluations, want 1440 (one day)", got.Grid[0].Evaluations)
	}
	_, js2, _ := runCmd(t, append(quickCalib, "--json", "--seed", "5", "--workers", "1")...)
	if js2 != js {
		t.Error("the same seed gave different JSON with 1 worker and 2")
	}
}

func TestCalibrateUsageErrors(t *testing.T) {
	tests := []struct {
		args []string
		want string
	}{
		{[]string{"--alphas", "x"}, `--alphas: "x" is not a number`},
		{[]string{"--alphas", "2"}, "alphas: 2 is not between 0 and 1"},
		{[]string{"--confirms", "1.5"}, `--confirms: "1.5" is not a whole number`},
		{[]string{"--rates", "1"}, "need at least 2"},
		{[]string{"--max-false", "1"}, "not of the form N/PERIOD"},
		{[]string{"--max-false", "1/xd"}, "not a number of days"},
		{[]string{"--windows", "5m"}, "not of the form VALUE:SHARE"},
		{[]string{"--windows", "5x:0.1"}, "not a duration"},
		{[]string{"--cusums", "a:0.5"}, `k "a" is not a number`},
		{[]string{"--cusums", "0.5:0.9,0.3:0.9"}, "shares sum to"},
		{[]string{"--test", "anova"}, "not one of auto, classic, welch"},
		{[]string{"--store", "x.db"}, "--store needs --characteristic"},
		{[]string{"--store", "x.db", "--characteristic", "c", "--sd", "2"}, "leave out --rates and --sd"},
		{[]string{"--characteristic", "c"}, "--characteristic needs --store"},
		{[]string{"--practical", "-1"}, "--practical -1 is not positive"},
		{[]string{"--workers", "0"}, "--workers 0"},
		{[]string{"extra"}, `unexpected argument "extra"`},
	}
	for _, tt := range tests {
		t.Run(strings.Join(tt.args, " "), func(t *testing.T) {
			code, _, errOut := runCmd(t, append([]string{"calibrate"}, tt.args...)...)
			if code != 2 {
				t.Errorf("exit %d, want 2 (%s)", code, errOut)
			}
			if !strings.Contains(errOut, tt.want) {
				t.Errorf("stderr %q does not say %q", errOut, tt.want)
			}
		})
	}
}

func TestParseRate(t *testing.T) {
	day := float64(24 * time.Hour)
	for _, tt := range []struct {
		s    string
		want float64
	}{{"1/30d", 1 / (30 * day)}, {"2/8h", 2 / float64(8*time.Hour)}, {"1/d", 1 / day}, {"3/h", 3 / float64(time.Hour)}} {
		got, err := parseRate(tt.s)
		if err != nil || math.Abs(got-tt.want) > 1e-12*tt.want {
			t.Errorf("parseRate(%q) = %v, %v; want %v", tt.s, got, err, tt.want)
		}
	}
	for _, s := range []string{"0/30d", "-1/8h", "1/0d", "1/-5h", "x/1h"} {
		if _, err := parseRate(s); err == nil {
			t.Errorf("parseRate(%q) gave no error", s)
		}
	}
}

func TestCalibrateFromStore(t *testing.T) {
	path := filepath.Join(t.TempDir(), "lockstep.db")
	st, err := store.Open(path, store.Options{NoSync: true})
	if err != nil {
		t.Fatal(err)
	}
	d, err := stats.ParseDecimal("500")
	if err != nil {
		t.Fatal(err)
	}
	b := &store.Batch{Characteristics: []store.Characteristic{{Name: "fill-weight", Unit: "g", Reference: d}}}
	start := time.Date(2026, 12, 1, 6, 0, 0, 0, time.UTC)
	// Two groups over ten minutes: L1 at 60 values a minute, L2 at 30;
	// every bucket with variance 4 (SD 2).
	for m := range 10 {
		for g, n := range map[string]int64{"L1": 60, "L2": 30} {
			b.Buckets = append(b.Buckets, store.BucketState{Characteristic: "fill-weight", Group: g,
				Start: start.Add(time.Duration(m) * time.Minute), Acc: stats.Accumulator{N: n, Mean: 0.1, M2: 4 * float64(n-1)}})
		}
	}
	if err := st.Commit(b); err != nil {
		t.Fatal(err)
	}
	_, _, err = streamFromStore(path, "fill-weight", 24*time.Hour, time.Minute)
	if !errors.Is(err, store.ErrInUse) {
		t.Errorf("with the store held open: %v, want ErrInUse", err)
	} else if !strings.Contains(err.Error(), "calibrate from a backup") {
		t.Errorf("error %q does not say how to go on", err)
	}
	if err := st.Close(); err != nil {
		t.Fatal(err)
	}
	rates, sd, err := streamFromStore(path, "fill-weight", 24*time.Hour, time.Minute)
	if err != nil {
		t.Fatal(err)
	}
	if len(rates) != 2 || math.Abs(rates[0]-1) > 1e-12 || math.Abs(rates[1]-0.5) > 1e-12 || math.Abs(sd-2) > 1e-12 {
		t.Errorf("rates %v, SD %v; want [1 0.5] and 2", rates, sd)
	}
	if _, _, err := streamFromStore(path, "seal-temp", 24*time.Hour, time.Minute); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("unknown characteristic: %v, want ErrNotFound", err)
	}
	code, out, errOut := runCmd(t, append(quickCalib, "--store", path, "--characteristic", "fill-weight")...)
	if code != 0 || !strings.Contains(out, "2 groups at 1,0.5 values/s, SD 2") {
		t.Errorf("exit %d, stderr %q, output:\n%s", code, errOut, out)
	}
}

// TestCalibrateUsageDefaults: the defaults the help text gives for
// --windows and --cusums are the default rule's, so the help cannot fall
// behind a change of alert.DefaultRule.
func TestCalibrateUsageDefaults(t *testing.T) {
	usage := (&CalibrateCommand{}).Usage()
	def := alert.DefaultRule()
	shown := func(flag string) string {
		for line := range strings.SplitSeq(usage, "\n") {
			if strings.HasPrefix(strings.TrimSpace(line), flag+" ") {
				_, rest, ok := strings.Cut(line, "(default ")
				if v, _, ok2 := strings.Cut(rest, ")"); ok && ok2 {
					return v
				}
			}
		}
		t.Fatalf("no default for %s in the help", flag)
		return ""
	}
	ws, err := parseWindows(shown("--windows"))
	if err != nil || !slices.Equal(ws, def.Windows) {
		t.Errorf("help's --windows default %v (%v), the rule's %v", ws, err, def.Windows)
	}
	cs, err := parseCUSUMs(shown("--cusums"))
	if err != nil || !slices.Equal(cs, def.CUSUMs) {
		t.Errorf("help's --cusums default %v (%v), the rule's %v", cs, err, def.CUSUMs)
	}
}
