package store

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"time"
	"unicode/utf8"

	bolt "go.etcd.io/bbolt"
)

// Alert records and monitor states. The store keeps them as opaque bytes
// (the alert package owns their codecs) so that it knows nothing of alert
// types; it only knows an alert record's id and, for retention, when the
// alert closed.
//
//	alerts/ID        byte version (1), int64 big-endian closed time (Unix
//	                 nanoseconds; 0 while open), then the record's bytes
//	monitors/NAME    the monitor state of characteristic NAME, as given
//
// Both top-level buckets are created by the first commit that writes to
// them, so stores made before they existed need no migration.

const alertRecordVersion = 1

// Limits on what an alert record and a monitor state may hold.
const (
	maxAlertID       = 255
	maxAlertData     = 1 << 16
	maxMonitorState  = 1 << 22
	alertHeaderBytes = 9
)

// AlertRecord is one persisted alert: its id, when it closed (zero while
// it is open) and its encoded form.
type AlertRecord struct {
	ID     string    // 1 to 255 bytes of UTF-8
	Closed time.Time // zero while open; retention removes closed records
	Data   []byte    // at most 64 KiB; opaque to the store
}

// MonitorState is the persisted state of one characteristic's alert
// monitor, opaque to the store.
type MonitorState struct {
	Characteristic string
	State          []byte // at most 4 MiB; replaces the stored state
}

// preparedAlerts are the checked alert puts of a batch.
type preparedAlerts struct {
	alerts   []kv
	monitors []kv
}

func prepareAlerts(b *Batch) (preparedAlerts, error) {
	var p preparedAlerts
	for i := range b.Alerts {
		r := &b.Alerts[i]
		switch {
		case r.ID == "" || len(r.ID) > maxAlertID || !utf8.ValidString(r.ID):
			return p, invalid("alert record %d: id %q is not 1 to %d bytes of UTF-8", i, r.ID, maxAlertID)
		case len(r.Data) > maxAlertData:
			return p, invalid("alert record %d (%s): %d bytes, more than %d", i, r.ID, len(r.Data), maxAlertData)
		}
		var closed int64
		if !r.Closed.IsZero() {
			ns, ok := nanos(r.Closed)
			if !ok {
				return p, invalid("alert record %d (%s): closed %v outside the years 1678 to 2262", i, r.ID, r.Closed)
			}
			closed = ns
		}
		v := make([]byte, 0, alertHeaderBytes+len(r.Data))
		v = append(v, alertRecordVersion)
		v = binary.BigEndian.AppendUint64(v, uint64(closed))
		p.alerts = append(p.alerts, kv{[]byte(r.ID), append(v, r.Data...)})
	}
	for i := range b.MonitorStates {
		m := &b.MonitorStates[i]
		if err := checkName([]byte(m.Characteristic)); err != nil {
			return p, invalid("monitor state %d: characteristic: %v", i, err)
		}
		if len(m.State) > maxMonitorState {
			return p, invalid("monitor state %d (%q): %d bytes, more than %d", i, m.Characteristic, len(m.State), maxMonitorState)
		}
		p.monitors = append(p.monitors, kv{[]byte(m.Characteristic), bytes.Clone(m.State)})
	}
	return p, nil
}

// apply writes the alert records and monitor states in tx; the last of
// equal keys wins.
func (p *preparedAlerts) apply(tx *bolt.Tx) error {
	put := func(name string, kvs []kv) error {
		if len(kvs) == 0 {
			return nil
		}
		b, err := tx.CreateBucketIfNotExists([]byte(name))
		if err != nil {
			return fmt.Errorf("create bucket %s: %w", name, err)
		}
		for _, e := range kvs {
			if err := b.Put(e.key, e.val); err != nil {
				return fmt.Errorf("put %s %q: %w", name, e.key, err)
			}
		}
		return nil
	}
	if err := put(bucketAlerts, p.alerts); err != nil {
		return err
	}
	return put(bucketMonitors, p.monitors)
}

func decodeAlertRecord(k, v []byte) (AlertRecord, error) {
	if len(v) < alertHeaderBytes || v[0] != alertRecordVersion {
		return AlertRecord{}, fmt.Errorf("%w: alert record %q: %d bytes, or a version this lockstep does not read", ErrCorrupt, k, len(v))
	}
	r := AlertRecord{ID: string(k), Data: bytes.Clone(v[alertHeaderBytes:])}
	if ns := int64(binary.BigEndian.Uint64(v[1:])); ns != 0 {
		r.Closed = fromNanos(ns)
	}
	return r, nil
}

// Alerts calls fn for every stored alert record, in byte order of the ids.
// An error from fn stops the iteration and is returned as it is.
func (s *Store) Alerts(fn func(AlertRecord) error) error {
	return s.db.View(func(tx *bolt.Tx) error {
		b := tx.Bucket([]byte(bucketAlerts))
		if b == nil {
			return nil
		}
		c := b.Cursor()
		for k, v := c.First(); k != nil; k, v = c.Next() {
			r, err := decodeAlertRecord(k, v)
			if err != nil {
				return fmt.Errorf("read alerts: %w", err)
			}
			if err := fn(r); err != nil {
				return err
			}
		}
		return nil
	})
}

// MonitorState returns the stored monitor state of characteristic char, or
// nil when none is stored.
func (s *Store) MonitorState(char string) ([]byte, error) {
	var out []byte
	err := s.db.View(func(tx *bolt.Tx) error {
		if b := tx.Bucket([]byte(bucketMonitors)); b != nil {
			out = bytes.Clone(b.Get([]byte(char)))
		}
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("read monitor state of %q: %w", char, err)
	}
	return out, nil
}

// RetainAlerts deletes the alert records that closed before before, in one
// transaction, and returns how many it removed. Open records are kept
// whatever their age; a zero before keeps everything.
func (s *Store) RetainAlerts(before time.Time) (removed int, err error) {
	if before.IsZero() {
		return 0, nil
	}
	_, hi, ok := span(time.Time{}, before)
	if !ok {
		return 0, nil
	}
	err = s.update("retain alerts", func(tx *bolt.Tx) error {
		removed = 0
		b := tx.Bucket([]byte(bucketAlerts))
		if b == nil {
			return nil
		}
		var drop [][]byte
		c := b.Cursor()
		for k, v := c.First(); k != nil; k, v = c.Next() {
			r, err := decodeAlertRecord(k, v)
			if err != nil {
				return err
			}
			if !r.Closed.IsZero() && r.Closed.UnixNano() <= hi {
				drop = append(drop, bytes.Clone(k))
			}
		}
		for _, k := range drop {
			if err := b.Delete(k); err != nil {
				return err
			}
		}
		removed = len(drop)
		return nil
	})
	if err != nil {
		return 0, fmt.Errorf("retain alerts: %w", err)
	}
	return removed, nil
}

// verifyAlerts checks that every stored alert record has its header.
func verifyAlerts(tx *bolt.Tx) error {
	b := tx.Bucket([]byte(bucketAlerts))
	if b == nil {
		return nil
	}
	return b.ForEach(func(k, v []byte) error {
		_, err := decodeAlertRecord(k, v)
		return err
	})
}
