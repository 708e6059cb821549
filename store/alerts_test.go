package store

import (
	"bytes"
	"errors"
	"math/rand/v2"
	"path/filepath"
	"strings"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"
)

func allAlerts(t testing.TB, s *Store) []AlertRecord {
	t.Helper()
	var out []AlertRecord
	if err := s.Alerts(func(r AlertRecord) error { out = append(out, r); return nil }); err != nil {
		t.Fatalf("alerts: %v", err)
	}
	return out
}

func TestAlertsCommitWithBatch(t *testing.T) {
	s, path := openTest(t)
	fw := fillWeight(t)
	t0 := shiftStart()
	// Alert records and monitor states go with a batch of values and its
	// cursor, in one transaction.
	commit(t, s, &Batch{
		Characteristics: []Characteristic{fw},
		Raw:             fillWeights(rand.New(rand.NewPCG(1, 2)), t0, time.Second, 10),
		Consumer:        "lockstep", Cursor: 10,
		Alerts: []AlertRecord{
			{ID: "b", Data: []byte("raised")},
			{ID: "a", Data: []byte("watch")},
		},
		MonitorStates: []MonitorState{{Characteristic: fw.Name, State: []byte{1, 2, 3}}},
	})
	got := allAlerts(t, s)
	if len(got) != 2 || got[0].ID != "a" || string(got[1].Data) != "raised" || !got[0].Closed.IsZero() {
		t.Fatalf("alerts %+v", got)
	}
	// Replaced by id; closed time kept.
	closed := t0.Add(time.Hour)
	commit(t, s, &Batch{Alerts: []AlertRecord{{ID: "b", Closed: closed, Data: []byte("cleared")}},
		MonitorStates: []MonitorState{{Characteristic: fw.Name, State: []byte{4}}}})
	got = allAlerts(t, s)
	if len(got) != 2 || string(got[1].Data) != "cleared" || !got[1].Closed.Equal(closed) {
		t.Fatalf("after replacing b: %+v", got)
	}
	st, err := s.MonitorState(fw.Name)
	if err != nil || !bytes.Equal(st, []byte{4}) {
		t.Fatalf("monitor state %v, %v; want [4]", st, err)
	}
	if st, err := s.MonitorState("seal-temp"); err != nil || st != nil {
		t.Fatalf("monitor state of a characteristic without one: %v, %v", st, err)
	}
	// A batch refused as applied writes no alert either.
	err = s.Commit(&Batch{Consumer: "lockstep", Cursor: 5, Alerts: []AlertRecord{{ID: "c", Data: []byte("x")}}})
	if !errors.Is(err, ErrApplied) {
		t.Fatalf("commit below the cursor: %v", err)
	}
	if n := len(allAlerts(t, s)); n != 2 {
		t.Errorf("%d alerts after a refused batch, want 2", n)
	}
	// Read-only readers (lockstep alerts list --store).
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	ro, err := OpenReadOnly(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if n := len(allAlerts(t, ro)); n != 2 {
		t.Errorf("read-only: %d alerts", n)
	}
	if err := ro.Close(); err != nil {
		t.Fatal(err)
	}
	if s, err = Open(path, Options{NoSync: true}); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = s.Close() })
}

func TestAlertsInvalid(t *testing.T) {
	s, _ := openTest(t)
	for name, b := range map[string]*Batch{
		"empty id":        {Alerts: []AlertRecord{{ID: ""}}},
		"long id":         {Alerts: []AlertRecord{{ID: strings.Repeat("x", 256)}}},
		"bad UTF-8 id":    {Alerts: []AlertRecord{{ID: "\xff"}}},
		"large record":    {Alerts: []AlertRecord{{ID: "a", Data: make([]byte, 1<<16+1)}}},
		"closed too late": {Alerts: []AlertRecord{{ID: "a", Closed: time.Date(2300, 1, 1, 0, 0, 0, 0, time.UTC)}}},
		"monitor no name": {MonitorStates: []MonitorState{{State: []byte{1}}}},
	} {
		if err := s.Commit(b); !errors.Is(err, ErrInvalid) {
			t.Errorf("%s: %v, want ErrInvalid", name, err)
		}
	}
	if n := len(allAlerts(t, s)); n != 0 {
		t.Errorf("%d alerts stored from invalid batches", n)
	}
}

func TestRetainAlerts(t *testing.T) {
	s, _ := openTest(t)
	t0 := shiftStart()
	commit(t, s, &Batch{Alerts: []AlertRecord{
		{ID: "open-old", Data: []byte("1")},
		{ID: "closed-old", Closed: t0, Data: []byte("2")},
		{ID: "closed-new", Closed: t0.Add(48 * time.Hour), Data: []byte("3")},
	}})
	if n, err := s.RetainAlerts(time.Time{}); n != 0 || err != nil {
		t.Fatalf("zero time: removed %d, %v", n, err)
	}
	n, err := s.RetainAlerts(t0.Add(24 * time.Hour))
	if err != nil || n != 1 {
		t.Fatalf("removed %d, %v; want 1", n, err)
	}
	got := allAlerts(t, s)
	if len(got) != 2 || got[0].ID != "closed-new" || got[1].ID != "open-old" {
		t.Fatalf("kept %+v, want closed-new and open-old", got)
	}
}

func TestAlertsCorruptRecord(t *testing.T) {
	path := filepath.Join(t.TempDir(), "lockstep.db")
	s, err := Open(path, Options{NoSync: true})
	if err != nil {
		t.Fatal(err)
	}
	commit(t, s, &Batch{Alerts: []AlertRecord{{ID: "a", Data: []byte("x")}}})
	if err := s.db.Update(func(tx *bolt.Tx) error {
		return tx.Bucket([]byte(bucketAlerts)).Put([]byte("a"), []byte{7})
	}); err != nil {
		t.Fatal(err)
	}
	if err := s.Alerts(func(AlertRecord) error { return nil }); !errors.Is(err, ErrCorrupt) {
		t.Errorf("reading a corrupt record: %v, want ErrCorrupt", err)
	}
	if err := s.Verify(); !errors.Is(err, ErrCorrupt) {
		t.Errorf("Verify of a corrupt record: %v, want ErrCorrupt", err)
	}
	_ = s.Close()
}

func FuzzDecodeAlertRecord(f *testing.F) {
	f.Add([]byte("a"), []byte{1, 0, 0, 0, 0, 0, 0, 0, 0, 'x'})
	f.Add([]byte("b"), []byte{1})
	f.Fuzz(func(t *testing.T, k, v []byte) {
		r, err := decodeAlertRecord(k, v)
		if err != nil {
			return
		}
		if !bytes.Equal(r.Data, v[alertHeaderBytes:]) {
			t.Fatalf("data %q, want %q", r.Data, v[alertHeaderBytes:])
		}
	})
}
