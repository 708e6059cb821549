package store

import (
	"bytes"
	"fmt"
	"time"

	bolt "go.etcd.io/bbolt"
)

// retainBatch is how many keys Retain collects before it deletes them and
// seeks again, which bounds its memory.
const retainBatch = 1024

// Retain deletes, for characteristic char, the raw values with a time before
// rawBefore and the bucket states with a start before bucketsBefore, in one
// transaction, and returns how many of both it removed. A zero time keeps
// everything of that kind. Removal is exact: a chunk that holds values on
// both sides of rawBefore is rewritten with the later ones.
//
// Run it often (the daemon: every hour or so), so that each call deletes a
// little: one transaction holds every page it frees until it commits.
func (s *Store) Retain(char string, rawBefore, bucketsBefore time.Time) (removed int, err error) {
	err = s.update("retain", func(tx *bolt.Tx) error {
		removed = 0
		if tx.Bucket([]byte(bucketCharacteristics)).Get([]byte(char)) == nil {
			return fmt.Errorf("%w: %q", ErrNotFound, char)
		}
		if b := tx.Bucket([]byte(bucketBuckets)).Bucket([]byte(char)); b != nil && !bucketsBefore.IsZero() {
			if _, hi, ok := span(time.Time{}, bucketsBefore); ok {
				n, err := retainBuckets(b, hi)
				removed += n
				if err != nil {
					return err
				}
			}
		}
		if b := tx.Bucket([]byte(bucketRaw)).Bucket([]byte(char)); b != nil && !rawBefore.IsZero() {
			if _, hi, ok := span(time.Time{}, rawBefore); ok {
				n, err := retainRaw(b, char, hi)
				removed += n
				if err != nil {
					return err
				}
			}
		}
		return nil
	})
	if err != nil {
		return 0, fmt.Errorf("retain: %w", err)
	}
	return removed, nil
}

// retainBuckets deletes the bucket states that start at or before hi.
func retainBuckets(b *bolt.Bucket, hi int64) (int, error) {
	removed := 0
	for {
		var keys [][]byte
		c := b.Cursor()
		for k, _ := c.First(); k != nil && len(keys) < retainBatch; k, _ = c.Next() {
			if len(k) >= 8 && timeFromKey(k) > hi {
				break
			}
			keys = append(keys, bytes.Clone(k))
		}
		if len(keys) == 0 {
			return removed, nil
		}
		for _, k := range keys {
			if err := b.Delete(k); err != nil {
				return removed, err
			}
		}
		removed += len(keys)
	}
}

// retainRaw deletes the raw values at or before hi, rewriting the chunks that
// straddle hi.
func retainRaw(b *bolt.Bucket, char string, hi int64) (int, error) {
	removed := 0
	for {
		var drop [][]byte
		var rewrite []kv
		c := b.Cursor()
		for k, v := c.First(); k != nil && len(drop) < retainBatch; k, v = c.Next() {
			r, err := openChunk(char, k, v)
			if err != nil {
				return removed, err
			}
			if r.start > hi {
				break
			}
			if r.end <= hi {
				drop = append(drop, bytes.Clone(k))
				removed += r.n
				continue
			}
			// Values on both sides of hi: keep the later ones, under the same
			// sequence, so they keep their place among equal times.
			var keep []rawRec
			for {
				more, err := r.next()
				if err != nil {
					return removed, err
				}
				if !more {
					break
				}
				if r.t > hi {
					keep = append(keep, rawRec{t: r.t, group: r.group, text: string(r.text), id: string(r.id)})
				}
			}
			removed += r.n - len(keep)
			drop = append(drop, bytes.Clone(k))
			rewrite = append(rewrite, kv{chunkKey(keep[0].t, r.seq), appendChunk(nil, keep)})
		}
		if len(drop) == 0 {
			return removed, nil
		}
		for _, k := range drop {
			if err := b.Delete(k); err != nil {
				return removed, err
			}
		}
		for _, e := range rewrite {
			if err := b.Put(e.key, e.val); err != nil {
				return removed, err
			}
		}
	}
}
