package store

import (
	"cmp"
	"encoding/binary"
	"errors"
	"slices"
	"testing"
	"time"
)

// The decoders take arbitrary bytes: they must return a record or an error
// wrapping ErrCorrupt, never panic; what they accept must encode and decode
// to the same record.

func FuzzDecodeCharacteristic(f *testing.F) {
	for _, c := range characteristicCases(f) {
		f.Add([]byte(c.Name), appendCharacteristic(nil, &c))
	}
	f.Add([]byte("x"), []byte{1, 1, 0, 1, '5', 0, 0, 0, 0, 0, 0, 0, 0, 0x80})
	f.Fuzz(func(t *testing.T, key, val []byte) {
		c, err := decodeCharacteristic(key, val)
		if err != nil {
			if !errors.Is(err, ErrCorrupt) {
				t.Fatalf("error without ErrCorrupt: %v", err)
			}
			return
		}
		again, err := decodeCharacteristic(key, appendCharacteristic(nil, &c))
		if err != nil {
			t.Fatalf("re-encoded record refused: %v", err)
		}
		if again.Name != c.Name || again.Unit != c.Unit || again.Reference != c.Reference ||
			again.SettingsHash != c.SettingsHash || !again.Created.Equal(c.Created) {
			t.Fatalf("round trip: %+v became %+v", c, again)
		}
	})
}

func FuzzDecodeBucket(f *testing.F) {
	for _, b := range bucketCases() {
		start, _ := nanos(b.Start)
		f.Add(bucketKey(start, b.Group), appendBucketState(nil, &b))
	}
	f.Fuzz(func(t *testing.T, key, val []byte) {
		b, err := decodeBucketState("seal-temp", key, val)
		if err != nil {
			if !errors.Is(err, ErrCorrupt) {
				t.Fatalf("error without ErrCorrupt: %v", err)
			}
			return
		}
		start, ok := nanos(b.Start)
		if !ok {
			t.Fatalf("decoded start %v cannot be stored", b.Start)
		}
		again, err := decodeBucketState("seal-temp", bucketKey(start, b.Group), appendBucketState(nil, &b))
		if err != nil {
			t.Fatalf("re-encoded record refused: %v", err)
		}
		if !sameBucket(again, b) {
			t.Fatalf("round trip: %+v became %+v", b, again)
		}
	})
}

func FuzzDecodeChunk(f *testing.F) {
	for _, recs := range chunkCases() {
		f.Add(chunkKey(recs[0].t, 1), appendChunk(nil, recs))
	}
	f.Fuzz(func(t *testing.T, key, val []byte) {
		vals, err := decodeChunk("fill-weight", key, val)
		if err != nil {
			if !errors.Is(err, ErrCorrupt) {
				t.Fatalf("error without ErrCorrupt: %v", err)
			}
			return
		}
		recs := make([]rawRec, len(vals))
		for i, v := range vals {
			recs[i] = rawRec{t: v.Time.UnixNano(), group: v.Group, text: v.Text, id: v.ID}
		}
		again, err := decodeChunk("fill-weight", chunkKey(recs[0].t, 1), appendChunk(nil, recs))
		if err != nil {
			t.Fatalf("re-encoded chunk refused: %v", err)
		}
		if err := sameRaw(again, vals); err != nil {
			t.Fatalf("round trip: %v", err)
		}
	})
}

func FuzzDecodeCursor(f *testing.F) {
	f.Add([]byte("lockstep-fill"), binary.BigEndian.AppendUint64(nil, 4242))
	f.Fuzz(func(t *testing.T, key, val []byte) {
		seq, err := decodeCursor(key, val)
		if err != nil {
			if !errors.Is(err, ErrCorrupt) {
				t.Fatalf("error without ErrCorrupt: %v", err)
			}
			return
		}
		if binary.BigEndian.Uint64(val) != seq {
			t.Fatalf("cursor %d from %x", seq, val)
		}
	})
}

// FuzzCutChunks turns arbitrary bytes into raw values in any time order,
// cuts them into chunks as Commit does, and checks that the chunks decode to
// the values sorted by time (arrival order among equal times), each chunk
// within one slot and at most maxChunkRecords values.
func FuzzCutChunks(f *testing.F) {
	f.Add(int64(0), []byte{0, 1, 2, 3, 4, 5, 6, 7, 8, 9})
	f.Add(shiftStart().UnixNano(), []byte("\xff\x00\x10\x80\x7f\x01\x02"))
	f.Add(int64(-1), make([]byte, 3000))
	f.Fuzz(func(t *testing.T, t0 int64, data []byte) {
		t0 = min(max(t0, -1<<62), 1<<62)
		groups := []string{"line-1", "line-2", "line-3", "line-4"}
		texts := []string{"500.12", "499.9", "-0.5", "1e3", "500"}
		var recs []rawRec
		for i := 0; i+1 < len(data); i += 2 {
			// The time steps back and forth by up to 40 minutes.
			dt := (int64(data[i]) - 128) * int64(20*time.Second)
			recs = append(recs, rawRec{t: t0 + dt*int64(data[i+1]%8), group: groups[data[i+1]%4],
				text: texts[int(data[i])%len(texts)], id: string(data[i : i+1])})
		}
		want := slices.Clone(recs)
		slices.SortStableFunc(want, func(a, b rawRec) int { return cmp.Compare(a.t, b.t) })
		var got []RawValue
		for i, c := range cutChunks(recs) {
			vals, err := decodeChunk("fill-weight", chunkKey(c.start, uint64(i)), c.val)
			if err != nil {
				t.Fatalf("chunk %d: %v", i, err)
			}
			if len(vals) > maxChunkRecords || slotStart(vals[0].Time.UnixNano()) != slotStart(vals[len(vals)-1].Time.UnixNano()) {
				t.Fatalf("chunk %d: %d values from %v to %v", i, len(vals), vals[0].Time, vals[len(vals)-1].Time)
			}
			got = append(got, vals...)
		}
		if err := sameRaw(got, toRaw("fill-weight", want)); err != nil {
			t.Fatal(err)
		}
	})
}
