package store

import (
	"container/heap"
	"fmt"
	"time"

	bolt "go.etcd.io/bbolt"
)

// Reads run in a bbolt read transaction: a consistent snapshot beside
// concurrent commits. The callbacks of Buckets and Raw run inside it, so
// they must not call Commit or Retain (a write transaction waiting on the
// read transaction of its own goroutine can deadlock); what they are handed
// is copied out and stays valid after they return.

// Cursor returns the last stream sequence committed for consumer, or 0 when
// none was.
func (s *Store) Cursor(consumer string) (uint64, error) {
	var seq uint64
	err := s.db.View(func(tx *bolt.Tx) error {
		v := tx.Bucket([]byte(bucketCursors)).Get([]byte(consumer))
		if v == nil {
			return nil
		}
		var err error
		seq, err = decodeCursor([]byte(consumer), v)
		return err
	})
	if err != nil {
		return 0, fmt.Errorf("read cursor: %w", err)
	}
	return seq, nil
}

// Characteristics returns every stored characteristic, sorted by name.
func (s *Store) Characteristics() ([]Characteristic, error) {
	var out []Characteristic
	err := s.db.View(func(tx *bolt.Tx) error {
		return tx.Bucket([]byte(bucketCharacteristics)).ForEach(func(k, v []byte) error {
			c, err := decodeCharacteristic(k, v)
			if err != nil {
				return err
			}
			out = append(out, c)
			return nil
		})
	})
	if err != nil {
		return nil, fmt.Errorf("read characteristics: %w", err)
	}
	return out, nil
}

// Buckets calls fn for every stored bucket state of characteristic char
// whose start lies in [from, to), in time order and, within one start, in
// byte order of the group names. A zero from or to leaves that end open. An
// error from fn stops the iteration and is returned as it is. A
// characteristic that is not stored gives ErrNotFound.
func (s *Store) Buckets(char string, from, to time.Time, fn func(BucketState) error) error {
	return s.db.View(func(tx *bolt.Tx) error {
		if tx.Bucket([]byte(bucketCharacteristics)).Get([]byte(char)) == nil {
			return fmt.Errorf("read bucket states: %w: %q", ErrNotFound, char)
		}
		b := tx.Bucket([]byte(bucketBuckets)).Bucket([]byte(char))
		lo, hi, ok := span(from, to)
		if b == nil || !ok {
			return nil
		}
		c := b.Cursor()
		for k, v := c.Seek(appendTimeKey(nil, lo)); k != nil; k, v = c.Next() {
			if len(k) >= 8 && timeFromKey(k) > hi {
				break
			}
			bs, err := decodeBucketState(char, k, v)
			if err != nil {
				return fmt.Errorf("read bucket states: %w", err)
			}
			if err := fn(bs); err != nil {
				return err
			}
		}
		return nil
	})
}

// Raw calls fn for every stored raw value of characteristic char whose time
// lies in [from, to), in time order; values with equal times come in the
// order they were committed (within one batch, in the batch's order). A zero
// from or to leaves that end open. An error from fn stops the iteration and
// is returned as it is. A characteristic that is not stored gives
// ErrNotFound.
//
// Method: a k-way merge. Chunks are keyed by their first time and never
// cross a raw slot (an hour of Unix time), so the read seeks to the start of
// from's slot, skips the chunks that end before from by their header, and
// then keeps a heap of the chunks open at the current time, opening the
// next chunk by key before it emits any value at or after that chunk's
// start. Values are decoded in place and copied only as they are handed to
// fn. Memory is constant in the length of the range: one decoder per chunk
// that overlaps the current time, which is one or two when commits arrive
// in time order and grows with the number of commits whose values
// interleave (late values). Time is O(log k) per value for k open chunks,
// plus the headers of the skipped chunks of one slot.
func (s *Store) Raw(char string, from, to time.Time, fn func(RawValue) error) error {
	return s.db.View(func(tx *bolt.Tx) error {
		if tx.Bucket([]byte(bucketCharacteristics)).Get([]byte(char)) == nil {
			return fmt.Errorf("read raw values: %w: %q", ErrNotFound, char)
		}
		b := tx.Bucket([]byte(bucketRaw)).Bucket([]byte(char))
		lo, hi, ok := span(from, to)
		if b == nil || !ok {
			return nil
		}
		err := mergeChunks(b, char, lo, hi, fn)
		if stop, ok := err.(errStop); ok {
			return stop.err
		}
		if err != nil {
			return fmt.Errorf("read raw values: %w", err)
		}
		return nil
	})
}

// errStop wraps an error from the caller's fn, so that Raw returns it
// unwrapped.
type errStop struct{ err error }

func (e errStop) Error() string { return e.err.Error() }

// mergeChunks emits the values in [lo, hi] of the chunks in b in time order.
func mergeChunks(b *bolt.Bucket, char string, lo, hi int64, fn func(RawValue) error) error {
	c := b.Cursor()
	k, v := c.Seek(appendTimeKey(nil, slotStart(lo)))
	var h chunkHeap
	for {
		// Open every chunk that starts no later than the earliest open value.
		for k != nil && (len(h) == 0 || len(k) < 8 || timeFromKey(k) <= h[0].t) {
			r, err := openChunk(char, k, v)
			if err != nil {
				return err
			}
			if r.start > hi {
				k = nil
				break
			}
			k, v = c.Next()
			if r.end < lo {
				continue
			}
			for {
				more, err := r.next()
				if err != nil {
					return err
				}
				if !more {
					break
				}
				if r.t >= lo {
					heap.Push(&h, r)
					break
				}
			}
		}
		if len(h) == 0 {
			return nil
		}
		r := h[0]
		if r.t > hi {
			return nil
		}
		if err := fn(r.value()); err != nil {
			return errStop{err}
		}
		more, err := r.next()
		if err != nil {
			return err
		}
		if more {
			heap.Fix(&h, 0)
		} else {
			heap.Pop(&h)
		}
	}
}

// chunkHeap orders open chunks by their current value's time, then by their
// sequence (commit order).
type chunkHeap []*chunkReader

func (h chunkHeap) Len() int { return len(h) }
func (h chunkHeap) Less(i, j int) bool {
	if h[i].t != h[j].t {
		return h[i].t < h[j].t
	}
	return h[i].seq < h[j].seq
}
func (h chunkHeap) Swap(i, j int) { h[i], h[j] = h[j], h[i] }
func (h *chunkHeap) Push(x any)   { *h = append(*h, x.(*chunkReader)) }
func (h *chunkHeap) Pop() any {
	old := *h
	r := old[len(old)-1]
	old[len(old)-1] = nil
	*h = old[:len(old)-1]
	return r
}
