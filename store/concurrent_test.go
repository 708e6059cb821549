package store

import (
	"io"
	"math/rand/v2"
	"sync"
	"testing"
	"time"
)

// TestReadsBesideCommits reads, backs up and verifies while another
// goroutine commits: every read sees a consistent snapshot, in time order.
func TestReadsBesideCommits(t *testing.T) {
	s, _ := openTest(t)
	commit(t, s, &Batch{Characteristics: []Characteristic{fillWeight(t)}})
	const batches, per = 40, 200
	var wg sync.WaitGroup
	errs := make(chan error, 1)
	wg.Add(1)
	go func() {
		defer wg.Done()
		rng := rand.New(rand.NewPCG(12, 12))
		for i := range batches {
			b := &Batch{Raw: fillWeights(rng, shiftStart().Add(time.Duration(i)*time.Minute), 100*time.Millisecond, per),
				Consumer: "lockstep-fill", Cursor: uint64((i + 1) * per)}
			if err := s.Commit(b); err != nil {
				errs <- err
				return
			}
		}
	}()
	last := 0
	for last < batches*per {
		n := 0
		var prev time.Time
		err := s.Raw("fill-weight", time.Time{}, time.Time{}, func(r RawValue) error {
			if r.Time.Before(prev) {
				t.Errorf("value at %v after %v", r.Time, prev)
			}
			prev = r.Time
			n++
			return nil
		})
		if err != nil {
			t.Fatal(err)
		}
		if n < last || n%per != 0 {
			t.Fatalf("read %d values after %d: not a whole number of batches", n, last)
		}
		last = n
		if _, err := s.Backup(io.Discard); err != nil {
			t.Fatal(err)
		}
		if err := s.Verify(); err != nil {
			t.Fatal(err)
		}
		select {
		case err := <-errs:
			t.Fatal(err)
		default:
		}
	}
	wg.Wait()
	if c, _ := s.Cursor("lockstep-fill"); c != batches*per {
		t.Errorf("cursor %d, want %d", c, batches*per)
	}
}
