package ingest

import (
	"context"
	"errors"
	"fmt"
	"sync/atomic"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/rs/zerolog"
)

// fixedClock returns a clock stuck at t.
func fixedClock(t time.Time) func() time.Time { return func() time.Time { return t } }

// fetchN fetches until n messages arrived, failing after d.
func fetchN(t testing.TB, src Source, n int, d time.Duration) []Msg {
	t.Helper()
	ctx := testCtx(t, d)
	var got []Msg
	for len(got) < n {
		batch, err := src.Fetch(ctx, n-len(got), 50*time.Millisecond)
		if err != nil {
			t.Fatalf("Fetch after %d of %d messages: %v", len(got), n, err)
		}
		got = append(got, batch...)
	}
	return got
}

func TestCoreSourceFetch(t *testing.T) {
	ts := runTestServer(t)
	nc := ts.connect(t, zerolog.Nop())
	arrived := time.Date(2026, 3, 1, 8, 0, 0, 0, time.UTC)
	src, err := NewCoreSource(nc, "fill.>", CoreOptions{Now: fixedClock(arrived)})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = src.Close() })

	// Nothing published: an empty batch after maxWait, not an error.
	start := time.Now()
	batch, err := src.Fetch(context.Background(), 10, 30*time.Millisecond)
	if err != nil || len(batch) != 0 {
		t.Fatalf("Fetch on an idle subject = %d messages, %v; want none, nil", len(batch), err)
	}
	if waited := time.Since(start); waited < 30*time.Millisecond {
		t.Errorf("Fetch on an idle subject returned after %v, before maxWait", waited)
	}

	pub := ts.connect(t, zerolog.Nop())
	const n = 100
	for i := range n {
		if err := pub.Publish(fmt.Sprintf("fill.line%d", i%4), fmt.Appendf(nil, `{"value":%d}`, i)); err != nil {
			t.Fatal(err)
		}
	}
	if err := pub.Flush(); err != nil {
		t.Fatal(err)
	}
	// max is respected.
	first, err := src.Fetch(testCtx(t, 5*time.Second), 7, time.Second)
	if err != nil {
		t.Fatal(err)
	}
	if len(first) == 0 || len(first) > 7 {
		t.Fatalf("Fetch(max 7) returned %d messages", len(first))
	}
	got := append(first, fetchN(t, src, n-len(first), 5*time.Second)...)
	for i, m := range got {
		wantSubj, wantData := fmt.Sprintf("fill.line%d", i%4), fmt.Sprintf(`{"value":%d}`, i)
		if m.Subject != wantSubj || string(m.Data) != wantData || m.Seq != 0 || !m.Stored.IsZero() || !m.Arrived.Equal(arrived) {
			t.Fatalf("message %d = %+v; want subject %s, data %s, no seq, arrived %v", i, m, wantSubj, wantData, arrived)
		}
	}
	if err := src.Ack(12345); err != nil {
		t.Errorf("Ack on core = %v; want nil (no-op)", err)
	}
	st := src.Stats()
	if st.Delivered != n || st.Dropped != 0 || st.Buffered != 0 {
		t.Errorf("Stats = %+v; want %d delivered, none dropped or buffered", st, n)
	}
}

func TestCoreSourceFetchErrors(t *testing.T) {
	ts := runTestServer(t)
	nc := ts.connect(t, zerolog.Nop())
	src, err := NewCoreSource(nc, "seal.>", CoreOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := src.Fetch(context.Background(), 0, time.Millisecond); !errors.Is(err, ErrSourceOption) {
		t.Errorf("Fetch(max 0) = %v; want ErrSourceOption", err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	go func() { time.Sleep(20 * time.Millisecond); cancel() }()
	if _, err := src.Fetch(ctx, 10, time.Minute); !errors.Is(err, context.Canceled) {
		t.Errorf("Fetch with a cancelled context = %v; want context.Canceled", err)
	}
	if err := src.Close(); err != nil {
		t.Fatal(err)
	}
	if _, err := src.Fetch(context.Background(), 10, time.Minute); !errors.Is(err, ErrSourceClosed) {
		t.Errorf("Fetch after Close = %v; want ErrSourceClosed", err)
	}
	if err := src.Close(); err != nil {
		t.Errorf("second Close = %v", err)
	}
}

func TestCoreSourceConnectionClosed(t *testing.T) {
	ts := runTestServer(t)
	nc := ts.connect(t, zerolog.Nop())
	src, err := NewCoreSource(nc, "cap.>", CoreOptions{})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = src.Close() })
	if err := nc.Publish("cap.head1", []byte("1")); err != nil {
		t.Fatal(err)
	}
	fetchN(t, src, 1, 5*time.Second)
	nc.Close()
	ctx := testCtx(t, 5*time.Second)
	for {
		_, err := src.Fetch(ctx, 10, 50*time.Millisecond)
		if errors.Is(err, ErrSourceClosed) {
			break
		}
		if err != nil {
			t.Fatalf("Fetch after the connection closed = %v; want ErrSourceClosed", err)
		}
	}
}

func TestCoreSourceOptions(t *testing.T) {
	ts := runTestServer(t)
	nc := ts.connect(t, zerolog.Nop())
	for _, opt := range []CoreOptions{{PendingMsgs: -2}, {PendingBytes: -5}, {Buffer: -1}} {
		if _, err := NewCoreSource(nc, "x", opt); !errors.Is(err, ErrSourceOption) {
			t.Errorf("NewCoreSource(%+v) = %v; want ErrSourceOption", opt, err)
		}
	}
	if _, err := NewCoreSource(nc, "bad subject", CoreOptions{}); err == nil {
		t.Error("NewCoreSource with an invalid subject succeeded")
	}
	if _, err := NewCoreSource(nil, "x", CoreOptions{}); !errors.Is(err, ErrSourceOption) {
		t.Errorf("NewCoreSource(nil conn) = %v; want ErrSourceOption", err)
	}
}

// TestCoreSourceSlowConsumer overruns a subscription with tiny pending
// limits and checks that every message is either delivered or counted as
// dropped, and that the drop is logged.
func TestCoreSourceSlowConsumer(t *testing.T) {
	ts := runTestServer(t)
	var logs logBuffer
	nc := ts.connect(t, logs.logger())
	src, err := NewCoreSource(nc, "fill.>", CoreOptions{PendingMsgs: 10, PendingBytes: 1 << 20, Buffer: 5})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = src.Close() })

	pub := ts.connect(t, zerolog.Nop())
	const n = 2000
	for i := range n {
		if err := pub.Publish("fill.line1", fmt.Appendf(nil, "%d", i)); err != nil {
			t.Fatal(err)
		}
	}
	if err := pub.Flush(); err != nil {
		t.Fatal(err)
	}
	// Not fetching: the buffer (5) and the pending list (10) fill, the
	// rest is dropped.
	waitFor(t, 5*time.Second, "drops to be counted", func() bool { return src.Stats().Dropped >= n-20 })
	got := 0
	ctx := testCtx(t, 5*time.Second)
	for {
		batch, err := src.Fetch(ctx, 100, 100*time.Millisecond)
		if err != nil {
			t.Fatal(err)
		}
		if len(batch) == 0 {
			break
		}
		got += len(batch)
	}
	st := src.Stats()
	if st.Dropped == 0 || uint64(got) != st.Delivered || st.Delivered+st.Dropped != n {
		t.Errorf("delivered %d + dropped %d (fetched %d); want a sum of %d with drops", st.Delivered, st.Dropped, got, n)
	}
	waitFor(t, 5*time.Second, "the slow consumer to be logged", func() bool {
		return logs.count("nats slow consumer: messages dropped") > 0
	})
	if c := logs.count("nats slow consumer"); c != 1 {
		t.Errorf("%d slow-consumer log lines within the log interval; want 1:\n%s", c, logs.String())
	}
	// Dropped survives Close.
	_ = src.Close()
	if after := src.Stats().Dropped; after != st.Dropped {
		t.Errorf("Dropped after Close = %d; want %d", after, st.Dropped)
	}
}

// TestCoreSourceReconnect restarts the server under a subscription: the
// client resubscribes and delivery goes on.
func TestCoreSourceReconnect(t *testing.T) {
	ts := runTestServer(t)
	var logs logBuffer
	nc := ts.connect(t, logs.logger())
	src, err := NewCoreSource(nc, "fill.>", CoreOptions{})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = src.Close() })
	pub := ts.connect(t, zerolog.Nop())
	if err := pub.Publish("fill.line1", []byte("before")); err != nil {
		t.Fatal(err)
	}
	fetchN(t, src, 1, 5*time.Second)

	ts.restart()
	waitFor(t, 10*time.Second, "both connections to reconnect", func() bool {
		return nc.IsConnected() && pub.IsConnected() && nc.Stats().Reconnects > 0
	})
	// The subscription is re-established asynchronously: publish until one
	// arrives.
	ctx := testCtx(t, 10*time.Second)
	var got []Msg
	for len(got) == 0 {
		if err := pub.Publish("fill.line1", []byte("after")); err != nil {
			t.Fatal(err)
		}
		if got, err = src.Fetch(ctx, 10, 50*time.Millisecond); err != nil {
			t.Fatal(err)
		}
	}
	if string(got[0].Data) != "after" {
		t.Errorf("after reconnect got %q", got[0].Data)
	}
	if st := src.Stats(); st.Reconnects == 0 {
		t.Errorf("Stats().Reconnects = 0 after a server restart")
	}
	for _, want := range []string{"nats disconnected", "nats reconnected"} {
		if logs.count(want) == 0 {
			t.Errorf("no %q in the log:\n%s", want, logs.String())
		}
	}
}

// benchPayload is a typical measurement message.
var benchPayload = []byte(`{"value":"500.125","time":"2026-03-01T08:00:00.250Z","unit":"g","id":"f-000001"}`)

// publishN publishes n copies of benchPayload as fast as the connection
// takes them.
func publishN(b *testing.B, nc *nats.Conn, subject string, n int) {
	for range n {
		if err := nc.Publish(subject, benchPayload); err != nil {
			b.Error(err)
			return
		}
	}
	if err := nc.Flush(); err != nil {
		b.Error(err)
	}
}

// BenchmarkCoreBare is the ceiling for BenchmarkCoreSourceFetch: a
// subscriber that only counts, with no pending limits.
func BenchmarkCoreBare(b *testing.B) {
	ts := runTestServer(b)
	nc := ts.connect(b, zerolog.Nop())
	pub := ts.connect(b, zerolog.Nop())
	var count atomic.Int64
	sub, err := nc.Subscribe("bench.>", func(*nats.Msg) { count.Add(1) })
	if err != nil {
		b.Fatal(err)
	}
	if err := sub.SetPendingLimits(-1, -1); err != nil {
		b.Fatal(err)
	}
	if err := nc.Flush(); err != nil {
		b.Fatal(err)
	}
	b.ResetTimer()
	start := time.Now()
	go publishN(b, pub, "bench.fill.line1", b.N)
	deadline := time.Now().Add(time.Minute)
	for count.Load() < int64(b.N) && time.Now().Before(deadline) {
		time.Sleep(time.Millisecond)
	}
	elapsed := time.Since(start)
	b.StopTimer()
	dropped, _ := sub.Dropped()
	b.ReportMetric(float64(count.Load())/elapsed.Seconds(), "msg/s")
	b.ReportMetric(float64(dropped), "dropped")
}

// BenchmarkCoreSourceFetch runs CoreSource with its default pending limits
// and a caller that fetches batches of 1000 and does nothing else.
// Baseline: BenchmarkCoreBare.
func BenchmarkCoreSourceFetch(b *testing.B) {
	ts := runTestServer(b)
	nc := ts.connect(b, zerolog.Nop())
	pub := ts.connect(b, zerolog.Nop())
	src, err := NewCoreSource(nc, "bench.>", CoreOptions{})
	if err != nil {
		b.Fatal(err)
	}
	defer src.Close()
	ctx := context.Background()
	b.ResetTimer()
	start := time.Now()
	go publishN(b, pub, "bench.fill.line1", b.N)
	deadline := time.Now().Add(time.Minute)
	got := 0
	for time.Now().Before(deadline) {
		st := src.Stats()
		if int(st.Delivered+st.Dropped) >= b.N && st.Buffered == 0 {
			break
		}
		batch, err := src.Fetch(ctx, 1000, 10*time.Millisecond)
		if err != nil {
			b.Fatal(err)
		}
		got += len(batch)
	}
	elapsed := time.Since(start)
	b.StopTimer()
	b.ReportMetric(float64(got)/elapsed.Seconds(), "msg/s")
	b.ReportMetric(float64(src.Stats().Dropped), "dropped")
}
