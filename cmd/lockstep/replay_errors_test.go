package main

import (
	"bytes"
	"encoding/binary"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"

	"github.com/lockstep-project/lockstep/store"
)

// fileState is a file's bytes and modification time, to check that a
// command changed nothing.
type fileState struct {
	data  []byte
	mtime time.Time
}

func stateOf(t *testing.T, path string) fileState {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	info, err := os.Stat(path)
	if err != nil {
		t.Fatal(err)
	}
	return fileState{b, info.ModTime()}
}

func (s fileState) unchanged(t *testing.T, path string) {
	t.Helper()
	now := stateOf(t, path)
	if !bytes.Equal(now.data, s.data) || !now.mtime.Equal(s.mtime) {
		t.Errorf("%s changed", path)
	}
}

// newerSchemaStore writes a store whose schema version is one past this
// lockstep's.
func newerSchemaStore(t *testing.T) string {
	t.Helper()
	path := filepath.Join(t.TempDir(), "newer.db")
	st, err := store.Open(path, store.Options{NoSync: true})
	if err != nil {
		t.Fatal(err)
	}
	if err := st.Close(); err != nil {
		t.Fatal(err)
	}
	db, err := bolt.Open(path, 0o600, nil)
	if err != nil {
		t.Fatal(err)
	}
	err = db.Update(func(tx *bolt.Tx) error {
		return tx.Bucket([]byte("meta")).Put([]byte("schema"), binary.BigEndian.AppendUint32(nil, store.SchemaVersion+1))
	})
	if err := errors.Join(err, db.Close()); err != nil {
		t.Fatal(err)
	}
	return path
}

// foreignFile writes a file that is not a store.
func foreignFile(t *testing.T) string {
	t.Helper()
	path := filepath.Join(t.TempDir(), "measurements.csv")
	if err := os.WriteFile(path, bytes.Repeat([]byte("group,value\nL1,500.01\n"), 500), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// TestReadCommandsRefuse: replay, export, plot and verify refuse a store
// the daemon holds, a file that is not a store and a store of a newer
// schema, with an exit status of 1 and a message that says what to do,
// and leave the file as it was.
func TestReadCommandsRefuse(t *testing.T) {
	held := replayFixture(t)
	lock, err := store.Open(held, store.Options{NoSync: true})
	if err != nil {
		t.Fatal(err)
	}
	defer lock.Close()
	files := []struct {
		name, path string
		want       []string
	}{
		{"held", held, []string{"in use by PID", "lockstep backup"}},
		{"foreign", foreignFile(t), []string{"not a lockstep store"}},
		{"newer", newerSchemaStore(t), []string{"newer than this lockstep", "upgrade"}},
	}
	out := filepath.Join(t.TempDir(), "w.png")
	for _, f := range files {
		before := stateOf(t, f.path)
		for _, args := range [][]string{
			{"replay", "--store", f.path, "--characteristic", "fill", "--from", "2026-12-01T06:30:00Z", "--to", "2026-12-01T06:40:00Z"},
			{"export", "--store", f.path, "--characteristic", "fill", "--csv"},
			{"plot", "window", "--store", f.path, "--characteristic", "fill", "--at", "2026-12-01T06:30:00Z", "--output", out},
			{"verify", f.path},
		} {
			code, _, errOut := runCmd(t, args...)
			if code != 1 {
				t.Errorf("%s %s: exit %d, want 1 (%s)", f.name, args[0], code, errOut)
			}
			for _, w := range f.want {
				if !strings.Contains(errOut, w) {
					t.Errorf("%s %s: message %q lacks %q", f.name, args[0], errOut, w)
				}
			}
		}
		before.unchanged(t, f.path)
	}
	if _, err := os.Stat(out); err == nil {
		t.Error("plot wrote a chart of a store it refused")
	}
}

// TestReplayBadRequests: an unknown characteristic, bad or empty periods
// and bad durations are refused with a clear message; usage mistakes exit
// 2, the rest 1; the store is unchanged.
func TestReplayBadRequests(t *testing.T) {
	path := replayFixture(t)
	before := stateOf(t, path)
	base := func(extra ...string) []string {
		return append([]string{"replay", "--store", path, "--characteristic", "fill"}, extra...)
	}
	cases := []struct {
		name string
		args []string
		code int
		want string
	}{
		{"unknown characteristic", []string{"replay", "--store", path, "--characteristic", "torque", "--from", "2026-12-01T06:30:00Z", "--to", "2026-12-01T06:40:00Z"}, 1, `"torque"; the store holds fill`},
		{"to before from", base("--from", "2026-12-01T06:40:00Z", "--to", "2026-12-01T06:30:00Z"), 1, "is before --from"},
		{"no data in the period", base("--from", "2027-01-01T00:00:00Z", "--to", "2027-01-01T01:00:00Z"), 1, "no stored values"},
		{"period before the data", base("--from", "2026-11-01T00:00:00Z", "--to", "2026-11-01T01:00:00Z"), 1, "its first stored value is at 2026-12-01T06:00:00"},
		{"time without zone", base("--from", "2026-12-01T06:30:00", "--to", "2026-12-01T06:40:00Z"), 2, "has no zone"},
		{"not a time", base("--from", "yesterday", "--to", "2026-12-01T06:40:00Z"), 2, "RFC 3339"},
		{"missing to", base("--from", "2026-12-01T06:30:00Z"), 2, "--to"},
		{"zero step", base("--from", "2026-12-01T06:30:00Z", "--to", "2026-12-01T06:40:00Z", "--step", "0s"), 2, "must be positive"},
		{"window not a multiple of the bucket", base("--from", "2026-12-01T06:30:00Z", "--to", "2026-12-01T06:40:00Z", "--window", "90s"), 1, "not a multiple of the bucket"},
		{"too many evaluations", base("--from", "2026-12-01T06:30:00Z", "--to", "2036-12-01T06:40:00Z", "--step", "1ms"), 1, "evaluations, more than"},
		{"csv and json", base("--from", "2026-12-01T06:30:00Z", "--to", "2026-12-01T06:40:00Z", "--csv", "--json"), 2, "not both"},
		{"bad plot name", base("--from", "2026-12-01T06:30:00Z", "--to", "2026-12-01T06:40:00Z", "--plot", "chart.pdf"), 2, ".png or .svg"},
		{"bad source", base("--from", "2026-12-01T06:30:00Z", "--to", "2026-12-01T06:40:00Z", "--source", "memory"), 2, "use auto, raw or buckets"},
	}
	for _, c := range cases {
		code, _, errOut := runCmd(t, c.args...)
		if code != c.code || !strings.Contains(errOut, c.want) {
			t.Errorf("%s: exit %d, %q; want exit %d and %q", c.name, code, errOut, c.code, c.want)
		}
	}
	before.unchanged(t, path)
}
