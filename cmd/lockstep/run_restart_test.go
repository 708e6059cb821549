package main

import (
	"context"
	"fmt"
	"path/filepath"
	"strconv"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"github.com/lockstep-project/lockstep/stats"
	"github.com/lockstep-project/lockstep/store"
)

// TestRunRestart stops the daemon in the middle of a stream that is still
// being published, deletes its durable consumer so that the server delivers
// the whole stream again from the start, and runs the daemon again on the
// same store and server: each measurement is counted exactly once (the
// cursor skips what was applied), in the report, in the stored raw values
// and in the stored bucket states.
func TestRunRestart(t *testing.T) {
	if testing.Short() {
		t.Skip("publishes 20 000 messages")
	}
	ns := startNATS(t)
	nc := connectNATS(t, ns.url)
	groups := []string{"L1", "L2", "L3", "L4"}
	const perGroup = 5000
	var msgs []message
	ref := stats.NewReference(mustDecimal(t, "500.00"))
	want := make([]stats.Accumulator, len(groups))
	for i := range perGroup {
		for g, name := range groups {
			c := 50000 + g*2 + (i*31+g*7)%41 - 20
			text := fmt.Sprintf("%d.%02d", c/100, c%100)
			id := "m" + strconv.Itoa(len(msgs))
			msgs = append(msgs, message{"meas.fill-weight." + name, `{"value":"` + text + `","id":"` + id + `"}`})
			v, _, _ := ref.CentreString(text)
			want[g].Add(v)
		}
	}
	publishJS(t, nc, msgs[:len(msgs)/4])

	dir := t.TempDir()
	cfg := writeConfig(t, dir, `
[store]
no_sync = true
commit_values = 200
commit_interval = "10ms"

[characteristics.fill-weight]
unit = "g"
nominal = "500.00"
`)
	args := daemonArgs(ns.url, dir, "--config", cfg)
	d := startDaemon(t, args...)
	published := make(chan error, 1)
	go func() { published <- publishAll(ns.url, msgs[len(msgs)/4:]) }()
	d.waitMetric("lockstep_cursor_sequence", 1000, 10*time.Second)
	if err := d.stop(); err != nil {
		t.Fatalf("stop: %v", err)
	}
	first := storedState(t, filepath.Join(dir, "lockstep.db"), groups)
	if first.raw != int(first.cursor) {
		t.Fatalf("after the stop the store holds %d raw values with the cursor at %d; want equal", first.raw, first.cursor)
	}
	t.Logf("stopped at stream sequence %d of %d", first.cursor, len(msgs))
	if err := <-published; err != nil {
		t.Fatal(err)
	}

	// A consumer made anew starts at the first message: the daemon must
	// skip everything up to its cursor.
	js, _ := jetstream.New(nc)
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	if err := js.DeleteConsumer(ctx, defaultStream, defaultConsumer); err != nil {
		t.Fatalf("delete consumer: %v", err)
	}

	d = startDaemon(t, args...)
	d.waitMetric("lockstep_cursor_sequence", float64(len(msgs)), 20*time.Second)
	rep := d.freshReport("fill-weight", 5*time.Second)
	if v, _ := d.metric(`lockstep_messages_total{result="skipped"}`); v != float64(first.cursor) {
		t.Errorf("skipped %v messages; want the %d applied before the stop", v, first.cursor)
	}
	for g, name := range groups {
		c := rep.Counts[g]
		if c.Name != name || c.N != perGroup {
			t.Errorf("report counts %s: %d; want %s: %d", c.Name, c.N, name, perGroup)
		}
		if m := rep.Groups[g].Mean; m == nil || relErr(*m, ref.Uncentre(want[g].Mean)) > 1e-14 {
			t.Errorf("group %s mean %v; want %v", name, m, ref.Uncentre(want[g].Mean))
		}
	}
	if err := d.stop(); err != nil {
		t.Fatalf("stop: %v", err)
	}
	final := storedState(t, filepath.Join(dir, "lockstep.db"), groups)
	if final.raw != len(msgs) || final.cursor != uint64(len(msgs)) || final.dupIDs != 0 {
		t.Errorf("store: %d raw values, cursor %d, %d ids stored twice; want %d, %d, 0", final.raw, final.cursor, final.dupIDs, len(msgs), len(msgs))
	}
	for g, name := range groups {
		if got := final.buckets[name]; got.N != perGroup || relErr(got.Mean, want[g].Mean) > 1e-9 || relErr(got.M2, want[g].M2) > 1e-9 {
			t.Errorf("stored bucket states of %s merge to n=%d mean=%g M2=%g; want n=%d mean=%g M2=%g",
				name, got.N, got.Mean, got.M2, perGroup, want[g].Mean, want[g].M2)
		}
	}
}

// stored is what a stopped daemon left in its store.
type stored struct {
	cursor  uint64
	raw     int
	dupIDs  int
	buckets map[string]stats.Accumulator // merged over all bucket states
}

func storedState(t *testing.T, path string, groups []string) stored {
	t.Helper()
	st, err := store.OpenReadOnly(path, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	if err := st.Verify(); err != nil {
		t.Errorf("verify store: %v", err)
	}
	var s stored
	if s.cursor, err = st.Cursor(defaultConsumer); err != nil {
		t.Fatal(err)
	}
	ids := map[string]bool{}
	err = st.Raw("fill-weight", time.Time{}, time.Time{}, func(rv store.RawValue) error {
		s.raw++
		if ids[rv.ID] {
			s.dupIDs++
		}
		ids[rv.ID] = true
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	s.buckets = map[string]stats.Accumulator{}
	err = st.Buckets("fill-weight", time.Time{}, time.Time{}, func(bs store.BucketState) error {
		a := s.buckets[bs.Group]
		a.Merge(bs.Acc)
		s.buckets[bs.Group] = a
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// publishAll publishes msgs to JetStream on a connection of its own, for a
// goroutine.
func publishAll(url string, msgs []message) error {
	nc, err := nats.Connect(url)
	if err != nil {
		return err
	}
	defer nc.Close()
	js, err := jetstream.New(nc, jetstream.WithPublishAsyncMaxPending(1024))
	if err != nil {
		return err
	}
	for _, m := range msgs {
		if _, err := js.PublishAsync(m.subject, []byte(m.data), jetstream.WithStallWait(10*time.Second)); err != nil {
			return fmt.Errorf("publish: %w", err)
		}
	}
	select {
	case <-js.PublishAsyncComplete():
		return nil
	case <-time.After(20 * time.Second):
		return fmt.Errorf("publish: not acknowledged in 20 s")
	}
}

func mustDecimal(t *testing.T, s string) stats.Decimal {
	t.Helper()
	d, err := stats.ParseDecimal(s)
	if err != nil {
		t.Fatal(err)
	}
	return d
}
