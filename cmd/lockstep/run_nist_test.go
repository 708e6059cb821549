package main

import (
	"encoding/csv"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"
)

// TestRunNIST publishes each of the eleven NIST StRD one-way ANOVA sets
// (testdata/nist, certified values in certified.csv) through JetStream as
// decimal JSON, {"value":"1000000000001.4"}, into a characteristic of its
// own, and compares the window report served by the HTTP API with the
// certified values: LRE ≥ 14 on every certified quantity, as through
// lockstep check (TestCheckNIST).
func TestRunNIST(t *testing.T) {
	if testing.Short() {
		t.Skip("publishes 60 000 messages")
	}
	cert := readCertified(t)
	ns := startNATS(t)
	nc := connectNATS(t, ns.url)
	var msgs []message
	rows := map[string]int64{}
	for _, set := range cert.order {
		f, err := os.Open(filepath.Join("../../testdata/nist", set+".csv"))
		if err != nil {
			t.Fatal(err)
		}
		recs, err := csv.NewReader(f).ReadAll()
		f.Close()
		if err != nil {
			t.Fatal(err)
		}
		char := "nist-" + strings.ToLower(set)
		for _, r := range recs[1:] {
			msgs = append(msgs, message{subject: "meas." + char + "." + r[0], data: `{"value":"` + r[1] + `"}`})
		}
		rows[char] = int64(len(recs) - 1)
	}
	publishJS(t, nc, msgs)

	dir := t.TempDir()
	cfg := writeConfig(t, dir, `
[store]
no_sync = true
commit_values = 5000

[defaults]
window = "2h"
bucket = "10m"
silent_after = "1h"
`)
	d := startDaemon(t, daemonArgs(ns.url, dir, "--config", cfg)...)
	for _, set := range cert.order {
		char := "nist-" + strings.ToLower(set)
		t.Run(set, func(t *testing.T) {
			rep := d.waitReport(char, rows[char], 30*time.Second)
			worst := 15.0
			defer func() { t.Logf("lowest LRE %.1f", worst) }()
			for _, q := range []string{"df_between", "df_within", "ss_between", "ss_within", "ms_between", "ms_within", "f", "r2", "residual_sd"} {
				got := rep.Anova[q]
				if got == nil {
					t.Errorf("%s: null in report", q)
					continue
				}
				l := lre(*got, cert.values[set][q])
				worst = min(worst, l)
				if l < 14 {
					t.Errorf("%s = %.17g; certified %.15g; LRE %.1f < 14", q, *got, cert.values[set][q], l)
				}
			}
		})
	}
}

// certified holds testdata/nist/certified.csv.
type certified struct {
	order  []string
	values map[string]map[string]float64
}

func readCertified(t *testing.T) certified {
	t.Helper()
	f, err := os.Open("../../testdata/nist/certified.csv")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	c := certified{values: map[string]map[string]float64{}}
	for _, row := range rows[1:] {
		m := map[string]float64{}
		for i, h := range rows[0][1:] {
			v, err := strconv.ParseFloat(row[i+1], 64)
			if err != nil {
				t.Fatalf("certified.csv %s %s: %v", row[0], h, err)
			}
			m[h] = v
		}
		c.order = append(c.order, row[0])
		c.values[row[0]] = m
	}
	return c
}
