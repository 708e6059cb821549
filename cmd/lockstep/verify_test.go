package main

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"

	bolt "go.etcd.io/bbolt"
)

// TestVerify: a sound store is "ok" with its schema version; a store with
// a record that does not decode is DAMAGED, listed, exit 1; a missing file
// and a usage mistake are told apart.
func TestVerify(t *testing.T) {
	path := replayFixture(t)
	before := stateOf(t, path)
	code, out, errOut := runCmd(t, "verify", path)
	if code != 0 || !strings.Contains(out, ": ok") || !strings.Contains(out, "schema version") || !strings.Contains(out, "characteristics: 1 (fill)") {
		t.Errorf("sound store: exit %d, %q %q", code, out, errOut)
	}
	before.unchanged(t, path)

	bad := filepath.Join(t.TempDir(), "bad.db")
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(bad, data, 0o600); err != nil {
		t.Fatal(err)
	}
	db, err := bolt.Open(bad, 0o600, nil)
	if err != nil {
		t.Fatal(err)
	}
	err = db.Update(func(tx *bolt.Tx) error {
		return tx.Bucket([]byte("characteristics")).Put([]byte("torque"), []byte{0xff, 1, 2})
	})
	if err := errors.Join(err, db.Close()); err != nil {
		t.Fatal(err)
	}
	code, out, errOut = runCmd(t, "verify", bad)
	if code != 1 || !strings.Contains(out, "DAMAGED") || !strings.Contains(out, "torque") || !strings.Contains(errOut, "problems found") {
		t.Errorf("damaged store: exit %d, %q %q", code, out, errOut)
	}
	if code, _, _ := runCmd(t, "verify", filepath.Join(t.TempDir(), "none.db")); code != 1 {
		t.Errorf("missing file: exit %d, want 1", code)
	}
	if code, _, _ := runCmd(t, "verify"); code != 2 {
		t.Errorf("no file: exit %d, want 2", code)
	}
}
