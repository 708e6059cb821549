package store

import (
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/stats"
)

// holdEnv, when set to a store path, makes the test binary a helper process
// that opens the store, prints "ready", and holds it until its standard
// input closes (see TestOpenInUseByAnotherProcess).
const holdEnv = "LOCKSTEP_STORE_TEST_HOLD"

func TestMain(m *testing.M) {
	if path := os.Getenv(holdEnv); path != "" {
		os.Exit(holdStore(path))
	}
	os.Exit(m.Run())
}

func holdStore(path string) int {
	s, err := Open(path, Options{NoSync: true})
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		return 1
	}
	fmt.Println("ready")
	_, _ = io.Copy(io.Discard, os.Stdin)
	if err := s.Close(); err != nil {
		fmt.Fprintln(os.Stderr, err)
		return 1
	}
	return 0
}

// openTest opens a new store in t.TempDir() with NoSync, and registers a
// cleanup that closes it, checks that the sidecar is gone, and runs Verify
// (bbolt's own check and every record) on the file read-only.
func openTest(t testing.TB) (*Store, string) {
	t.Helper()
	path := filepath.Join(t.TempDir(), "lockstep.db")
	s, err := Open(path, Options{NoSync: true})
	if err != nil {
		t.Fatalf("open: %v", err)
	}
	t.Cleanup(func() { closeAndVerify(t, s, path) })
	return s, path
}

func closeAndVerify(t testing.TB, s *Store, path string) {
	t.Helper()
	if err := s.Close(); err != nil {
		t.Errorf("close: %v", err)
	}
	if _, err := os.Stat(pidPath(path)); !errors.Is(err, fs.ErrNotExist) {
		t.Errorf("sidecar after Close: %v", err)
	}
	ro, err := OpenReadOnly(path, Options{})
	if err != nil {
		t.Errorf("reopen to verify: %v", err)
		return
	}
	if err := ro.Verify(); err != nil {
		t.Errorf("verify after the test: %v", err)
	}
	if err := ro.Close(); err != nil {
		t.Errorf("close after verify: %v", err)
	}
}

func commit(t testing.TB, s *Store, b *Batch) {
	t.Helper()
	if err := s.Commit(b); err != nil {
		t.Fatalf("commit: %v", err)
	}
}

func mustDecimal(t testing.TB, s string) stats.Decimal {
	t.Helper()
	d, err := stats.ParseDecimal(s)
	if err != nil {
		t.Fatal(err)
	}
	return d
}

// shiftStart is 06:00 on a Monday, the start of the early shift.
func shiftStart() time.Time { return time.Date(2026, 3, 16, 6, 0, 0, 0, time.UTC) }

// fillWeight is the characteristic of the filling-line scenario: 500 g
// nominal, four lines.
func fillWeight(t testing.TB) Characteristic {
	return Characteristic{Name: "fill-weight", Unit: "g", Reference: mustDecimal(t, "500.0"),
		SettingsHash: 0x5eed_f111, Created: shiftStart().Add(-24 * time.Hour)}
}

// fillWeights invents n fill weights in grams, two decimals, from lines 1
// to 4 in turn, one value every step, starting at t0; line 3 runs 0.4 g
// heavy. Ids are "B<batch>-<n>".
func fillWeights(rng *rand.Rand, t0 time.Time, step time.Duration, n int) []RawValue {
	out := make([]RawValue, n)
	for i := range out {
		line := i%4 + 1
		w := 500 + 0.8*rng.NormFloat64()
		if line == 3 {
			w += 0.4
		}
		out[i] = RawValue{Characteristic: "fill-weight", Group: fmt.Sprintf("line-%d", line),
			Time: t0.Add(time.Duration(i) * step), Text: fmt.Sprintf("%.2f", w), ID: fmt.Sprintf("B7-%d", i)}
	}
	return out
}

// allRaw reads every raw value of char.
func allRaw(t testing.TB, s *Store, char string, from, to time.Time) []RawValue {
	t.Helper()
	var out []RawValue
	if err := s.Raw(char, from, to, func(r RawValue) error {
		out = append(out, r)
		return nil
	}); err != nil {
		t.Fatalf("raw: %v", err)
	}
	return out
}

// allBuckets reads every bucket state of char.
func allBuckets(t testing.TB, s *Store, char string, from, to time.Time) []BucketState {
	t.Helper()
	var out []BucketState
	if err := s.Buckets(char, from, to, func(b BucketState) error {
		out = append(out, b)
		return nil
	}); err != nil {
		t.Fatalf("buckets: %v", err)
	}
	return out
}

// sameRaw reports the first difference between two lists of raw values.
func sameRaw(got, want []RawValue) error {
	if len(got) != len(want) {
		return fmt.Errorf("%d values, want %d", len(got), len(want))
	}
	for i := range got {
		g, w := got[i], want[i]
		if g.Characteristic != w.Characteristic || g.Group != w.Group || !g.Time.Equal(w.Time) ||
			g.Text != w.Text || g.ID != w.ID {
			return fmt.Errorf("value %d: got %+v, want %+v", i, g, w)
		}
	}
	return nil
}
