package store

import (
	"math/rand/v2"
	"testing"
	"time"
)

func TestRetain(t *testing.T) {
	s, _ := openTest(t)
	rng := rand.New(rand.NewPCG(6, 6))
	// Two hours of fill weights, one every 2 s, in four batches out of
	// order; and bucket states for the seal jaws.
	vals := fillWeights(rng, shiftStart(), 2*time.Second, 3600)
	commit(t, s, &Batch{Characteristics: []Characteristic{fillWeight(t), sealTemp(t)}, Raw: vals[1800:2700],
		Buckets: sealBuckets(shiftStart())})
	commit(t, s, &Batch{Raw: vals[:1800], Buckets: sealBuckets(shiftStart().Add(time.Hour))})
	commit(t, s, &Batch{Raw: vals[2700:]})

	// Cut in the middle of a chunk: 06:30:01 keeps the value at 06:30:02.
	cut := shiftStart().Add(30*time.Minute + time.Second)
	n, err := s.Retain("fill-weight", cut, time.Time{})
	if err != nil {
		t.Fatal(err)
	}
	want := between(vals, cut, time.Time{})
	if n != len(vals)-len(want) {
		t.Errorf("removed %d, want %d", n, len(vals)-len(want))
	}
	if err := sameRaw(allRaw(t, s, "fill-weight", time.Time{}, time.Time{}), want); err != nil {
		t.Errorf("after the first cut: %v", err)
	}
	// Retaining again to the same time removes nothing.
	if n, err := s.Retain("fill-weight", cut, time.Time{}); n != 0 || err != nil {
		t.Errorf("second retain: %d, %v; want 0", n, err)
	}
	// Bucket states of seal-temp before 07:00:30: the four of the first
	// hour and the two of 07:00.
	n, err = s.Retain("seal-temp", time.Time{}, shiftStart().Add(time.Hour+30*time.Second))
	if err != nil || n != 6 {
		t.Errorf("retain bucket states: %d, %v; want 6", n, err)
	}
	if got := allBuckets(t, s, "seal-temp", time.Time{}, time.Time{}); len(got) != 2 ||
		!got[0].Start.Equal(shiftStart().Add(time.Hour+time.Minute)) {
		t.Errorf("bucket states left: %+v", got)
	}
	// Everything before the end of time: nothing left.
	n, err = s.Retain("fill-weight", time.Date(3000, 1, 1, 0, 0, 0, 0, time.UTC), time.Time{})
	if err != nil || n != len(want) {
		t.Errorf("retain all: %d, %v; want %d", n, err, len(want))
	}
	if got := allRaw(t, s, "fill-weight", time.Time{}, time.Time{}); len(got) != 0 {
		t.Errorf("%d values left", len(got))
	}
	// New values after retention still come back in order.
	more := fillWeights(rng, shiftStart().Add(3*time.Hour), time.Second, 10)
	commit(t, s, &Batch{Raw: more})
	if err := sameRaw(allRaw(t, s, "fill-weight", time.Time{}, time.Time{}), more); err != nil {
		t.Error(err)
	}
}

// TestRetainManyChunks deletes more chunks than one round of Retain holds.
func TestRetainManyChunks(t *testing.T) {
	if testing.Short() {
		t.Skip("3 000 commits")
	}
	s, _ := openTest(t)
	rng := rand.New(rand.NewPCG(7, 7))
	commit(t, s, &Batch{Characteristics: []Characteristic{fillWeight(t)}})
	var vals []RawValue
	for i := range 3000 {
		b := fillWeights(rng, shiftStart().Add(time.Duration(i)*time.Second), 100*time.Millisecond, 2)
		vals = append(vals, b...)
		commit(t, s, &Batch{Raw: b})
	}
	cut := shiftStart().Add(2500 * time.Second)
	n, err := s.Retain("fill-weight", cut, cut)
	if err != nil || n != 5000 {
		t.Errorf("removed %d, %v; want 5000", n, err)
	}
	if err := sameRaw(allRaw(t, s, "fill-weight", time.Time{}, time.Time{}), between(vals, cut, time.Time{})); err != nil {
		t.Error(err)
	}
}
