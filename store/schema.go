package store

import (
	"encoding/binary"
	"fmt"
	"math"
	"time"

	bolt "go.etcd.io/bbolt"
)

// SchemaVersion is the layout this lockstep reads and writes. A store with a
// higher version is refused at Open, and its file is left as it is.
const SchemaVersion uint32 = 1

// The layout of schema version 1. Every key and value is described where it
// is encoded: times in timeKey, records in codec.go and chunk.go.
//
//	meta/format                     "lockstep store"
//	meta/schema                     uint32 big-endian SchemaVersion
//	characteristics/NAME            characteristic record (codec.go)
//	cursors/CONSUMER                uint64 big-endian stream sequence
//	buckets/NAME/TIME GROUP         bucket state (codec.go); TIME = bucket start
//	raw/NAME/TIME SEQ               chunk of raw values (chunk.go); TIME = first
//	                                value's time, SEQ = uint64 big-endian from
//	                                the sub-bucket's NextSequence
//	alerts/ID                       alert record (alerts.go); created by the
//	                                first commit that holds one
//	monitors/NAME                   monitor state (alerts.go); likewise
const (
	bucketMeta            = "meta"
	bucketCharacteristics = "characteristics"
	bucketCursors         = "cursors"
	bucketBuckets         = "buckets"
	bucketRaw             = "raw"
	bucketAlerts          = "alerts"
	bucketMonitors        = "monitors"

	keyFormat   = "format"
	keySchema   = "schema"
	formatMagic = "lockstep store"
)

// topBuckets lists every top-level bucket of the schema, in the order init
// creates them.
func topBuckets() []string {
	return []string{bucketMeta, bucketCharacteristics, bucketCursors, bucketBuckets, bucketRaw}
}

// optionalBuckets are the top-level buckets a store may lack: those created
// on first use (alerts.go).
func optionalBuckets() []string { return []string{bucketAlerts, bucketMonitors} }

// Limits on what a record may hold. Decoders refuse larger lengths, so a
// corrupt length cannot make them allocate or read far.
const (
	maxName   = 255  // characteristic, group and consumer names, units: bytes
	maxText   = 256  // decimal text of a raw value: bytes
	maxID     = 255  // measurement id: bytes
	maxSample = 4096 // sample values per bucket state
)

// timeKey is the 8-byte key prefix for a time: its Unix nanoseconds with the
// sign bit flipped, big-endian, so that byte order is time order for times
// before 1970 too.
func appendTimeKey(dst []byte, ns int64) []byte {
	return binary.BigEndian.AppendUint64(dst, uint64(ns)^(1<<63))
}

// timeFromKey reads a time key prefix; k must have at least 8 bytes.
func timeFromKey(k []byte) int64 {
	return int64(binary.BigEndian.Uint64(k) ^ (1 << 63))
}

// nanos returns t as Unix nanoseconds, and false when t is the zero time or
// outside what int64 nanoseconds hold (about the years 1678 to 2262).
func nanos(t time.Time) (int64, bool) {
	if t.IsZero() || t.Before(time.Unix(0, math.MinInt64)) || t.After(time.Unix(0, math.MaxInt64)) {
		return 0, false
	}
	return t.UnixNano(), true
}

// fromNanos is the UTC time of Unix nanoseconds ns.
func fromNanos(ns int64) time.Time { return time.Unix(0, ns).UTC() }

// span converts the half-open range [from, to) into inclusive nanosecond
// bounds. A zero from is the beginning of time and a zero to its end; bounds
// outside the storable range are clamped. ok is false for an empty range.
func span(from, to time.Time) (lo, hi int64, ok bool) {
	lo, hi = math.MinInt64, math.MaxInt64
	if !from.IsZero() {
		switch n, inRange := nanos(from); {
		case inRange:
			lo = n
		case from.After(time.Unix(0, math.MaxInt64)):
			return 0, 0, false
		}
	}
	if !to.IsZero() {
		switch n, inRange := nanos(to); {
		case inRange && n == math.MinInt64:
			return 0, 0, false
		case inRange:
			hi = n - 1
		case to.Before(time.Unix(0, math.MinInt64)):
			return 0, 0, false
		}
	}
	return lo, hi, lo <= hi
}

// checkSchema reports whether the file is a lockstep store of a schema this
// lockstep reads. fresh is true for a bbolt file with no buckets at all (a
// file bbolt has just created, or one left by a crash before the first
// commit): it holds nothing and may be initialised.
func checkSchema(tx *bolt.Tx, path string) (fresh bool, err error) {
	meta := tx.Bucket([]byte(bucketMeta))
	if meta == nil {
		c := tx.Cursor()
		if k, _ := c.First(); k == nil {
			return true, nil
		}
		return false, notAStore(path, "it has no lockstep meta bucket")
	}
	if string(meta.Get([]byte(keyFormat))) != formatMagic {
		return false, notAStore(path, "its meta bucket has no lockstep format mark")
	}
	v := meta.Get([]byte(keySchema))
	if len(v) != 4 {
		return false, notAStore(path, fmt.Sprintf("its schema version is %d bytes, not 4", len(v)))
	}
	switch n := binary.BigEndian.Uint32(v); {
	case n > SchemaVersion:
		return false, &storeError{path: path, sentinel: ErrSchema,
			msg: fmt.Sprintf("schema version %d is newer than this lockstep (%d): upgrade lockstep", n, SchemaVersion)}
	case n < SchemaVersion:
		return false, &storeError{path: path, sentinel: ErrSchema,
			msg: fmt.Sprintf("schema version %d is older than this lockstep (%d), and there is no migration from it", n, SchemaVersion)}
	}
	return false, nil
}

func notAStore(path, why string) error {
	return &storeError{path: path, sentinel: ErrSchema, msg: "not a lockstep store: " + why}
}

// initSchema creates the top-level buckets and the meta records of a fresh
// store.
func initSchema(tx *bolt.Tx) error {
	for _, name := range topBuckets() {
		if _, err := tx.CreateBucketIfNotExists([]byte(name)); err != nil {
			return fmt.Errorf("create bucket %s: %w", name, err)
		}
	}
	meta := tx.Bucket([]byte(bucketMeta))
	if err := meta.Put([]byte(keyFormat), []byte(formatMagic)); err != nil {
		return err
	}
	return meta.Put([]byte(keySchema), binary.BigEndian.AppendUint32(nil, SchemaVersion))
}
