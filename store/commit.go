package store

import (
	"bytes"
	"cmp"
	"encoding/binary"
	"fmt"
	"slices"
	"unicode/utf8"

	bolt "go.etcd.io/bbolt"

	"github.com/lockstep-project/lockstep/stats"
)

// Batch is everything one commit writes, in one bbolt transaction: all of it
// or none of it.
type Batch struct {
	// Characteristics are stored whole, replacing the stored record, except
	// that Created is kept from the first commit and that Reference may not
	// change (ErrInvalid). A bucket state or raw value must name a
	// characteristic that is stored or in the same batch.
	Characteristics []Characteristic

	// Buckets are full bucket states, replacing any stored state for the
	// same characteristic, start and group (the last one wins within a
	// batch). Committing the same states again leaves the store unchanged.
	Buckets []BucketState

	// Raw values are appended, in any order. Committing the same raw values
	// twice stores them twice, unless the cursor below catches it.
	Raw []RawValue

	// Consumer and Cursor: the JetStream consumer the batch came from and
	// the stream sequence of the last message it applies. When Cursor is
	// not 0, Commit refuses a batch whose Cursor is not above the stored
	// cursor of Consumer with ErrApplied, writing nothing, and otherwise
	// stores Cursor with the rest. Cursor 0 leaves the cursor unchanged and
	// skips the check.
	Consumer string
	Cursor   uint64

	// Alerts are alert records, each replacing the stored record of its id
	// (alerts.go); MonitorStates replace the stored monitor state of their
	// characteristic. Both are opaque bytes to the store.
	Alerts        []AlertRecord
	MonitorStates []MonitorState
}

// Commit writes the batch in one read-write transaction, and so with one
// fsync. It checks and encodes everything first, so a batch with an invalid
// record (ErrInvalid) is refused whole before the transaction starts.
//
// Cost: one put per characteristic and per bucket state, and one put per
// chunk of up to 1 000 raw values of a characteristic within one hour of
// Unix time; keys are put in sorted order.
func (s *Store) Commit(b *Batch) error {
	p, err := prepare(b)
	if err != nil {
		return fmt.Errorf("commit: %w", err)
	}
	if err := s.update("commit", p.apply); err != nil {
		return fmt.Errorf("commit: %w", err)
	}
	return nil
}

// prepared is a checked, encoded batch.
type prepared struct {
	chars    []Characteristic
	writes   []*charWrites // sorted by characteristic name
	consumer string
	cursor   uint64
	alerts   preparedAlerts
}

// charWrites are the puts for one characteristic.
type charWrites struct {
	name    string
	buckets []kv    // sorted by key
	chunks  []chunk // sorted by start

	raw  []rawRec // while preparing: its raw values
	nraw int
}

type kv struct{ key, val []byte }

type chunk struct {
	start int64
	val   []byte
}

func invalid(format string, args ...any) error {
	return fmt.Errorf("%w: "+format, append([]any{ErrInvalid}, args...)...)
}

func prepare(b *Batch) (*prepared, error) {
	p := &prepared{consumer: b.Consumer, cursor: b.Cursor}
	if b.Cursor != 0 {
		if err := checkName([]byte(b.Consumer)); err != nil {
			return nil, invalid("consumer of cursor %d: %v", b.Cursor, err)
		}
	}
	for i := range b.Characteristics {
		c := &b.Characteristics[i]
		if err := checkCharacteristic(c); err != nil {
			return nil, invalid("characteristic %d (%q): %v", i, c.Name, err)
		}
		p.chars = append(p.chars, *c)
	}
	byName := map[string]*charWrites{}
	of := func(name string) *charWrites {
		w := byName[name]
		if w == nil {
			w = &charWrites{name: name}
			byName[name] = w
			p.writes = append(p.writes, w)
		}
		return w
	}
	for i := range b.Buckets {
		bs := &b.Buckets[i]
		start, err := checkBucket(bs)
		if err != nil {
			return nil, invalid("bucket state %d (%q %q): %v", i, bs.Characteristic, bs.Group, err)
		}
		w := of(bs.Characteristic)
		w.buckets = append(w.buckets, kv{bucketKey(start, bs.Group), appendBucketState(nil, bs)})
	}
	// Raw values: checked and counted by characteristic, then placed in
	// one array, each characteristic's run in arrival order.
	for i := range b.Raw {
		r := &b.Raw[i]
		if _, err := checkRaw(r); err != nil {
			return nil, invalid("raw value %d (%q %q): %v", i, r.Characteristic, r.Group, err)
		}
		of(r.Characteristic).nraw++
	}
	all, off := make([]rawRec, len(b.Raw)), 0
	for _, w := range p.writes {
		w.raw, off = all[off:off:off+w.nraw], off+w.nraw
	}
	var w *charWrites
	for i := range b.Raw {
		r := &b.Raw[i]
		if w == nil || w.name != r.Characteristic {
			w = byName[r.Characteristic]
		}
		t, _ := nanos(r.Time) // checked above
		w.raw = append(w.raw, rawRec{t: t, group: r.Group, text: r.Text, id: r.ID})
	}
	alerts, err := prepareAlerts(b)
	if err != nil {
		return nil, err
	}
	p.alerts = alerts
	slices.SortFunc(p.writes, func(a, b *charWrites) int { return cmp.Compare(a.name, b.name) })
	for _, w := range p.writes {
		slices.SortStableFunc(w.buckets, func(a, b kv) int { return bytes.Compare(a.key, b.key) })
		w.chunks = cutChunks(w.raw)
		w.raw = nil
	}
	return p, nil
}

// cutChunks sorts recs by time, keeping arrival order among equal times, and
// encodes them as chunks of at most maxChunkRecords values within one raw
// slot each.
func cutChunks(recs []rawRec) []chunk {
	slices.SortStableFunc(recs, func(a, b rawRec) int { return cmp.Compare(a.t, b.t) })
	var out []chunk
	for len(recs) > 0 {
		n, slot := 1, slotStart(recs[0].t)
		for n < len(recs) && n < maxChunkRecords && slotStart(recs[n].t) == slot {
			n++
		}
		out = append(out, chunk{start: recs[0].t, val: appendChunk(nil, recs[:n])})
		recs = recs[n:]
	}
	return out
}

func checkCharacteristic(c *Characteristic) error {
	if err := checkName([]byte(c.Name)); err != nil {
		return err
	}
	if len(c.Unit) > maxName || !utf8.ValidString(c.Unit) {
		return fmt.Errorf("unit %q: not UTF-8 of at most %d bytes", c.Unit, maxName)
	}
	if n := len(c.Reference.String()); n > maxText {
		return fmt.Errorf("reference of %d digits, more than %d", n, maxText)
	}
	if _, ok := nanos(c.Created); !ok && !c.Created.IsZero() {
		return fmt.Errorf("created %v outside the years 1678 to 2262", c.Created)
	}
	return nil
}

func checkBucket(b *BucketState) (int64, error) {
	if err := checkNameString(b.Characteristic); err != nil {
		return 0, fmt.Errorf("characteristic: %v", err)
	}
	if err := checkNameString(b.Group); err != nil {
		return 0, fmt.Errorf("group: %v", err)
	}
	start, ok := nanos(b.Start)
	if !ok {
		return 0, fmt.Errorf("start %v is zero or outside the years 1678 to 2262", b.Start)
	}
	switch n := int64(len(b.Sample)); {
	case b.Acc.N < 0:
		return 0, fmt.Errorf("count %d is negative", b.Acc.N)
	case n > maxSample:
		return 0, fmt.Errorf("sample of %d values, more than %d", n, maxSample)
	case n > b.Acc.N:
		return 0, fmt.Errorf("sample of %d values from a count of %d", n, b.Acc.N)
	}
	return start, nil
}

func checkRaw(r *RawValue) (int64, error) {
	if err := checkNameString(r.Characteristic); err != nil {
		return 0, fmt.Errorf("characteristic: %v", err)
	}
	if err := checkNameString(r.Group); err != nil {
		return 0, fmt.Errorf("group: %v", err)
	}
	t, ok := nanos(r.Time)
	if !ok {
		return 0, fmt.Errorf("time %v is zero or outside the years 1678 to 2262", r.Time)
	}
	if len(r.Text) > maxText {
		return 0, fmt.Errorf("text of %d bytes, more than %d", len(r.Text), maxText)
	}
	if _, err := stats.ParseDecimal(r.Text); err != nil {
		return 0, err
	}
	if len(r.ID) > maxID {
		return 0, fmt.Errorf("id of %d bytes, more than %d", len(r.ID), maxID)
	}
	return t, nil
}

// apply writes the prepared batch in tx.
func (p *prepared) apply(tx *bolt.Tx) error {
	cursors := tx.Bucket([]byte(bucketCursors))
	if p.cursor != 0 {
		if v := cursors.Get([]byte(p.consumer)); v != nil {
			stored, err := decodeCursor([]byte(p.consumer), v)
			if err != nil {
				return err
			}
			if p.cursor <= stored {
				return fmt.Errorf("%w: cursor %d of consumer %q is not past the stored %d", ErrApplied, p.cursor, p.consumer, stored)
			}
		}
	}
	chars := tx.Bucket([]byte(bucketCharacteristics))
	for i := range p.chars {
		c := p.chars[i]
		if v := chars.Get([]byte(c.Name)); v != nil {
			old, err := decodeCharacteristic([]byte(c.Name), v)
			if err != nil {
				return err
			}
			if old.Reference != c.Reference {
				return invalid("characteristic %q: reference %s differs from the stored %s, on which its bucket states are centred",
					c.Name, c.Reference.String(), old.Reference.String())
			}
			if !old.Created.IsZero() {
				c.Created = old.Created
			}
		}
		if err := chars.Put([]byte(c.Name), appendCharacteristic(nil, &c)); err != nil {
			return fmt.Errorf("put characteristic %q: %w", c.Name, err)
		}
	}
	for _, w := range p.writes {
		if chars.Get([]byte(w.name)) == nil {
			return invalid("characteristic %q is not stored: commit it first, or in the same batch", w.name)
		}
		if err := w.apply(tx); err != nil {
			return err
		}
	}
	if err := p.alerts.apply(tx); err != nil {
		return err
	}
	if p.cursor != 0 {
		if err := cursors.Put([]byte(p.consumer), binary.BigEndian.AppendUint64(nil, p.cursor)); err != nil {
			return fmt.Errorf("put cursor: %w", err)
		}
	}
	return nil
}

func (w *charWrites) apply(tx *bolt.Tx) error {
	if len(w.buckets) > 0 {
		b, err := tx.Bucket([]byte(bucketBuckets)).CreateBucketIfNotExists([]byte(w.name))
		if err != nil {
			return fmt.Errorf("create bucket states of %q: %w", w.name, err)
		}
		for _, e := range w.buckets {
			if err := b.Put(e.key, e.val); err != nil {
				return fmt.Errorf("put bucket state of %q: %w", w.name, err)
			}
		}
	}
	if len(w.chunks) > 0 {
		b, err := tx.Bucket([]byte(bucketRaw)).CreateBucketIfNotExists([]byte(w.name))
		if err != nil {
			return fmt.Errorf("create raw values of %q: %w", w.name, err)
		}
		for _, c := range w.chunks {
			seq, err := b.NextSequence()
			if err != nil {
				return err
			}
			if err := b.Put(chunkKey(c.start, seq), c.val); err != nil {
				return fmt.Errorf("put raw values of %q: %w", w.name, err)
			}
		}
	}
	return nil
}
