package main

import (
	"encoding/json"
	"io"
	"net/http"
	"net/http/httptest"
	"slices"
	"strings"
	"sync/atomic"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"github.com/lockstep-project/lockstep/ingest"
	"github.com/lockstep-project/lockstep/stats"
)

// testAPI serves a book with one evaluated characteristic, fill-weight.
func testAPI(t *testing.T) (*httptest.Server, *atomic.Bool, *metrics) {
	t.Helper()
	lr := testLive(t)
	book := newReportBook()
	book.put(lr)
	met := newMetrics()
	var counters ingest.Counters
	counters.Add(ingest.ReasonNone)
	counters.Add(ingest.ReasonNotFinite)
	met.watch(&counters, &fakeSource{dropped: 3}, nil)
	met.late.Add(2)
	var ready atomic.Bool
	srv := httptest.NewServer(newAPIHandler(apiState{book: book, reg: met.reg, ready: ready.Load, log: zerolog.Nop()}))
	t.Cleanup(srv.Close)
	return srv, &ready, met
}

func httpGet(t *testing.T, url string) (int, string, string) {
	t.Helper()
	resp, err := http.Get(url)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	if err != nil {
		t.Fatal(err)
	}
	return resp.StatusCode, resp.Header.Get("Content-Type"), string(b)
}

func TestAPICharacteristic(t *testing.T) {
	srv, _, _ := testAPI(t)
	status, ctype, body := httpGet(t, srv.URL+"/api/v1/characteristics/fill-weight")
	if status != http.StatusOK || ctype != "application/json" {
		t.Fatalf("status %d, %s: %s", status, ctype, body)
	}
	var got map[string]json.RawMessage
	if err := json.Unmarshal([]byte(body), &got); err != nil {
		t.Fatal(err)
	}
	// Every field of lockstep check --json, under the same name.
	check, err := json.Marshal(toJSON(stats.Analyse(stats.Reference{}, nil, stats.DefaultOptions()), checkInfo{Unit: "g"}))
	if err != nil {
		t.Fatal(err)
	}
	var checkFields map[string]json.RawMessage
	if err := json.Unmarshal(check, &checkFields); err != nil {
		t.Fatal(err)
	}
	for k := range checkFields {
		if _, ok := got[k]; !ok {
			t.Errorf("field %q of check --json is missing", k)
		}
	}
	for _, k := range []string{"characteristic", "evaluated", "window", "counts", "silent", "incomplete"} {
		if _, ok := got[k]; !ok {
			t.Errorf("field %q is missing", k)
		}
	}
	var rep liveReportJSON
	if err := json.Unmarshal([]byte(body), &rep); err != nil {
		t.Fatal(err)
	}
	if rep.Characteristic != "fill-weight" || rep.Reference != "500" || rep.Rows != 30 || len(rep.Groups) != 3 || rep.Anova["f"] == nil {
		t.Errorf("report %+v", rep)
	}
	if rep.Window.Buckets != 1 || rep.Window.To.Sub(rep.Window.From) != 30*time.Minute || len(rep.Counts) != 3 || rep.Counts[0].N != 10 {
		t.Errorf("window %+v, counts %+v", rep.Window, rep.Counts)
	}
}

func TestAPIList(t *testing.T) {
	srv, _, _ := testAPI(t)
	status, _, body := httpGet(t, srv.URL+"/api/v1/characteristics")
	if status != http.StatusOK {
		t.Fatalf("status %d: %s", status, body)
	}
	var list struct {
		Characteristics []jsonSummary `json:"characteristics"`
	}
	if err := json.Unmarshal([]byte(body), &list); err != nil {
		t.Fatal(err)
	}
	if len(list.Characteristics) != 1 {
		t.Fatalf("list %s", body)
	}
	s := list.Characteristics[0]
	if s.Name != "fill-weight" || s.Unit != "g" || len(s.Groups) != 3 || s.F == nil || s.P == nil || s.Verdict == "" || s.Evaluated.IsZero() {
		t.Errorf("summary %+v", s)
	}
}

func TestAPINotFound(t *testing.T) {
	srv, _, _ := testAPI(t)
	for _, path := range []string{"/api/v1/characteristics/no-such", "/api/v1/characteristics/", "/nothing"} {
		status, ctype, body := httpGet(t, srv.URL+path)
		var e struct {
			Error string `json:"error"`
		}
		if status != http.StatusNotFound || ctype != "application/json" || json.Unmarshal([]byte(body), &e) != nil || e.Error == "" {
			t.Errorf("GET %s: %d %s %s; want 404 with a JSON error", path, status, ctype, body)
		}
	}
	resp, err := http.Post(srv.URL+"/api/v1/characteristics", "application/json", strings.NewReader("{}"))
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.StatusCode < 400 {
		t.Errorf("POST: status %d", resp.StatusCode)
	}
}

func TestAPIHealth(t *testing.T) {
	srv, ready, _ := testAPI(t)
	if status, _, _ := httpGet(t, srv.URL+"/healthz"); status != http.StatusOK {
		t.Errorf("/healthz: %d", status)
	}
	if status, _, _ := httpGet(t, srv.URL+"/readyz"); status != http.StatusServiceUnavailable {
		t.Errorf("/readyz before ready: %d", status)
	}
	ready.Store(true)
	if status, _, _ := httpGet(t, srv.URL+"/readyz"); status != http.StatusOK {
		t.Errorf("/readyz when ready: %d", status)
	}
}

func TestAPIMetrics(t *testing.T) {
	srv, _, met := testAPI(t)
	met.commitValues.Observe(1000)
	met.commitSeconds.Observe(0.002)
	met.evalSeconds.Observe(0.0001)
	status, ctype, body := httpGet(t, srv.URL+"/metrics")
	if status != http.StatusOK || !strings.HasPrefix(ctype, "text/plain") {
		t.Fatalf("status %d, %s", status, ctype)
	}
	lines := strings.Split(body, "\n")
	for _, want := range []string{
		`lockstep_measurements_total{result="accepted"} 1`,
		`lockstep_measurements_total{result="rejected"} 1`,
		`lockstep_rejects_total{reason="not_finite"} 1`,
		`lockstep_rejects_total{reason="duplicate_id"} 0`,
		`lockstep_window_values_total{result="late"} 2`,
		`lockstep_dropped_messages_total 3`,
		`lockstep_commit_values_count 1`,
		`lockstep_commit_duration_seconds_count 1`,
		`lockstep_evaluation_duration_seconds_count 1`,
		`lockstep_messages_total{result="skipped"} 0`,
		`lockstep_cursor_sequence 0`,
	} {
		if !slices.Contains(lines, want) {
			t.Errorf("/metrics lacks %q", want)
		}
	}
	for r := range ingest.Reasons() {
		if !strings.Contains(body, `lockstep_rejects_total{reason="`+r.String()+`"}`) {
			t.Errorf("/metrics lacks the reason %s", r)
		}
	}
	if !strings.Contains(body, "go_goroutines") {
		t.Error("/metrics lacks the Go collector")
	}
}
