package main

import (
	"bytes"
	"context"
	"encoding/json"
	"net"
	"path/filepath"
	"strings"
	"testing"

	"github.com/lockstep-project/lockstep/store"
)

// runAlerts runs lockstep alerts ARGS and returns the exit status and the
// output.
func runAlerts(t *testing.T, env map[string]string, args ...string) (int, string, string) {
	t.Helper()
	var out, errOut bytes.Buffer
	cmd := &AlertsCommand{Stdout: &out, Stderr: &errOut, Getenv: func(k string) string { return env[k] }}
	err := cmd.Run(context.Background(), args)
	code := 0
	if err != nil {
		code = 1
		errOut.WriteString(err.Error())
	}
	return code, out.String(), errOut.String()
}

func TestAlertsCommandList(t *testing.T) {
	a, by := testAlerting(t)
	srv := alertServer(t, a, "", false)
	code, out, errOut := runAlerts(t, nil, "list", "--api", srv.URL)
	if code != 0 || !strings.Contains(out, by["means-diverge"].ID) || !strings.Contains(out, "raised") ||
		strings.Contains(out, by["spread-diverge"].ID) || !strings.Contains(out, "+0.8 g [0.5, 1.1]") {
		t.Fatalf("list: %d %q %q", code, out, errOut)
	}
	_, out, _ = runAlerts(t, nil, "list", "--all", "--json", "--api", srv.URL)
	var body struct {
		Alerts []map[string]any `json:"alerts"`
	}
	if err := json.Unmarshal([]byte(out), &body); err != nil || len(body.Alerts) != 3 {
		t.Fatalf("list --all --json: %q, %v", out, err)
	}
}

func TestAlertsCommandAck(t *testing.T) {
	a, by := testAlerting(t)
	srv := alertServer(t, a, "tok", false)
	id := by["means-diverge"].ID
	// Without the token: refused, with a hint.
	code, _, errOut := runAlerts(t, nil, "ack", id, "--by", "Ana", "--api", srv.URL)
	if code != 1 || !strings.Contains(errOut, "401") || !strings.Contains(errOut, "LOCKSTEP_HTTP_TOKEN") {
		t.Fatalf("ack without token: %d %q", code, errOut)
	}
	code, out, errOut := runAlerts(t, map[string]string{"LOCKSTEP_HTTP_TOKEN": "tok"}, "ack", id, "--by", "Ana", "--note", "scale checked", "--api", srv.URL)
	if code != 0 || !strings.Contains(out, "acknowledged "+id) {
		t.Fatalf("ack: %d %q %q", code, out, errOut)
	}
	if al, _ := a.get(id); al.Note != "scale checked" {
		t.Errorf("note %q", al.Note)
	}
	// Again: 409, with the API's reason.
	code, _, errOut = runAlerts(t, nil, "ack", id, "--by", "Ana", "--api", srv.URL, "--token", "tok")
	if code != 1 || !strings.Contains(errOut, "409") || !strings.Contains(errOut, "only a raised alert") {
		t.Errorf("second ack: %d %q", code, errOut)
	}
	for _, args := range [][]string{{"ack", id}, {"ack", "--by", "Ana"}, {"bogus"}, {}, {"list", "extra"}} {
		var out bytes.Buffer
		err := (&AlertsCommand{Stdout: &out, Stderr: &out}).Run(context.Background(), args)
		if err == nil || !strings.Contains(err.Error(), "usage") {
			t.Errorf("%v: %v, want a usage error", args, err)
		}
	}
}

func TestAlertsCommandUnreachable(t *testing.T) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	addr := ln.Addr().String()
	ln.Close()
	code, _, errOut := runAlerts(t, nil, "list", "--api", addr)
	if code != 1 || !strings.Contains(errOut, "Is lockstep run serving there?") || !strings.Contains(errOut, "--store") {
		t.Errorf("unreachable: %d %q", code, errOut)
	}
}

func TestAlertsCommandStore(t *testing.T) {
	a, by := testAlerting(t)
	path := filepath.Join(t.TempDir(), "lockstep.db")
	st, err := store.Open(path, store.Options{NoSync: true})
	if err != nil {
		t.Fatal(err)
	}
	recs, states, _ := a.take()
	if err := st.Commit(&store.Batch{Alerts: recs, MonitorStates: states}); err != nil {
		t.Fatal(err)
	}
	// While the daemon holds the file: a clear error.
	code, _, errOut := runAlerts(t, nil, "list", "--store", path)
	if code != 1 || !strings.Contains(errOut, "--api") {
		t.Errorf("list --store of a held file: %d %q", code, errOut)
	}
	if err := st.Close(); err != nil {
		t.Fatal(err)
	}
	code, out, errOut := runAlerts(t, nil, "list", "--store", path)
	if code != 0 || !strings.Contains(out, by["means-diverge"].ID) || strings.Contains(out, by["spread-diverge"].ID) {
		t.Errorf("list --store: %d %q %q", code, out, errOut)
	}
	_, out, _ = runAlerts(t, nil, "list", "--store", path, "--all")
	if !strings.Contains(out, by["spread-diverge"].ID) {
		t.Errorf("list --store --all lacks the cleared alert: %q", out)
	}
}

func TestAlertsCommandHelp(t *testing.T) {
	var out, errOut bytes.Buffer
	if code := run(context.Background(), []string{"alerts", "--help"}, nil, &out, &errOut); code != 0 ||
		!strings.Contains(out.String(), "lockstep alerts ack ID --by NAME") || !strings.Contains(out.String(), "advisory") {
		t.Errorf("alerts --help: %d %q %q", code, out.String(), errOut.String())
	}
	out.Reset()
	if code := run(context.Background(), []string{"alerts", "list", "--help"}, nil, &out, &errOut); code != 0 || !strings.Contains(out.String(), "--store FILE") {
		t.Errorf("alerts list --help: %d %q", code, out.String())
	}
}
