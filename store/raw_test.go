package store

import (
	"cmp"
	"errors"
	"math/rand/v2"
	"slices"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"
)

// committed is a raw value with the order it was committed in, for the
// expected order of equal times.
type committed struct {
	RawValue
	order int
}

func sortedByTime(in []committed) []RawValue {
	s := slices.Clone(in)
	slices.SortStableFunc(s, func(a, b committed) int {
		if c := a.Time.Compare(b.Time); c != 0 {
			return c
		}
		return cmp.Compare(a.order, b.order)
	})
	out := make([]RawValue, len(s))
	for i := range s {
		out[i] = s[i].RawValue
	}
	return out
}

func between(vals []RawValue, from, to time.Time) []RawValue {
	var out []RawValue
	for _, v := range vals {
		if (from.IsZero() || !v.Time.Before(from)) && (to.IsZero() || v.Time.Before(to)) {
			out = append(out, v)
		}
	}
	return out
}

// TestRawOutOfOrder commits a shift's fill weights shuffled within and
// across batches, with a late batch from an hour before and batches larger
// than a chunk, and reads them back in time order over many ranges.
func TestRawOutOfOrder(t *testing.T) {
	s, _ := openTest(t)
	rng := rand.New(rand.NewPCG(3, 3))
	commit(t, s, &Batch{Characteristics: []Characteristic{fillWeight(t)}})

	// Three hours of values, one every 1.5 s, every tenth on a time shared
	// with its neighbour (a line controller that stamps whole seconds).
	vals := fillWeights(rng, shiftStart().Add(-time.Hour), 1500*time.Millisecond, 7200)
	for i := 1; i < len(vals); i += 10 {
		vals[i].Time = vals[i-1].Time
	}
	// Deliver them in batches of random size, each batch shuffled and
	// a tenth of the values held back and delivered later.
	var late []RawValue
	var all []committed
	order := 0
	for len(vals) > 0 {
		n := min(len(vals), 1+rng.IntN(2500))
		batch := slices.Clone(vals[:n])
		vals = vals[n:]
		rng.Shuffle(len(batch), func(i, j int) { batch[i], batch[j] = batch[j], batch[i] })
		var now []RawValue
		for _, v := range batch {
			if rng.IntN(10) == 0 {
				late = append(late, v)
			} else {
				now = append(now, v)
			}
		}
		if rng.IntN(3) == 0 && len(late) > 0 {
			now = append(now, late...)
			late = nil
		}
		for _, v := range now {
			all = append(all, committed{v, order})
			order++
		}
		commit(t, s, &Batch{Raw: now})
	}
	for _, v := range late {
		all = append(all, committed{v, order})
		order++
	}
	commit(t, s, &Batch{Raw: late})

	want := sortedByTime(all)
	if err := sameRaw(allRaw(t, s, "fill-weight", time.Time{}, time.Time{}), want); err != nil {
		t.Fatalf("all: %v", err)
	}
	for range 50 {
		from := want[rng.IntN(len(want))].Time.Add(time.Duration(rng.IntN(3)-1) * time.Millisecond)
		to := from.Add(time.Duration(rng.Int64N(int64(90 * time.Minute))))
		if err := sameRaw(allRaw(t, s, "fill-weight", from, to), between(want, from, to)); err != nil {
			t.Fatalf("[%v, %v): %v", from, to, err)
		}
	}
	// A range on a slot boundary, and one that ends exactly on a value.
	slot := shiftStart()
	if err := sameRaw(allRaw(t, s, "fill-weight", slot, slot.Add(time.Hour)), between(want, slot, slot.Add(time.Hour))); err != nil {
		t.Errorf("one slot: %v", err)
	}
	end := want[100].Time
	if err := sameRaw(allRaw(t, s, "fill-weight", time.Time{}, end), between(want, time.Time{}, end)); err != nil {
		t.Errorf("to a value's time: %v", err)
	}
}

// TestRawEqualTimesKeepCommitOrder: values stamped with the same time come
// back in the order they were committed, within and across batches.
func TestRawEqualTimesKeepCommitOrder(t *testing.T) {
	s, _ := openTest(t)
	at := shiftStart().Add(90 * time.Second)
	v := func(g, text string, tm time.Time) RawValue {
		return RawValue{Characteristic: "cap-torque", Group: g, Time: tm, Text: text}
	}
	cap := Characteristic{Name: "cap-torque", Unit: "N·m", Reference: mustDecimal(t, "2.2")}
	commit(t, s, &Batch{Characteristics: []Characteristic{cap}, Raw: []RawValue{
		v("head-4", "2.31", at), v("head-1", "2.18", at.Add(time.Second)), v("head-2", "2.24", at)}})
	commit(t, s, &Batch{Raw: []RawValue{v("head-3", "2.20", at), v("head-1", "2.19", at.Add(-time.Second))}})
	want := []RawValue{
		v("head-1", "2.19", at.Add(-time.Second)),
		v("head-4", "2.31", at), v("head-2", "2.24", at), v("head-3", "2.20", at),
		v("head-1", "2.18", at.Add(time.Second)),
	}
	if err := sameRaw(allRaw(t, s, "cap-torque", time.Time{}, time.Time{}), want); err != nil {
		t.Error(err)
	}
}

// TestRawChunks checks the chunk layout a commit writes: a thousand values
// at most per chunk, never across a slot, keys in order.
func TestRawChunks(t *testing.T) {
	s, _ := openTest(t)
	rng := rand.New(rand.NewPCG(4, 4))
	// 2 500 values from 05:50 to 06:10 cross the 06:00 slot boundary.
	vals := fillWeights(rng, shiftStart().Add(-10*time.Minute), 480*time.Millisecond, 2500)
	commit(t, s, &Batch{Characteristics: []Characteristic{fillWeight(t)}, Raw: vals})
	var sizes []int
	err := s.db.View(func(tx *bolt.Tx) error {
		return tx.Bucket([]byte(bucketRaw)).Bucket([]byte("fill-weight")).ForEach(func(k, v []byte) error {
			r, err := openChunk("fill-weight", k, v)
			if err != nil {
				return err
			}
			if slotStart(r.start) != slotStart(r.end) {
				t.Errorf("chunk %x crosses a slot", k)
			}
			sizes = append(sizes, r.n)
			return nil
		})
	})
	if err != nil {
		t.Fatal(err)
	}
	// 05:50–06:00 holds 1 250 values (600 s / 0.48 s), the rest after.
	if want := []int{1000, 250, 1000, 250}; !slices.Equal(sizes, want) {
		t.Errorf("chunk sizes %v, want %v", sizes, want)
	}
}

func TestRawStopsOnCallbackError(t *testing.T) {
	s, _ := openTest(t)
	rng := rand.New(rand.NewPCG(5, 5))
	commit(t, s, &Batch{Characteristics: []Characteristic{fillWeight(t)}, Raw: fillWeights(rng, shiftStart(), time.Second, 30)})
	stop := errors.New("export target full")
	n := 0
	err := s.Raw("fill-weight", time.Time{}, time.Time{}, func(RawValue) error {
		n++
		if n == 7 {
			return stop
		}
		return nil
	})
	if err != stop || n != 7 {
		t.Errorf("got %v after %d values; want the callback's error after 7", err, n)
	}
}
