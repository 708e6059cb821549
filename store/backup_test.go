package store

import (
	"bytes"
	"errors"
	"math/rand/v2"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"
)

func TestBackupOpensAndVerifies(t *testing.T) {
	s, _ := openTest(t)
	rng := rand.New(rand.NewPCG(8, 8))
	raw := fillWeights(rng, shiftStart(), 250*time.Millisecond, 3000)
	commit(t, s, &Batch{Characteristics: []Characteristic{fillWeight(t), sealTemp(t)}, Raw: raw,
		Buckets: sealBuckets(shiftStart()), Consumer: "lockstep-fill", Cursor: 3000})

	path := filepath.Join(t.TempDir(), "backup.db")
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	n, err := s.Backup(f)
	if err := errors.Join(err, f.Close()); err != nil {
		t.Fatal(err)
	}
	if info, _ := os.Stat(path); info.Size() != n {
		t.Errorf("backup wrote %d bytes, file has %d", n, info.Size())
	}
	// More commits after the backup do not reach it.
	commit(t, s, &Batch{Raw: fillWeights(rng, shiftStart().Add(time.Hour), time.Second, 10), Consumer: "lockstep-fill", Cursor: 3010})

	before, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	b, err := OpenReadOnly(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if err := b.Verify(); err != nil {
		t.Errorf("verify backup: %v", err)
	}
	if err := sameRaw(allRaw(t, b, "fill-weight", time.Time{}, time.Time{}), raw); err != nil {
		t.Errorf("backup's raw values: %v", err)
	}
	if got, want := allBuckets(t, b, "seal-temp", time.Time{}, time.Time{}), allBuckets(t, s, "seal-temp", time.Time{}, time.Time{}); !reflect.DeepEqual(got, want) {
		t.Errorf("backup's bucket states differ")
	}
	if c, _ := b.Cursor("lockstep-fill"); c != 3000 {
		t.Errorf("backup's cursor %d, want 3000", c)
	}
	if err := b.Commit(&Batch{Consumer: "lockstep-fill", Cursor: 3011}); !errors.Is(err, ErrReadOnly) {
		t.Errorf("commit to a read-only store: %v, want ErrReadOnly", err)
	}
	if _, err := b.Retain("fill-weight", shiftStart().Add(time.Minute), time.Time{}); !errors.Is(err, ErrReadOnly) {
		t.Errorf("retain on a read-only store: %v, want ErrReadOnly", err)
	}
	// Two readers at once share the file.
	b2, err := OpenReadOnly(path, Options{Timeout: 100 * time.Millisecond})
	if err != nil {
		t.Errorf("second reader: %v", err)
	} else if err := b2.Close(); err != nil {
		t.Error(err)
	}
	if err := b.Close(); err != nil {
		t.Fatal(err)
	}
	after, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(before, after) {
		t.Error("read-only open changed the backup")
	}
	if _, err := os.Stat(pidPath(path)); err == nil {
		t.Error("read-only open left a sidecar")
	}
	// A backup restores: Open takes it as a store.
	r, err := Open(path, Options{NoSync: true})
	if err != nil {
		t.Fatalf("open the backup for writing: %v", err)
	}
	closeAndVerify(t, r, path)
}

// TestVerifyFindsCorruption damages records behind the store's back and
// expects Verify, and the readers, to name them.
func TestVerifyFindsCorruption(t *testing.T) {
	path := filepath.Join(t.TempDir(), "lockstep.db")
	s, err := Open(path, Options{NoSync: true})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	rng := rand.New(rand.NewPCG(9, 9))
	commit(t, s, &Batch{Characteristics: []Characteristic{fillWeight(t), sealTemp(t)},
		Raw: fillWeights(rng, shiftStart(), time.Second, 20), Buckets: sealBuckets(shiftStart())})
	if err := s.Verify(); err != nil {
		t.Fatalf("verify before the damage: %v", err)
	}
	err = s.db.Update(func(tx *bolt.Tx) error {
		b := tx.Bucket([]byte(bucketBuckets)).Bucket([]byte("seal-temp"))
		k, v := b.Cursor().First()
		if err := b.Put(k, v[:len(v)-3]); err != nil {
			return err
		}
		raw := tx.Bucket([]byte(bucketRaw)).Bucket([]byte("fill-weight"))
		k, v = raw.Cursor().First()
		v = bytes.Replace(v, []byte("500."), []byte("500,"), 1)
		if err := raw.Put(k, v); err != nil {
			return err
		}
		return tx.Bucket([]byte(bucketCursors)).Put([]byte("lockstep-seal"), []byte{1, 2, 3})
	})
	if err != nil {
		t.Fatal(err)
	}
	err = s.Verify()
	for _, want := range []string{
		`decode bucket state "seal-temp" 2026-03-16T06:00:00Z "jaw-A": corrupt record: sample of 3 values in 21 bytes at byte 35`,
		`decode raw chunk "fill-weight" 2026-03-16T06:00:00Z #1: corrupt record: value `,
		`parse decimal "500,`,
		`decode cursor "lockstep-seal": corrupt record: 3 bytes, not 8`,
	} {
		if !errors.Is(err, ErrCorrupt) || !strings.Contains(err.Error(), want) {
			t.Errorf("verify: %v\nwant ErrCorrupt with %q", err, want)
		}
	}
	if err := s.Buckets("seal-temp", time.Time{}, time.Time{}, func(BucketState) error { return nil }); !errors.Is(err, ErrCorrupt) {
		t.Errorf("buckets over a damaged record: %v, want ErrCorrupt", err)
	}
}
