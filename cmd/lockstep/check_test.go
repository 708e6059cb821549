package main

import (
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// runCheck runs "lockstep check args..." in-process and returns the exit
// status, standard output and standard error.
func runCheck(t *testing.T, stdin string, args ...string) (int, string, string) {
	t.Helper()
	var out, errb bytes.Buffer
	code := run(context.Background(), append([]string{"check"}, args...), strings.NewReader(stdin), &out, &errb)
	return code, out.String(), errb.String()
}

// lre is the log relative error of got against the certified value want,
// capped at the 15 certified digits (McCullough 1998).
func lre(got, want float64) float64 {
	if got == want {
		return 15
	}
	if want == 0 {
		return -math.Log10(math.Abs(got))
	}
	return math.Min(15, -math.Log10(math.Abs(got-want)/math.Abs(want)))
}

// TestCheckNIST reads each NIST StRD one-way ANOVA set as CSV text through
// "lockstep check --json" and compares the report with the certified values
// (testdata/nist/certified.csv, NIST StRD). The project requires LRE ≥ 14
// for every certified quantity on all eleven sets.
func TestCheckNIST(t *testing.T) {
	f, err := os.Open("../../testdata/nist/certified.csv")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	header := rows[0]
	for _, row := range rows[1:] {
		cert := map[string]float64{}
		for i, h := range header[1:] {
			v, err := strconv.ParseFloat(row[i+1], 64)
			if err != nil {
				t.Fatalf("certified.csv %s %s: %v", row[0], h, err)
			}
			cert[h] = v
		}
		name := row[0]
		t.Run(name, func(t *testing.T) {
			code, out, stderr := runCheck(t, "", "--json", filepath.Join("../../testdata/nist", name+".csv"))
			if code != 0 {
				t.Fatalf("exit %d: %s", code, stderr)
			}
			var rep struct {
				Anova map[string]*float64 `json:"anova"`
			}
			if err := json.Unmarshal([]byte(out), &rep); err != nil {
				t.Fatal(err)
			}
			for _, q := range []string{"df_between", "df_within", "ss_between", "ss_within", "ms_between", "ms_within", "f", "r2", "residual_sd"} {
				field := q
				got := rep.Anova[field]
				if got == nil {
					t.Errorf("%s: null in report", q)
					continue
				}
				if l := lre(*got, cert[q]); l < 14 {
					t.Errorf("%s = %.17g, certified %.15g: LRE %.1f < 14", q, *got, cert[q], l)
				} else {
					t.Logf("%s LRE %.1f", q, l)
				}
			}
		})
	}
}

// reference values computed by R (testdata/reference/make.R) for the
// invented scenarios in testdata/scenarios.
type rValues map[string]float64

func readR(t *testing.T) rValues {
	t.Helper()
	f, err := os.Open("../../testdata/reference/oneway.csv")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	v := rValues{}
	for _, r := range rows[1:] {
		if r[4] == "NA" {
			continue // R gives NA where the value is not defined
		}
		x, err := strconv.ParseFloat(r[4], 64)
		if err != nil {
			t.Fatalf("oneway.csv %v: %v", r, err)
		}
		v[strings.Join(r[:4], "|")] = x
	}
	return v
}

func (v rValues) get(t *testing.T, scenario, quantity, a, b string) float64 {
	t.Helper()
	x, ok := v[strings.Join([]string{scenario, quantity, a, b}, "|")]
	if !ok {
		t.Fatalf("no R reference for %s %s %s %s", scenario, quantity, a, b)
	}
	return x
}

func near(t *testing.T, what string, got *float64, want, rel float64) {
	t.Helper()
	if got == nil {
		t.Errorf("%s: null, want %.10g", what, want)
		return
	}
	if d := math.Abs(*got - want); d > rel*math.Abs(want) {
		t.Errorf("%s = %.15g, R %.15g (relative error %.2g > %.0e)", what, *got, want, d/math.Abs(want), rel)
	}
}

// TestCheckJSONAgainstR checks that the JSON report carries the figures R
// computes (testdata/reference/make.R) under the documented field names,
// with pairs in group order and diff = mean(b) − mean(a).
func TestCheckJSONAgainstR(t *testing.T) {
	ref := readR(t)
	for _, sc := range []string{"fill_weight", "seal_temperature", "cap_torque", "wall_thickness"} {
		t.Run(sc, func(t *testing.T) {
			code, out, stderr := runCheck(t, "", "--json", "../../testdata/scenarios/"+sc+".csv")
			if code != 0 {
				t.Fatalf("exit %d: %s", code, stderr)
			}
			var rep jsonReport
			if err := json.Unmarshal([]byte(out), &rep); err != nil {
				t.Fatal(err)
			}
			// Relative tolerance 1e-9: both sides compute the same formulas
			// in double precision; p-values from the studentized range are
			// compared more loosely (R's ptukey is itself accurate to about
			// 1e-8 at best).
			const rel = 1e-9
			near(t, "anova.f", rep.Anova.F, ref.get(t, sc, "f", "", ""), rel)
			near(t, "anova.p", rep.Anova.P, ref.get(t, sc, "p", "", ""), rel)
			near(t, "anova.adj_r2", rep.Anova.AdjR2, ref.get(t, sc, "adj_r2", "", ""), rel)
			near(t, "welch.p", rep.Welch.P, ref.get(t, sc, "welch_p", "", ""), 1e-8)
			near(t, "kruskal_wallis.h", rep.KruskalWallis.H, ref.get(t, sc, "kruskal_wallis_h", "", ""), rel)
			for _, g := range rep.Groups {
				near(t, "mean "+g.Name, g.Mean, ref.get(t, sc, "mean", g.Name, ""), 1e-12)
				near(t, "sd "+g.Name, g.SD, ref.get(t, sc, "sd", g.Name, ""), rel)
			}
			if len(rep.Pairs) != len(rep.Groups)*(len(rep.Groups)-1)/2 {
				t.Fatalf("%d pairs for %d groups", len(rep.Pairs), len(rep.Groups))
			}
			for _, p := range rep.Pairs {
				w := p.A + "-" + p.B
				// Differences of means can be exactly 0 in R and a rounding
				// step of the 182 °C level here: absolute 1e-12 (data in 0.1).
				if want := ref.get(t, sc, "tukey_diff", p.A, p.B); math.Abs(*p.Diff-want) > 1e-12 {
					t.Errorf("diff %s = %.15g, R %.15g", w, *p.Diff, want)
				}
				near(t, "tukey.lwr "+w, p.Tukey.Lwr, ref.get(t, sc, "tukey_lwr", p.A, p.B), 1e-6)
				near(t, "tukey.upr "+w, p.Tukey.Upr, ref.get(t, sc, "tukey_upr", p.A, p.B), 1e-6)
				if want := ref.get(t, sc, "tukey_p", p.A, p.B); math.Abs(*p.Tukey.P-want) > 1e-6 {
					t.Errorf("tukey.p %s = %.10g, R %.10g", w, *p.Tukey.P, want)
				}
				if want := ref.get(t, sc, "games_howell_p", p.A, p.B); math.Abs(*p.GamesHowell.P-want) > 1e-6 {
					t.Errorf("games_howell.p %s = %.10g, R %.10g", w, *p.GamesHowell.P, want)
				}
			}
		})
	}
}

// TestCheckText checks the human report of the fill-weight scenario, whose
// line L3 was generated about 1.2 g high: the verdict names it, the sections
// are there, and numbers are aligned in columns.
func TestCheckText(t *testing.T) {
	code, out, stderr := runCheck(t, "", "--unit", "g", "../../testdata/scenarios/fill_weight.csv")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	for _, want := range []string{"VERDICT  Means differ", "L3 is high by", "One-way analysis of variance", "Between", "Within", "Total",
		"Welch", "Brown–Forsythe", "Kruskal–Wallis", "Tukey–Kramer", "Analysis of means", "Minimum detectable shift", "advisory"} {
		if !strings.Contains(out, want) {
			t.Errorf("text report lacks %q:\n%s", want, out)
		}
	}
	if strings.Contains(out, "NaN") || strings.Contains(out, "Inf") {
		t.Errorf("text report prints a non-number:\n%s", out)
	}
}

// TestCheckBadInput checks that bad input gets one clear line naming what
// and where, a non-zero exit, and nothing on standard output.
func TestCheckBadInput(t *testing.T) {
	cases := []struct {
		name, data string
		args       []string
		code       int
		want       []string
	}{
		{"not a number", "line,fill_g\nL1,500.1\nL2,abc\n", nil, 1, []string{"line 3", "fill_g", `"abc"`}},
		{"NaN", "line,fill_g\nL1,500.1\nL2,NaN\n", nil, 1, []string{"line 3", "finite"}},
		{"infinity", "line,fill_g\nL1,500.1\nL2,-Inf\n", nil, 1, []string{"line 3", "finite"}},
		{"missing column", "line,fill_g\nL1,500.1\nL2,500.2\n", []string{"--value", "torque"}, 1, []string{`"torque"`}},
		{"empty file", "", nil, 1, []string{"empty"}},
		{"one group", "line,fill_g\nL1,500.1\nL1,500.2\n", nil, 1, []string{"two groups", `"L1"`}},
		{"bad alpha", "line,fill_g\nL1,500.1\n", []string{"--alpha", "5"}, 2, []string{"--alpha"}},
		{"two files", "", []string{"a.csv"}, 2, []string{"one FILE"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			args := append(append([]string{}, c.args...), "-")
			code, out, stderr := runCheck(t, c.data, args...)
			if code != c.code {
				t.Errorf("exit %d, want %d (stderr %q)", code, c.code, stderr)
			}
			if out != "" {
				t.Errorf("printed on standard output despite the error:\n%s", out)
			}
			first := strings.SplitN(stderr, "\n", 2)[0]
			for _, w := range c.want {
				if !strings.Contains(first, w) {
					t.Errorf("error %q does not mention %q", first, w)
				}
			}
		})
	}
}

// TestCheckHelp checks that --help explains the options and exits 0.
func TestCheckHelp(t *testing.T) {
	code, out, _ := runCheck(t, "", "--help")
	if code != 0 || !strings.Contains(out, "--confidence") || !strings.Contains(out, "--json") {
		t.Errorf("exit %d, help:\n%s", code, out)
	}
}
