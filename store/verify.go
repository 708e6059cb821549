package store

import (
	"errors"
	"fmt"
	"io"
	"slices"
	"strconv"

	bolt "go.etcd.io/bbolt"

	"github.com/lockstep-project/lockstep/stats"
)

// Backup writes a consistent copy of the whole store to w, while commits go
// on: bbolt's online copy (Tx.WriteTo) inside one read transaction. The copy
// is a store file that Open and OpenReadOnly accept. It returns the number of
// bytes written.
func (s *Store) Backup(w io.Writer) (int64, error) {
	var n int64
	err := s.db.View(func(tx *bolt.Tx) error {
		var err error
		n, err = tx.WriteTo(w)
		return err
	})
	if err != nil {
		return n, fmt.Errorf("backup store %s: %w", s.path, err)
	}
	return n, nil
}

// maxReported is how many problems Verify lists before it only counts them.
const maxReported = 20

// Verify checks the whole store: bbolt's consistency check of the file's
// pages (Tx.Check), the schema, and that every record decodes, that every
// raw value's text is a decimal number, and that the stored bucket states
// and raw values belong to stored characteristics. It reads everything, so
// it takes time in proportion to the file's size.
//
// On a store opened with Open it runs in a write transaction that it rolls
// back, because bbolt's check reads the free page list that a concurrent
// commit changes; commits wait meanwhile.
func (s *Store) Verify() error {
	var err error
	if s.readOnly {
		err = s.db.View(s.verify)
	} else {
		var tx *bolt.Tx
		tx, err = s.db.Begin(true)
		if err == nil {
			err = s.verify(tx)
			err = errors.Join(err, tx.Rollback())
		}
	}
	if err != nil {
		return fmt.Errorf("verify store %s: %w", s.path, err)
	}
	return nil
}

// problems collects the first maxReported errors and counts the rest.
type problems struct {
	errs []error
	more int
}

func (p *problems) add(err error) {
	if err == nil {
		return
	}
	if len(p.errs) < maxReported {
		p.errs = append(p.errs, err)
		return
	}
	p.more++
}

func (p *problems) err() error {
	if p.more > 0 {
		p.errs = append(p.errs, fmt.Errorf("and %d more problems", p.more))
	}
	return errors.Join(p.errs...)
}

func (s *Store) verify(tx *bolt.Tx) error {
	var p problems
	for err := range tx.Check() {
		p.add(fmt.Errorf("bbolt check: %w", err))
	}
	if _, err := checkSchema(tx, s.path); err != nil {
		p.add(err)
		return p.err()
	}
	top := topBuckets()
	p.add(tx.ForEach(func(name []byte, _ *bolt.Bucket) error {
		if !slices.Contains(top, string(name)) && !slices.Contains(optionalBuckets(), string(name)) {
			p.add(fmt.Errorf("unknown top-level bucket %q", name))
		}
		return nil
	}))
	for _, name := range top {
		if tx.Bucket([]byte(name)) == nil {
			p.add(fmt.Errorf("top-level bucket %q missing", name))
		}
	}
	if len(p.errs) > 0 {
		return p.err()
	}
	p.add(verifyAlerts(tx))
	p.add(tx.Bucket([]byte(bucketMeta)).ForEach(func(k, _ []byte) error {
		if string(k) != keyFormat && string(k) != keySchema {
			p.add(fmt.Errorf("unknown meta key %q", k))
		}
		return nil
	}))
	known := map[string]bool{}
	p.add(tx.Bucket([]byte(bucketCharacteristics)).ForEach(func(k, v []byte) error {
		_, err := decodeCharacteristic(k, v)
		p.add(err)
		known[string(k)] = true
		return nil
	}))
	p.add(tx.Bucket([]byte(bucketCursors)).ForEach(func(k, v []byte) error {
		_, err := decodeCursor(k, v)
		p.add(err)
		return nil
	}))
	verifyNested(tx, bucketBuckets, known, &p, func(char string, b *bolt.Bucket) {
		p.add(b.ForEach(func(k, v []byte) error {
			_, err := decodeBucketState(char, k, v)
			p.add(err)
			return nil
		}))
	})
	verifyNested(tx, bucketRaw, known, &p, func(char string, b *bolt.Bucket) {
		p.add(b.ForEach(func(k, v []byte) error {
			p.add(verifyChunk(char, k, v))
			return nil
		}))
	})
	return p.err()
}

// verifyNested checks that the top-level bucket top holds only sub-buckets
// named after known characteristics, each holding only values, and runs fn
// on each.
func verifyNested(tx *bolt.Tx, top string, known map[string]bool, p *problems, fn func(string, *bolt.Bucket)) {
	tb := tx.Bucket([]byte(top))
	p.add(tb.ForEach(func(k, v []byte) error {
		if v != nil {
			p.add(fmt.Errorf("%s: value under key %q where a characteristic's bucket belongs", top, k))
			return nil
		}
		char := string(k)
		if !known[char] {
			p.add(fmt.Errorf("%s: records of %q, which is not a stored characteristic", top, char))
		}
		b := tb.Bucket(k)
		p.add(b.ForEach(func(k, v []byte) error {
			if v == nil {
				p.add(fmt.Errorf("%s %s: nested bucket %q", top, strconv.Quote(char), k))
			}
			return nil
		}))
		fn(char, b)
		return nil
	}))
}

// verifyChunk decodes every value of a chunk and parses its text.
func verifyChunk(char string, key, val []byte) error {
	r, err := openChunk(char, key, val)
	if err != nil {
		return err
	}
	for {
		more, err := r.next()
		if err != nil || !more {
			return err
		}
		if _, err := stats.ParseDecimal(string(r.text)); err != nil {
			return r.corrupt(nil, fmt.Errorf("value %d: %w", r.i-1, err))
		}
	}
}
