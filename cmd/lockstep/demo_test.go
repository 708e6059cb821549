package main

import (
	"context"
	"encoding/json"
	"errors"
	"io"
	"net/http"
	"strings"
	"testing"
	"time"
)

func TestDemoUsage(t *testing.T) {
	for _, tc := range []struct {
		args []string
		want error
	}{
		{[]string{"--help"}, errHelp},
		{[]string{"--speed", "0"}, errUsage},
		{[]string{"--speed", "NaN"}, errUsage},
		{[]string{"--speed", "1e9"}, errUsage},
		{[]string{"--listen", "0.0.0.0:8420"}, errUsage},
		{[]string{"--listen", "nonsense"}, errUsage},
		{[]string{"--log-level", "loud"}, errUsage},
		{[]string{"extra"}, errUsage},
	} {
		err := (&DemoCommand{Stdout: io.Discard, Stderr: io.Discard}).Run(context.Background(), tc.args)
		if !errors.Is(err, tc.want) {
			t.Errorf("%v: %v, want %v", tc.args, err, tc.want)
		}
	}
	if u := (&DemoCommand{}).Usage(); !strings.Contains(u, "--speed") || !strings.Contains(u, "advisory") {
		t.Error("usage lacks --speed or the caution")
	}
	if _, err := demoSettings(t.TempDir(), "127.0.0.1:0", 60); err != nil {
		t.Fatalf("the bundled demo configuration: %v", err)
	}
}

// demoRun is a running lockstep demo.
type demoRun struct {
	url  string
	stop func() time.Duration // stops it and returns how long that took
}

// startDemo runs lockstep demo at speed on a free port until the test ends.
func startDemo(t *testing.T, speed string) demoRun {
	t.Helper()
	ctx, cancel := context.WithCancel(context.Background())
	ready := make(chan string, 1)
	done := make(chan error, 1)
	var out strings.Builder
	c := &DemoCommand{Stdout: &out, Stderr: io.Discard, ready: func(u string) { ready <- u }}
	go func() {
		done <- c.Run(ctx, []string{"--speed", speed, "--listen", "127.0.0.1:0", "--log-level", "error"})
	}()
	var url string
	select {
	case url = <-ready:
	case err := <-done:
		cancel()
		t.Fatalf("demo ended before it served: %v", err)
	case <-time.After(30 * time.Second):
		cancel()
		t.Fatal("demo did not start within 30 s")
	}
	stopped := false
	stop := func() time.Duration {
		if stopped {
			return 0
		}
		stopped = true
		t0 := time.Now()
		cancel()
		select {
		case err := <-done:
			if err != nil {
				t.Errorf("demo stopped with %v", err)
			}
		case <-time.After(20 * time.Second):
			t.Error("demo did not stop within 20 s")
		}
		return time.Since(t0)
	}
	t.Cleanup(func() { stop() })
	if !strings.Contains(out.String(), url) {
		t.Errorf("the demo did not print its URL %s: %q", url, out.String())
	}
	return demoRun{url: url, stop: stop}
}

// demoAlerts returns the demo's alerts, open and recently cleared.
func demoAlerts(t *testing.T, url string) []map[string]any {
	t.Helper()
	resp, err := http.Get(url + "api/v1/alerts?state=all")
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	var body struct {
		Alerts []map[string]any `json:"alerts"`
	}
	if err := json.NewDecoder(resp.Body).Decode(&body); err != nil {
		t.Fatal(err)
	}
	return body.Alerts
}

// waitL3 waits for the demo's alert on fill-weight naming L3, high.
func waitL3(t *testing.T, url string, within time.Duration) map[string]any {
	t.Helper()
	deadline := time.Now().Add(within)
	for time.Now().Before(deadline) {
		for _, a := range demoAlerts(t, url) {
			g, _ := a["groups"].([]any)
			if a["characteristic"] == "fill-weight" && a["kind"] == "means-diverge" && a["state"] == "raised" && len(g) == 1 && g[0] == "L3" {
				return a
			}
		}
		time.Sleep(250 * time.Millisecond)
	}
	t.Fatalf("no raised fill-weight alert naming L3 within %v; alerts: %v", within, demoAlerts(t, url))
	return nil
}

// TestDemo runs the whole demo fast: the drifting line's alert is raised
// naming L3, high; the scattering jaw J4 raises a spread alert and no means
// alert; the capping heads' common drift raises nothing; the
// dashboard is served; Ctrl-C (the context) stops everything within the
// daemon's 5 s shutdown budget.
func TestDemo(t *testing.T) {
	if testing.Short() {
		t.Skip("starts NATS, the daemon and the simulator")
	}
	d := startDemo(t, "120")
	a := waitL3(t, d.url, 60*time.Second)
	if dir, _ := a["direction"].(float64); dir != 1 {
		t.Errorf("direction %v, want 1 (L3 runs heavy)", a["direction"])
	}
	// J4 scatters from 8 minutes in, every mean staying put: that raises the
	// spread condition and must not raise a means alert. Wait for the
	// spread alert, then 40 simulated minutes more (the pooled-SD CUSUM
	// raised some 20 minutes after the change, and cleared again).
	waitSpread := time.Now().Add(30 * time.Second)
	for spread := false; !spread; time.Sleep(250 * time.Millisecond) {
		for _, x := range demoAlerts(t, d.url) {
			spread = spread || x["characteristic"] == "seal-temperature" && x["kind"] == "spread-diverge"
		}
		if !spread && time.Now().After(waitSpread) {
			t.Errorf("no seal-temperature spread alert within 30 s; alerts: %v", demoAlerts(t, d.url))
			break
		}
	}
	time.Sleep(20 * time.Second)
	for _, x := range demoAlerts(t, d.url) {
		if x["characteristic"] == "cap-torque" && x["kind"] == "means-diverge" {
			t.Errorf("the capping heads' common drift raised %v", x)
		}
		if x["characteristic"] == "seal-temperature" && x["kind"] == "means-diverge" {
			t.Errorf("J4's spread change raised a means alert %v", x)
		}
	}
	status, ctype, body := httpGet(t, d.url)
	if status != http.StatusOK || !strings.HasPrefix(ctype, "text/html") || !strings.Contains(body, "advisory") {
		t.Errorf("dashboard: %d %s", status, ctype)
	}
	if took := d.stop(); took > 7*time.Second {
		t.Errorf("stopping took %v; the budget is 5 s (and 2 s of slack for a loaded machine)", took)
	} else {
		t.Logf("stopped in %v", took)
	}
}
