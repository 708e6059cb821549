package main

import (
	"bytes"
	"encoding/json"
	"io"
	"net/http"
	"net/http/httptest"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/rs/zerolog"

	"github.com/lockstep-project/lockstep/alert"
	"github.com/lockstep-project/lockstep/store"
)

var alertT0 = time.Date(2026, 12, 1, 6, 0, 0, 0, time.UTC)

// testAlerting returns a runtime with, for characteristic fill-weight, one
// raised means alert, one silent group in watch and one cleared spread
// alert, made by its machine from conditions given here (the monitor is
// not involved).
func testAlerting(t *testing.T) (*alerting, map[string]alert.Alert) {
	t.Helper()
	cfg := DefaultConfig()
	a := newAlerting(cfg, zerolog.Nop(), prometheus.NewRegistry())
	a.now = func() time.Time { return alertT0.Add(time.Hour) }
	c, err := a.char("fill-weight", "g", nil)
	if err != nil {
		t.Fatal(err)
	}
	means := alert.Condition{Kind: alert.KindMeansDiverge, Phase: alert.PhaseRaise, Groups: []string{"L3"}, Direction: 1,
		Shift: 0.8, Lower: 0.5, Upper: 1.1, Test: "F", F: 30, P: 1e-9, Detector: "F 1m", Reason: "L3 is high"}
	spread := alert.Condition{Kind: alert.KindSpreadDiverge, Phase: alert.PhaseRaise, Groups: []string{"L1"}, Ratio: 1.6}
	silent := alert.Condition{Kind: alert.KindGroupSilent, Phase: alert.PhaseWatch, Key: "L2", Groups: []string{"L2"}}
	evs := c.mach.Step(alertT0, []alert.Condition{means, spread})
	spread.Phase = alert.PhaseClear
	evs = append(evs, c.mach.Step(alertT0.Add(time.Minute), []alert.Condition{means, spread, silent})...)
	a.mu.Lock()
	a.recordLocked(evs)
	a.mu.Unlock()
	byKind := map[string]alert.Alert{}
	for _, ev := range evs {
		byKind[ev.Alert.Kind.String()] = ev.Alert
	}
	return a, byKind
}

func alertServer(t *testing.T, a *alerting, token string, remote bool) *httptest.Server {
	t.Helper()
	met := newMetrics()
	srv := httptest.NewServer(newAPIHandler(apiState{book: newReportBook(), reg: met.reg, log: zerolog.Nop(),
		alerts: a, token: token, remote: remote}))
	t.Cleanup(srv.Close)
	return srv
}

func do(t *testing.T, method, url, token, body string) (int, map[string]any) {
	t.Helper()
	req, err := http.NewRequest(method, url, strings.NewReader(body))
	if err != nil {
		t.Fatal(err)
	}
	if token != "" {
		req.Header.Set("Authorization", "Bearer "+token)
	}
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	b, _ := io.ReadAll(resp.Body)
	var m map[string]any
	if err := json.Unmarshal(b, &m); err != nil {
		t.Fatalf("%s %s: body %q is not a JSON object: %v", method, url, b, err)
	}
	return resp.StatusCode, m
}

func TestAlertAPIList(t *testing.T) {
	a, by := testAlerting(t)
	srv := alertServer(t, a, "", false)
	code, m := do(t, "GET", srv.URL+"/api/v1/alerts", "", "")
	list, _ := m["alerts"].([]any)
	if code != 200 || len(list) != 2 {
		t.Fatalf("open alerts: %d, %v; want 200 and 2 (raised means, silent watch)", code, m)
	}
	code, m = do(t, "GET", srv.URL+"/api/v1/alerts?state=all", "", "")
	if list, _ := m["alerts"].([]any); code != 200 || len(list) != 3 {
		t.Fatalf("all alerts: %d, %v; want 3", code, m)
	}
	if code, _ := do(t, "GET", srv.URL+"/api/v1/alerts?state=bogus", "", ""); code != 400 {
		t.Errorf("state=bogus: %d, want 400", code)
	}
	code, m = do(t, "GET", srv.URL+"/api/v1/alerts/"+by["means-diverge"].ID, "", "")
	if code != 200 || m["state"] != "raised" || m["groups"].([]any)[0] != "L3" || m["unit"] != "g" {
		t.Errorf("one alert: %d %v", code, m)
	}
	code, m = do(t, "GET", srv.URL+"/api/v1/alerts/"+by["spread-diverge"].ID, "", "")
	if code != 200 || m["state"] != "cleared" {
		t.Errorf("a cleared alert: %d %v", code, m)
	}
	if code, m := do(t, "GET", srv.URL+"/api/v1/alerts/nope", "", ""); code != 404 || m["error"] == nil {
		t.Errorf("unknown id: %d %v, want 404 with an error", code, m)
	}
}

func TestAlertAPIAck(t *testing.T) {
	for _, tt := range []struct {
		name   string
		token  string // the daemon's
		remote bool
		send   string // the request's
		kind   string // alert acknowledged, or an id
		body   string
		want   int
		state  string
	}{
		{"loopback, no token configured", "", false, "", "means-diverge", `{"by":"Ana","note":"checked"}`, 200, "acknowledged"},
		{"token configured, none sent", "s3cret", false, "", "means-diverge", `{"by":"Ana"}`, 401, "raised"},
		{"token configured, wrong one", "s3cret", false, "nope", "means-diverge", `{"by":"Ana"}`, 403, "raised"},
		{"token configured, right one", "s3cret", false, "s3cret", "means-diverge", `{"by":"Ana"}`, 200, "acknowledged"},
		{"remote, right token", "s3cret", true, "s3cret", "means-diverge", `{"by":"Ana"}`, 200, "acknowledged"},
		{"unknown alert", "", false, "", "nope", `{"by":"Ana"}`, 404, ""},
		{"a watch cannot be acknowledged", "", false, "", "group-silent", `{"by":"Ana"}`, 409, "watch"},
		{"a cleared alert cannot be acknowledged", "", false, "", "spread-diverge", `{"by":"Ana"}`, 409, "cleared"},
		{"no by", "", false, "", "means-diverge", `{"note":"x"}`, 400, "raised"},
		{"not JSON", "", false, "", "means-diverge", `by=Ana`, 400, "raised"},
		{"unknown field", "", false, "", "means-diverge", `{"by":"Ana","who":"x"}`, 400, "raised"},
	} {
		t.Run(tt.name, func(t *testing.T) {
			a, by := testAlerting(t)
			srv := alertServer(t, a, tt.token, tt.remote)
			id := tt.kind
			if al, ok := by[tt.kind]; ok {
				id = al.ID
			}
			code, m := do(t, "POST", srv.URL+"/api/v1/alerts/"+id+"/ack", tt.send, tt.body)
			if code != tt.want {
				t.Fatalf("%d %v, want %d", code, m, tt.want)
			}
			if code != 200 && m["error"] == nil {
				t.Errorf("error answer without an error message: %v", m)
			}
			if code == 200 && (m["acknowledged_by"] != "Ana" || m["acknowledged"] != "2026-12-01T07:00:00Z") {
				t.Errorf("acknowledged alert %v", m)
			}
			if tt.state != "" {
				if got, _ := a.get(id); got.State.String() != tt.state {
					t.Errorf("state %s after, want %s", got.State, tt.state)
				}
			}
		})
	}
}

func TestAlertAPIRemoteNeedsToken(t *testing.T) {
	a, by := testAlerting(t)
	srv := alertServer(t, a, "s3cret", true)
	for _, path := range []string{"/api/v1/alerts", "/api/v1/alerts/" + by["means-diverge"].ID, "/api/v1/characteristics", "/metrics"} {
		req, _ := http.NewRequest("GET", srv.URL+path, nil)
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		if resp.StatusCode != 401 {
			t.Errorf("remote GET %s without token: %d, want 401", path, resp.StatusCode)
		}
		if code, _ := do(t, "GET", srv.URL+"/api/v1/alerts", "s3cret", ""); code != 200 {
			t.Errorf("remote GET with the token: %d", code)
		}
	}
	if code, _ := do(t, "GET", srv.URL+"/healthz", "", ""); code != 200 {
		t.Errorf("remote /healthz without token: %d, want 200 (probes stay open)", code)
	}
	// Remote without a configured token: refused at start, and the
	// handler refuses too.
	cfg := DefaultConfig()
	cfg.HTTP.Listen = "0.0.0.0:8420"
	if err := checkHTTPToken(cfg); err == nil || !strings.Contains(err.Error(), "LOCKSTEP_HTTP_TOKEN") {
		t.Errorf("checkHTTPToken without a token on 0.0.0.0: %v", err)
	}
	cfg.HTTP.Token = "x"
	if err := checkHTTPToken(cfg); err != nil {
		t.Errorf("with a token: %v", err)
	}
	open := alertServer(t, a, "", true)
	if code, _ := do(t, "GET", open.URL+"/api/v1/alerts", "", ""); code != 403 {
		t.Errorf("remote with no token configured: %d, want 403", code)
	}
}

// TestAlertAPIRemoteCookie: beyond loopback, the dashboard's page and
// assets load without the token, reads accept it from the cookie (a
// browser's event stream cannot send a header), and writes do not.
func TestAlertAPIRemoteCookie(t *testing.T) {
	a, by := testAlerting(t)
	srv := alertServer(t, a, "s3cret", true)
	get := func(path string, cookie string) int {
		t.Helper()
		req, _ := http.NewRequest("GET", srv.URL+path, nil)
		if cookie != "" {
			req.AddCookie(&http.Cookie{Name: tokenCookie, Value: cookie})
		}
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		return resp.StatusCode
	}
	for _, path := range []string{"/", "/assets/app.js", "/assets/style.css"} {
		if code := get(path, ""); code != 200 {
			t.Errorf("remote GET %s without token: %d, want 200 (no data in the page)", path, code)
		}
	}
	if code := get("/api/v1/alerts", "s3cret"); code != 200 {
		t.Errorf("remote GET with the token cookie: %d, want 200", code)
	}
	if code := get("/api/v1/alerts", "wrong"); code != 403 {
		t.Errorf("remote GET with a wrong token cookie: %d, want 403", code)
	}
	req, _ := http.NewRequest("POST", srv.URL+"/api/v1/alerts/"+by["means-diverge"].ID+"/ack", strings.NewReader(`{"by":"Ana"}`))
	req.AddCookie(&http.Cookie{Name: tokenCookie, Value: "s3cret"})
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.StatusCode != 401 {
		t.Errorf("remote POST ack with only the cookie: %d, want 401 (writes need the header)", resp.StatusCode)
	}
}

func TestAlertAPIHookAndPersistence(t *testing.T) {
	a, by := testAlerting(t)
	var got [][]byte
	a.alertHook = func(b []byte) { got = append(got, bytes.Clone(b)) }
	srv := alertServer(t, a, "", false)
	if code, m := do(t, "POST", srv.URL+"/api/v1/alerts/"+by["means-diverge"].ID+"/ack", "", `{"by":"Ana"}`); code != 200 {
		t.Fatalf("ack: %d %v", code, m)
	}
	if len(got) != 1 {
		t.Fatalf("hook got %d events, want 1", len(got))
	}
	var ev alert.Event
	if err := json.Unmarshal(got[0], &ev); err != nil || ev.Transition != alert.TransitionAcknowledged || ev.Previous != alert.StateRaised {
		t.Fatalf("hook event %s: %v", got[0], err)
	}
	// The records wait for the next commit: commit them, restart, and the
	// acknowledged alert comes back acknowledged.
	st, err := store.Open(filepath.Join(t.TempDir(), "lockstep.db"), store.Options{NoSync: true})
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	recs, states, _ := a.take()
	if err := st.Commit(&store.Batch{Alerts: recs, MonitorStates: states}); err != nil {
		t.Fatal(err)
	}
	if r2, _, _ := a.take(); r2 != nil {
		t.Errorf("take twice gave %d records", len(r2))
	}
	b := newAlerting(DefaultConfig(), zerolog.Nop(), prometheus.NewRegistry())
	if err := b.restore(st); err != nil {
		t.Fatal(err)
	}
	open := b.list(false)
	if len(open) != 2 {
		t.Fatalf("restored %d open alerts, want 2", len(open))
	}
	if al, _ := b.get(by["means-diverge"].ID); al.State != alert.StateAcknowledged || al.AcknowledgedBy != "Ana" {
		t.Errorf("restored %+v, want acknowledged by Ana", al)
	}
	if al, ok := b.get(by["spread-diverge"].ID); !ok || al.State != alert.StateCleared {
		t.Errorf("the cleared alert is not among the recent after a restart: %+v", al)
	}
}
