package main

import (
	"encoding/csv"
	"fmt"
	"strings"
	"testing"
	"time"
)

// TestExportCSV: the export holds every measurement of the stream, in
// time order, with its time, group, the value text exactly as sent and its
// id; --from and --to cut the range half-open.
func TestExportCSV(t *testing.T) {
	path := replayFixture(t)
	code, out, errOut := runCmd(t, "export", "--store", path, "--characteristic", "fill", "--csv")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	recs, err := csv.NewReader(strings.NewReader(out)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	sent := replayStream(50 * time.Minute)
	// recordLive sends the values stamped before its last tick, 50 min.
	if len(recs) != len(sent)+1 {
		t.Fatalf("%d records, want a header and %d values", len(recs), len(sent))
	}
	if strings.Join(recs[0], ",") != "time,group,value,id" {
		t.Errorf("header %q", recs[0])
	}
	for i, m := range sent {
		want := []string{m.at.Format(time.RFC3339Nano), m.group, m.text, fmt.Sprintf("%s-%d", m.group, i)}
		if strings.Join(recs[i+1], ",") != strings.Join(want, ",") {
			t.Fatalf("record %d: %q, want %q", i+1, recs[i+1], want)
		}
	}
	code, out, _ = runCmd(t, "export", "--store", path, "--characteristic", "fill",
		"--from", "2026-12-01T06:10:00Z", "--to", "2026-12-01T06:11:00Z")
	n := strings.Count(out, "\n") - 1
	want := 0
	for _, m := range sent {
		if !m.at.Before(replayT0.Add(10*time.Minute)) && m.at.Before(replayT0.Add(11*time.Minute)) {
			want++
		}
	}
	if code != 0 || n != want {
		t.Errorf("one minute: exit %d, %d values, want %d", code, n, want)
	}
	code, _, errOut = runCmd(t, "export", "--store", path, "--characteristic", "torque")
	if code != 1 || !strings.Contains(errOut, `"torque"; the store holds fill`) {
		t.Errorf("unknown characteristic: exit %d, %q", code, errOut)
	}
	code, _, errOut = runCmd(t, "export", "--store", path, "--characteristic", "fill", "--from", "2026-12-01T07:00:00Z", "--to", "2026-12-01T06:00:00Z")
	if code != 1 || !strings.Contains(errOut, "is not before --to") {
		t.Errorf("reversed range: exit %d, %q", code, errOut)
	}
}
