package main

import (
	"bytes"
	"context"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/rs/zerolog"

	"github.com/lockstep-project/lockstep/store"
)

// TestBackupThroughDaemon: GET /api/v1/backup streams a copy of the live
// store (opened read-write, as the daemon holds it) that verifies and
// replays as the original does.
func TestBackupThroughDaemon(t *testing.T) {
	path := replayFixture(t)
	// The replay of the original, before the daemon holds it.
	replayArgs := func(p string) []string {
		return []string{"replay", "--store", p, "--characteristic", "fill", "--csv",
			"--from", "2026-12-01T06:30:00Z", "--to", "2026-12-01T06:45:00Z", "--step", "1m"}
	}
	_, want, _ := runCmd(t, replayArgs(path)...)
	st, err := store.Open(path, store.Options{NoSync: true})
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	srv := httptest.NewServer(newAPIHandler(apiState{book: newReportBook(), reg: prometheus.NewRegistry(), log: zerolog.Nop(), store: st}))
	defer srv.Close()
	addr := strings.TrimPrefix(srv.URL, "http://")
	out := filepath.Join(t.TempDir(), "copy.db")
	code, stdout, errOut := runCmd(t, "backup", "--http", addr, out)
	if code != 0 || !strings.Contains(stdout, "verified") {
		t.Fatalf("backup: exit %d, %q %q", code, stdout, errOut)
	}
	code, got, errOut := runCmd(t, replayArgs(out)...)
	if code != 0 || got != want || len(want) < 500 {
		t.Errorf("replay of the copy: exit %d (%s); it should equal the original's (%d bytes)", code, errOut, len(want))
	}
	// OUT exists: refused, untouched.
	before := stateOf(t, out)
	if code, _, errOut := runCmd(t, "backup", "--http", addr, out); code != 1 || !strings.Contains(errOut, "never overwrites") {
		t.Errorf("existing OUT: exit %d, %q", code, errOut)
	}
	before.unchanged(t, out)
	// No daemon there.
	srv.Close()
	if code, _, errOut := runCmd(t, "backup", "--http", addr, filepath.Join(t.TempDir(), "x.db")); code != 1 || !strings.Contains(errOut, "is lockstep run serving there") {
		t.Errorf("no daemon: exit %d, %q", code, errOut)
	}
	// The file form refuses the held file and says how to proceed.
	if code, _, errOut := runCmd(t, "backup", "--store", path, filepath.Join(t.TempDir(), "y.db")); code != 1 || !strings.Contains(errOut, "through the daemon") {
		t.Errorf("held file: exit %d, %q", code, errOut)
	}
}

// TestBackupFile: the file form copies a stopped daemon's store; a foreign
// file is refused and no OUT is left behind.
func TestBackupFile(t *testing.T) {
	path := replayFixture(t)
	before := stateOf(t, path)
	out := filepath.Join(t.TempDir(), "copy.db")
	if code, _, errOut := runCmd(t, "backup", "--store", path, out); code != 0 {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	before.unchanged(t, path)
	st, err := store.OpenReadOnly(out, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if err := st.Verify(); err != nil {
		t.Error(err)
	}
	var a, b bytes.Buffer
	if _, err := exportCSV(context.Background(), st, "fill", time.Time{}, time.Time{}, &a); err != nil {
		t.Fatal(err)
	}
	st.Close()
	orig, err := store.OpenReadOnly(path, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer orig.Close()
	if _, err := exportCSV(context.Background(), orig, "fill", time.Time{}, time.Time{}, &b); err != nil {
		t.Fatal(err)
	}
	if a.String() != b.String() || a.Len() < 1000 {
		t.Error("the copy's raw values differ from the original's")
	}
	bad := filepath.Join(t.TempDir(), "bad.db")
	if code, _, errOut := runCmd(t, "backup", "--store", foreignFile(t), bad); code != 1 || !strings.Contains(errOut, "not a lockstep store") {
		t.Errorf("foreign file: exit %d, %q", code, errOut)
	}
	if _, err := os.Stat(bad); err == nil {
		t.Error("a refused backup left its OUT")
	}
	entries, _ := os.ReadDir(filepath.Dir(bad))
	if len(entries) != 0 {
		t.Errorf("a refused backup left files: %v", entries)
	}
}

// TestBackupToken: with a token configured the backup needs it, on
// loopback too; the command sends LOCKSTEP_HTTP_TOKEN.
func TestBackupToken(t *testing.T) {
	path := replayFixture(t)
	st, err := store.Open(path, store.Options{NoSync: true})
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	srv := httptest.NewServer(newAPIHandler(apiState{book: newReportBook(), reg: prometheus.NewRegistry(), log: zerolog.Nop(), store: st, token: "s3cret"}))
	defer srv.Close()
	addr := strings.TrimPrefix(srv.URL, "http://")
	dir := t.TempDir()
	for _, c := range []struct {
		token, want string
		code        int
	}{{"", "401 Unauthorized", 1}, {"wrong", "403 Forbidden", 1}, {"s3cret", "verified", 0}} {
		var out, errOut bytes.Buffer
		cmd := &BackupCommand{Stdout: &out, Stderr: &errOut, Getenv: func(k string) string {
			if k == "LOCKSTEP_HTTP_TOKEN" {
				return c.token
			}
			return ""
		}}
		dst := filepath.Join(dir, "copy-"+c.token+".db")
		err := cmd.Run(context.Background(), []string{"--http", addr, dst})
		got := out.String()
		if err != nil {
			got = err.Error()
		}
		if (err == nil) != (c.code == 0) || !strings.Contains(got, c.want) {
			t.Errorf("token %q: %v %q; want %q", c.token, err, got, c.want)
		}
		if _, serr := os.Stat(dst); (serr == nil) != (c.code == 0) {
			t.Errorf("token %q: copy present %v", c.token, serr == nil)
		}
	}
}
