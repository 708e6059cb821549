package main

import (
	"encoding/csv"
	"math"
	"os"
	"slices"
	"strconv"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/stats"
	"github.com/lockstep-project/lockstep/window"
)

// TestQuantile7R compares quantile7 with R's quantile(x, p, type = 7):
// testdata/reference/quantile7.csv, written by
// testdata/reference/quantile7.R (R 4.2.2) from
// testdata/scenarios/fill_weight.csv.
func TestQuantile7R(t *testing.T) {
	data := map[string][]float64{}
	for _, row := range readCSV(t, "../../testdata/scenarios/fill_weight.csv")[1:] {
		v, err := strconv.ParseFloat(row[1], 64)
		if err != nil {
			t.Fatal(err)
		}
		data[row[0]] = append(data[row[0]], v)
	}
	l1 := data["L1"]
	data["n1"], data["n2"], data["n5"] = l1[:1:1], l1[:2:2], l1[:5:5]
	rows := readCSV(t, "../../testdata/reference/quantile7.csv")[1:]
	if len(rows) < 30 {
		t.Fatalf("%d reference rows", len(rows))
	}
	for _, row := range rows {
		x := slices.Clone(data[row[0]])
		if len(x) == 0 {
			t.Fatalf("no data for %q", row[0])
		}
		slices.Sort(x)
		p, _ := strconv.ParseFloat(row[1], 64)
		want, _ := strconv.ParseFloat(row[2], 64)
		got := quantile7(x, p)
		if math.Abs(got-want) > 1e-12*math.Abs(want) {
			t.Errorf("%s p=%g: got %.17g, R %.17g", row[0], p, got, want)
		}
	}
	if !math.IsNaN(quantile7(nil, 0.5)) || !math.IsNaN(quantile7([]float64{1}, 1.5)) {
		t.Error("no values or p outside [0, 1] must give NaN")
	}
}

func readCSV(t *testing.T, path string) [][]string {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	return rows
}

// TestLiveQuantiles: the live report's boxes are the quantiles of the
// values the window keeps, in the data's units, for the analysed groups
// only; a window that keeps every value gives the quantiles of all of
// them.
func TestLiveQuantiles(t *testing.T) {
	ref := stats.NewReference(mustDecimal(t, "500.00"))
	t0 := time.Date(2026, 3, 1, 8, 0, 0, 0, time.UTC)
	for _, cfg := range []window.Config{
		{Bucket: time.Minute, Length: 10 * time.Minute, SilentAfter: 3 * time.Minute}, // time-based, sample 64 > values per bucket
		{Count: 50, SilentAfter: 3 * time.Minute},
	} {
		w, err := window.New(cfg)
		if err != nil {
			t.Fatal(err)
		}
		all := map[string][]float64{}
		for i := range 40 { // L1, L2 over 4 minutes; each value x is stored centred, x − 500
			for _, g := range []string{"L1", "L2"} {
				x := 500 + float64((i*7)%11)/10
				if g == "L2" {
					x += 1
				}
				w.Add(w.Group(g), t0.Add(time.Duration(i)*6*time.Second), x-500)
				all[g] = append(all[g], x)
			}
		}
		w.Add(w.Group("L9"), t0, 0.5) // silent by the evaluation
		now := t0.Add(5 * time.Minute)
		ev := w.Evaluate(now, stats.DefaultOptions(), ref)
		q := groupQuantiles(keptValues(w, ev, ref))
		if len(q) != 2 || q[0].Name != "L1" || q[1].Name != "L2" {
			t.Fatalf("count %d: quantiles %+v, want L1 and L2 only", cfg.Count, q)
		}
		for _, g := range q {
			x := all[g.Name]
			slices.Sort(x)
			if g.Kept != 40 || g.N != 40 {
				t.Errorf("count %d %s: kept %d of %d, want 40 of 40", cfg.Count, g.Name, g.Kept, g.N)
			}
			for _, c := range []struct {
				got *float64
				p   float64
			}{{g.Q1, 0.25}, {g.Median, 0.5}, {g.Q3, 0.75}} {
				if c.got == nil || math.Abs(*c.got-quantile7(x, c.p)) > 1e-9 {
					t.Errorf("count %d %s p=%g: got %v, want %g", cfg.Count, g.Name, c.p, c.got, quantile7(x, c.p))
				}
			}
		}
		// The same through buildLive, and evaluating again gives the same
		// report: reading the values changed nothing.
		lr, err := buildLive(liveInput{Name: "fill", Unit: "g", Evaluated: now, Eval: ev, Win: w, Ref: ref})
		if err != nil {
			t.Fatal(err)
		}
		again, err := buildLive(liveInput{Name: "fill", Unit: "g", Evaluated: now, Eval: w.Evaluate(now, stats.DefaultOptions(), ref), Win: w, Ref: ref})
		if err != nil {
			t.Fatal(err)
		}
		if string(lr.detail) != string(again.detail) {
			t.Errorf("count %d: a second evaluation differs", cfg.Count)
		}
	}
	if q := groupQuantiles(keptValues(nil, window.Evaluation{}, ref)); q == nil || len(q) != 0 {
		t.Errorf("no window: %v, want an empty array", q)
	}
}
