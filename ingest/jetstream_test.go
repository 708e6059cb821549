package ingest

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"sync/atomic"
	"testing"
	"time"

	natstest "github.com/nats-io/nats-server/v2/test"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
	"github.com/rs/zerolog"
)

func newJS(t testing.TB, nc *nats.Conn) jetstream.JetStream {
	t.Helper()
	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}
	return js
}

func createTestStream(t testing.TB, js jetstream.JetStream, name string, subjects ...string) {
	t.Helper()
	if _, err := js.CreateStream(testCtx(t, 5*time.Second), jetstream.StreamConfig{Name: name, Subjects: subjects}); err != nil {
		t.Fatalf("create stream %s: %v", name, err)
	}
}

// publishJS publishes messages first..last (inclusive) with their number as
// payload, waiting for each acknowledgement.
func publishJS(t testing.TB, js jetstream.JetStream, subject string, first, last int) {
	t.Helper()
	ctx := testCtx(t, 10*time.Second)
	for i := first; i <= last; i++ {
		if _, err := js.Publish(ctx, subject, fmt.Appendf(nil, "%d", i)); err != nil {
			t.Fatalf("publish %d: %v", i, err)
		}
	}
}

func openJS(t testing.TB, nc *nats.Conn, opt JetStreamOptions) *JetStreamSource {
	t.Helper()
	src, err := NewJetStreamSource(testCtx(t, 10*time.Second), nc, opt)
	if err != nil {
		t.Fatalf("NewJetStreamSource: %v", err)
	}
	t.Cleanup(func() { _ = src.Close() })
	return src
}

func ackFloor(t testing.TB, js jetstream.JetStream, stream, durable string) uint64 {
	t.Helper()
	ctx := testCtx(t, 5*time.Second)
	c, err := js.Consumer(ctx, stream, durable)
	if err != nil {
		t.Fatal(err)
	}
	info, err := c.Info(ctx)
	if err != nil {
		t.Fatal(err)
	}
	return info.AckFloor.Stream
}

// applier plays the daemon: it applies each message whose Seq is above the
// highest applied so far, requires those to come in stream order (the
// streams of these tests have one subject, so sequences are contiguous),
// and acks after each batch as if the store had committed it.
type applier struct {
	t        testing.TB
	applied  uint64
	skipped  int
	payloads map[uint64]string
	logs     *logBuffer
}

func (a *applier) run(src Source, until uint64, d time.Duration) {
	a.t.Helper()
	if a.payloads == nil {
		a.payloads = make(map[uint64]string)
	}
	ctx := testCtx(a.t, d)
	for a.applied < until {
		batch, err := src.Fetch(ctx, 100, 50*time.Millisecond)
		if err != nil {
			if a.logs != nil {
				a.t.Log(a.logs.String())
			}
			a.t.Fatalf("Fetch with %d of %d applied: %v", a.applied, until, err)
		}
		a.apply(batch)
		if len(batch) > 0 {
			if err := src.Ack(a.applied); err != nil {
				a.t.Fatalf("Ack(%d): %v", a.applied, err)
			}
		}
	}
}

// apply applies the messages of one batch.
func (a *applier) apply(batch []Msg) {
	a.t.Helper()
	if a.payloads == nil {
		a.payloads = make(map[uint64]string)
	}
	for _, m := range batch {
		if m.Seq <= a.applied {
			a.skipped++
			continue
		}
		if m.Seq != a.applied+1 {
			a.t.Fatalf("got seq %d after applying up to %d: a message was skipped", m.Seq, a.applied)
		}
		a.applied = m.Seq
		a.payloads[m.Seq] = string(m.Data)
	}
}

func TestJetStreamMissingStream(t *testing.T) {
	ts := runTestServer(t)
	nc := ts.connect(t, zerolog.Nop())
	_, err := NewJetStreamSource(testCtx(t, 5*time.Second), nc, JetStreamOptions{
		Stream: "MEASUREMENTS", Durable: "lockstep", FilterSubjects: []string{"fill.>"},
	})
	if !errors.Is(err, ErrStreamNotFound) {
		t.Fatalf("open a missing stream = %v; want ErrStreamNotFound", err)
	}
	for _, want := range []string{`"MEASUREMENTS"`, "--create-stream"} {
		if !strings.Contains(err.Error(), want) {
			t.Errorf("error %q does not mention %s", err, want)
		}
	}
}

func TestJetStreamCreateStream(t *testing.T) {
	ts := runTestServer(t)
	nc := ts.connect(t, zerolog.Nop())
	js := newJS(t, nc)
	opt := JetStreamOptions{Stream: "MEASUREMENTS", Durable: "lockstep", FilterSubjects: []string{"fill.>", "seal.>"}, CreateStream: true}
	src := openJS(t, nc, opt)
	st, err := js.Stream(testCtx(t, 5*time.Second), "MEASUREMENTS")
	if err != nil {
		t.Fatalf("stream not created: %v", err)
	}
	if got := strings.Join(st.CachedInfo().Config.Subjects, " "); got != "fill.> seal.>" {
		t.Errorf("created stream subjects %q; want the filter subjects", got)
	}
	c, err := js.Consumer(testCtx(t, 5*time.Second), "MEASUREMENTS", "lockstep")
	if err != nil {
		t.Fatal(err)
	}
	cfg := c.CachedInfo().Config
	if cfg.AckPolicy != jetstream.AckAllPolicy || cfg.MaxAckPending != 10*DefaultJetStreamBatch || cfg.AckWait != DefaultAckWait {
		t.Errorf("consumer config: ack %v, max ack pending %d, ack wait %v", cfg.AckPolicy, cfg.MaxAckPending, cfg.AckWait)
	}
	publishJS(t, js, "seal.jaw2", 1, 3)
	a := applier{t: t}
	a.run(src, 3, 5*time.Second)
	_ = src.Close()

	// A second open finds the stream and leaves it alone.
	opt.StreamSubjects = []string{"other.>"}
	src2 := openJS(t, nc, opt)
	st, _ = js.Stream(testCtx(t, 5*time.Second), "MEASUREMENTS")
	if got := strings.Join(st.CachedInfo().Config.Subjects, " "); got != "fill.> seal.>" {
		t.Errorf("existing stream changed to subjects %q", got)
	}
	_ = src2.Close()
}

func TestJetStreamDisabled(t *testing.T) {
	opts := natstest.DefaultTestOptions
	opts.Port = -1
	s := natstest.RunServer(&opts)
	t.Cleanup(func() { s.Shutdown(); s.WaitForShutdown() })
	nc, err := Connect(ConnOptions{URLs: []string{s.ClientURL()}})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(nc.Close)
	_, err = NewJetStreamSource(testCtx(t, 5*time.Second), nc, JetStreamOptions{Stream: "M", Durable: "d", CreateStream: true, FilterSubjects: []string{"x"}})
	if !errors.Is(err, ErrJetStreamDisabled) {
		t.Fatalf("open on a server without JetStream = %v; want ErrJetStreamDisabled", err)
	}
}

func TestJetStreamOptions(t *testing.T) {
	ts := runTestServer(t)
	nc := ts.connect(t, zerolog.Nop())
	ok := JetStreamOptions{Stream: "M", Durable: "d", FilterSubjects: []string{"fill.>"}}
	for _, tc := range []struct {
		name string
		edit func(*JetStreamOptions)
		want string
	}{
		{"no stream", func(o *JetStreamOptions) { o.Stream = "" }, "no stream"},
		{"dotted stream", func(o *JetStreamOptions) { o.Stream = "a.b" }, `stream name "a.b"`},
		{"no durable", func(o *JetStreamOptions) { o.Durable = "" }, "no durable"},
		{"durable with a space", func(o *JetStreamOptions) { o.Durable = "a b" }, `durable consumer name "a b"`},
		{"negative batch", func(o *JetStreamOptions) { o.Batch = -1 }, "batch -1"},
		{"max ack pending too small", func(o *JetStreamOptions) { o.Batch, o.MaxAckPending = 100, 150 }, "max ack pending 150"},
		{"negative ack wait", func(o *JetStreamOptions) { o.AckWait = -time.Second }, "ack wait"},
		{"create without subjects", func(o *JetStreamOptions) { o.FilterSubjects, o.CreateStream = nil, true }, "no subjects"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			opt := ok
			tc.edit(&opt)
			_, err := NewJetStreamSource(context.Background(), nc, opt)
			if !errors.Is(err, ErrSourceOption) || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("NewJetStreamSource = %v; want ErrSourceOption naming %q", err, tc.want)
			}
		})
	}
}

// TestJetStreamFetchAckRestart fetches, acknowledges part, closes and
// reopens the consumer: only the unacknowledged messages come again, with
// their stream sequences, at once rather than after the ack wait.
func TestJetStreamFetchAckRestart(t *testing.T) {
	ts := runTestServer(t)
	nc := ts.connect(t, zerolog.Nop())
	js := newJS(t, nc)
	createTestStream(t, js, "FILL", "fill.>")
	publishJS(t, js, "fill.line1", 1, 20)

	arrived := time.Date(2026, 3, 1, 8, 0, 0, 0, time.UTC)
	opt := JetStreamOptions{Stream: "FILL", Durable: "lockstep", Now: fixedClock(arrived)}
	src := openJS(t, nc, opt)
	got := fetchN(t, src, 20, 5*time.Second)
	for i, m := range got {
		if m.Seq != uint64(i+1) || string(m.Data) != fmt.Sprint(i+1) || m.Subject != "fill.line1" ||
			m.Stored.IsZero() || !m.Arrived.Equal(arrived) {
			t.Fatalf("message %d = %+v", i, m)
		}
	}
	if err := src.Ack(10); err != nil {
		t.Fatal(err)
	}
	waitFor(t, 5*time.Second, "ack floor 10", func() bool { return ackFloor(t, js, "FILL", "lockstep") == 10 })
	if st := src.Stats(); st.Delivered != 20 || st.AckedSeq != 10 || st.Redelivered != 0 {
		t.Errorf("Stats = %+v", st)
	}
	if err := src.Close(); err != nil {
		t.Fatal(err)
	}

	// AckWait stays at its default of 30 s: redelivery by timer would make
	// this test time out.
	start := time.Now()
	src = openJS(t, nc, opt)
	again := fetchN(t, src, 10, 5*time.Second)
	for i, m := range again {
		if m.Seq != uint64(11+i) || string(m.Data) != fmt.Sprint(11+i) {
			t.Fatalf("redelivered message %d = seq %d %q; want seq %d", i, m.Seq, m.Data, 11+i)
		}
	}
	if d := time.Since(start); d > 3*time.Second {
		t.Errorf("redelivery took %v", d)
	}
	if st := src.Stats(); st.Redelivered != 10 || st.Resets != 1 {
		t.Errorf("Stats after reopen = %+v; want 10 redelivered, 1 reset", st)
	}
	// Nothing else is pending; new messages follow.
	if batch, err := src.Fetch(context.Background(), 10, 50*time.Millisecond); err != nil || len(batch) != 0 {
		t.Fatalf("Fetch = %d messages, %v; want none", len(batch), err)
	}
	publishJS(t, js, "fill.line1", 21, 25)
	a := applier{t: t, applied: 20}
	a.run(src, 25, 5*time.Second)
	if a.skipped != 0 {
		t.Errorf("%d messages came twice", a.skipped)
	}
}

// TestJetStreamAckUpTo checks that Ack(upTo) covers the fetched messages at
// or below upTo and nothing above.
func TestJetStreamAckUpTo(t *testing.T) {
	ts := runTestServer(t)
	nc := ts.connect(t, zerolog.Nop())
	js := newJS(t, nc)
	createTestStream(t, js, "CAP", "cap.>")
	publishJS(t, js, "cap.head1", 1, 10)
	src := openJS(t, nc, JetStreamOptions{Stream: "CAP", Durable: "lockstep"})
	fetchN(t, src, 6, 5*time.Second) // 1..6; 7..10 are buffered or in flight

	for _, step := range []struct{ upTo, floor uint64 }{
		{0, 0},  // below everything: nothing
		{4, 4},  // 1..4
		{2, 4},  // already acknowledged: nothing
		{99, 6}, // every fetched message, none of the unfetched 7..10
	} {
		if err := src.Ack(step.upTo); err != nil {
			t.Fatalf("Ack(%d): %v", step.upTo, err)
		}
		if err := nc.Flush(); err != nil {
			t.Fatal(err)
		}
		waitFor(t, 5*time.Second, fmt.Sprintf("ack floor %d after Ack(%d)", step.floor, step.upTo), func() bool {
			return ackFloor(t, js, "CAP", "lockstep") == step.floor
		})
	}
	time.Sleep(50 * time.Millisecond)
	if f := ackFloor(t, js, "CAP", "lockstep"); f != 6 {
		t.Errorf("ack floor %d; want 6", f)
	}
	fetchN(t, src, 4, 5*time.Second)
	if err := src.Ack(10); err != nil {
		t.Fatal(err)
	}
	waitFor(t, 5*time.Second, "ack floor 10", func() bool { return ackFloor(t, js, "CAP", "lockstep") == 10 })
}

func TestJetStreamLag(t *testing.T) {
	ts := runTestServer(t)
	nc := ts.connect(t, zerolog.Nop())
	js := newJS(t, nc)
	createTestStream(t, js, "FILL", "fill.>")
	publishJS(t, js, "fill.line1", 1, 50)
	src := openJS(t, nc, JetStreamOptions{Stream: "FILL", Durable: "lockstep", Batch: 10})
	if lag := src.Lag(); lag != 0 {
		t.Errorf("Lag before any fetch = %d", lag)
	}
	fetchN(t, src, 5, 5*time.Second)
	if lag := src.Lag(); lag == 0 || lag > 45 {
		t.Errorf("Lag after 5 of 50 = %d; want 1..45", lag)
	}
	a := applier{t: t, applied: 5}
	a.run(src, 50, 5*time.Second)
	if lag := src.Lag(); lag != 0 {
		t.Errorf("Lag when caught up = %d", lag)
	}
}

// TestJetStreamGapReset makes another client take deliveries from the
// source's durable, so that the source sees a gap in consumer sequences,
// as after deliveries lost in a broken connection. The source must reset
// the consumer and still hand every message over in order.
func TestJetStreamGapReset(t *testing.T) {
	ts := runTestServer(t)
	var logs logBuffer
	nc := ts.connect(t, logs.logger())
	js := newJS(t, nc)
	createTestStream(t, js, "FILL", "fill.>")
	// Batch 10: the source pulls 10, then 5 more once 5 are left, so its
	// second pull request queues behind the other client's.
	src := openJS(t, nc, JetStreamOptions{Stream: "FILL", Durable: "lockstep", Batch: 10, Logger: logs.logger()})

	thiefConn := ts.connect(t, zerolog.Nop())
	thief, err := newJS(t, thiefConn).Consumer(testCtx(t, 5*time.Second), "FILL", "lockstep")
	if err != nil {
		t.Fatal(err)
	}
	type result struct {
		n   int
		err error
	}
	stolen := make(chan result, 1)
	go func() {
		batch, err := thief.Fetch(5, jetstream.FetchMaxWait(3*time.Second))
		if err != nil {
			stolen <- result{0, err}
			return
		}
		n := 0
		for range batch.Messages() {
			n++ // never acknowledged
		}
		stolen <- result{n, batch.Error()}
	}()
	// The source's pull request and the thief's wait side by side.
	waitFor(t, 5*time.Second, "two waiting pull requests", func() bool {
		info, err := thief.Info(testCtx(t, time.Second))
		return err == nil && info.NumWaiting >= 2
	})
	publishJS(t, js, "fill.line1", 1, 30)
	if r := <-stolen; r.n == 0 {
		t.Fatalf("the other client received nothing (%v): no gap was made", r.err)
	}
	a := applier{t: t, logs: &logs}
	a.run(src, 30, 10*time.Second) // well below the 30 s ack wait
	if st := src.Stats(); st.Resets < 2 {
		t.Errorf("Stats = %+v; want a reset after the gap", st)
	}
	if logs.count("deliveries lost in transit") == 0 {
		t.Errorf("the gap was not logged:\n%s", logs.String())
	}
}

// TestJetStreamServerRestart stops the server in the middle of a stream,
// publishes while it is down (which fails), starts it again on the same
// port and store, and checks that the source goes on and that every
// message is applied exactly once, in order.
func TestJetStreamServerRestart(t *testing.T) {
	if testing.Short() {
		t.Skip("restarts a JetStream server")
	}
	ts := runTestServer(t)
	var logs logBuffer
	nc := ts.connect(t, logs.logger())
	pubConn := ts.connect(t, zerolog.Nop())
	js := newJS(t, pubConn)
	createTestStream(t, js, "FILL", "fill.>")
	publishJS(t, js, "fill.line1", 1, 500)
	src := openJS(t, nc, JetStreamOptions{Stream: "FILL", Durable: "lockstep", Batch: 100})

	a := applier{t: t}
	a.run(src, 150, 10*time.Second)

	ts.stop()
	waitFor(t, 5*time.Second, "the disconnect", func() bool { return !nc.IsConnected() && !pubConn.IsConnected() })
	ctx, cancel := context.WithTimeout(context.Background(), 200*time.Millisecond)
	_, err := js.Publish(ctx, "fill.line1", []byte("lost"))
	cancel()
	if err == nil {
		t.Fatal("publish to a stopped server succeeded")
	}
	// Fetch returns what was buffered, then empty batches, without error.
	for {
		batch, err := src.Fetch(testCtx(t, time.Second), 100, 50*time.Millisecond)
		if err != nil {
			t.Fatalf("Fetch while disconnected: %v", err)
		}
		if len(batch) == 0 {
			break
		}
		a.apply(batch)
	}

	ts.start()
	waitFor(t, 10*time.Second, "the reconnect", func() bool { return nc.IsConnected() && pubConn.IsConnected() })
	publishJS(t, js, "fill.line1", 501, 800)
	// The publish that timed out was queued in the client and may have
	// been stored after the reconnect.
	info, err := js.Stream(testCtx(t, 5*time.Second), "FILL")
	if err != nil {
		t.Fatal(err)
	}
	last := info.CachedInfo().State.LastSeq
	if last != 800 && last != 801 {
		t.Fatalf("stream ends at %d; want 800 or 801", last)
	}
	a.run(src, last, 30*time.Second)
	want := 1
	for seq := uint64(1); seq <= last; seq++ {
		if p := a.payloads[seq]; p == "lost" && seq == 501 && last == 801 {
			continue
		} else if p != fmt.Sprint(want) {
			t.Fatalf("seq %d carried %q; want %d", seq, p, want)
		}
		want++
	}
	waitFor(t, 5*time.Second, "the final ack floor", func() bool { return ackFloor(t, js, "FILL", "lockstep") == last })
	if st := src.Stats(); st.Reconnects == 0 {
		t.Errorf("Stats = %+v; want a reconnect", st)
	}
	for _, want := range []string{"nats disconnected", "nats reconnected"} {
		if logs.count(want) == 0 {
			t.Errorf("no %q in the log:\n%s", want, logs.String())
		}
	}
	t.Logf("duplicates skipped: %d, stats %+v", a.skipped, src.Stats())
}

// TestJetStreamConsumerDeleted ends Fetch with ErrSourceClosed when the
// durable is deleted under the source.
func TestJetStreamConsumerDeleted(t *testing.T) {
	ts := runTestServer(t)
	nc := ts.connect(t, zerolog.Nop())
	js := newJS(t, nc)
	createTestStream(t, js, "FILL", "fill.>")
	var logs logBuffer
	src := openJS(t, nc, JetStreamOptions{Stream: "FILL", Durable: "lockstep", Logger: logs.logger()})
	// Delete it once the source's pull request waits on it, so that the
	// server tells the source at once.
	c, err := js.Consumer(testCtx(t, 5*time.Second), "FILL", "lockstep")
	if err != nil {
		t.Fatal(err)
	}
	waitFor(t, 5*time.Second, "the pull request", func() bool {
		info, err := c.Info(testCtx(t, time.Second))
		return err == nil && info.NumWaiting > 0
	})
	if err := js.DeleteConsumer(testCtx(t, 5*time.Second), "FILL", "lockstep"); err != nil {
		t.Fatal(err)
	}
	ctx := testCtx(t, 10*time.Second)
	for {
		_, err := src.Fetch(ctx, 10, 50*time.Millisecond)
		if errors.Is(err, ErrSourceClosed) {
			break
		}
		if err != nil {
			t.Fatalf("Fetch after the consumer was deleted = %v; want ErrSourceClosed\n%s", err, logs.String())
		}
	}
	if err := src.Close(); err != nil {
		t.Fatal(err)
	}

	// Without the server's notice (no pull request waiting), a missed
	// heartbeat or a "no responders" makes the source look the consumer
	// up, which finds it gone.
	src = openJS(t, nc, JetStreamOptions{Stream: "FILL", Durable: "second"})
	if err := src.checkConsumer(context.Background()); err != nil {
		t.Fatalf("checkConsumer on a live consumer = %v", err)
	}
	if err := js.DeleteConsumer(testCtx(t, 5*time.Second), "FILL", "second"); err != nil {
		t.Fatal(err)
	}
	if err := src.checkConsumer(context.Background()); !errors.Is(err, ErrSourceClosed) || !strings.Contains(err.Error(), `"second" was deleted`) {
		t.Errorf("checkConsumer on a deleted consumer = %v", err)
	}
}

// prefillStream publishes n benchmark messages asynchronously.
func prefillStream(b *testing.B, js jetstream.JetStream, subject string, n int) {
	b.Helper()
	for i := 0; i < n; i++ {
		if _, err := js.PublishAsync(subject, benchPayload); err != nil {
			b.Fatal(err)
		}
	}
	select {
	case <-js.PublishAsyncComplete():
	case <-time.After(2 * time.Minute):
		b.Fatal("prefill did not complete")
	}
}

func benchStream(b *testing.B) (*testServer, *nats.Conn, jetstream.JetStream) {
	b.Helper()
	ts := runTestServer(b)
	nc := ts.connect(b, zerolog.Nop())
	js := newJS(b, nc)
	createTestStream(b, js, "BENCH", "bench.>")
	prefillStream(b, js, "bench.fill.line1", b.N)
	return ts, nc, js
}

// BenchmarkJetStreamAckNone is the ceiling for the JetStream benchmarks: a
// consumer with AckPolicy none, read with Consume, that only counts.
func BenchmarkJetStreamAckNone(b *testing.B) {
	_, _, js := benchStream(b)
	c, err := js.CreateOrUpdateConsumer(context.Background(), "BENCH", jetstream.ConsumerConfig{
		Durable: "ceiling", AckPolicy: jetstream.AckNonePolicy,
	})
	if err != nil {
		b.Fatal(err)
	}
	var count atomic.Int64
	done := make(chan struct{})
	b.ResetTimer()
	start := time.Now()
	cc, err := c.Consume(func(jetstream.Msg) {
		if count.Add(1) == int64(b.N) {
			close(done)
		}
	}, jetstream.PullMaxMessages(DefaultJetStreamBatch))
	if err != nil {
		b.Fatal(err)
	}
	select {
	case <-done:
	case <-time.After(2 * time.Minute):
		b.Fatalf("received %d of %d", count.Load(), b.N)
	}
	elapsed := time.Since(start)
	b.StopTimer()
	cc.Stop()
	b.ReportMetric(float64(b.N)/elapsed.Seconds(), "msg/s")
}

// BenchmarkJetStreamFetchAckAll runs JetStreamSource as the daemon does:
// Fetch up to 1000, then Ack the last one. Baseline:
// BenchmarkJetStreamAckNone.
func BenchmarkJetStreamFetchAckAll(b *testing.B) {
	_, nc, _ := benchStream(b)
	b.ResetTimer()
	start := time.Now()
	src, err := NewJetStreamSource(context.Background(), nc, JetStreamOptions{Stream: "BENCH", Durable: "lockstep"})
	if err != nil {
		b.Fatal(err)
	}
	defer src.Close()
	ctx := context.Background()
	deadline := time.Now().Add(2 * time.Minute)
	got := 0
	for got < b.N && time.Now().Before(deadline) {
		batch, err := src.Fetch(ctx, 1000, 100*time.Millisecond)
		if err != nil {
			b.Fatal(err)
		}
		if len(batch) > 0 {
			got += len(batch)
			if err := src.Ack(batch[len(batch)-1].Seq); err != nil {
				b.Fatal(err)
			}
		}
	}
	elapsed := time.Since(start)
	b.StopTimer()
	if got < b.N {
		b.Fatalf("received %d of %d", got, b.N)
	}
	b.ReportMetric(float64(b.N)/elapsed.Seconds(), "msg/s")
}

// BenchmarkJetStreamPullFetchAckAll is the alternative JetStreamSource does
// not take: Consumer.Fetch of 1000 per call, AckAll on the last. Baseline:
// BenchmarkJetStreamAckNone.
func BenchmarkJetStreamPullFetchAckAll(b *testing.B) {
	_, _, js := benchStream(b)
	c, err := js.CreateOrUpdateConsumer(context.Background(), "BENCH", jetstream.ConsumerConfig{
		Durable: "fetch", AckPolicy: jetstream.AckAllPolicy, MaxAckPending: 10 * DefaultJetStreamBatch,
	})
	if err != nil {
		b.Fatal(err)
	}
	b.ResetTimer()
	start := time.Now()
	got := 0
	deadline := time.Now().Add(2 * time.Minute)
	for got < b.N && time.Now().Before(deadline) {
		batch, err := c.Fetch(1000, jetstream.FetchMaxWait(100*time.Millisecond))
		if err != nil {
			b.Fatal(err)
		}
		var last jetstream.Msg
		for m := range batch.Messages() {
			if _, err := m.Metadata(); err != nil {
				b.Fatal(err)
			}
			last = m
			got++
		}
		if last != nil {
			if err := last.Ack(); err != nil {
				b.Fatal(err)
			}
		}
	}
	elapsed := time.Since(start)
	b.StopTimer()
	if got < b.N {
		b.Fatalf("received %d of %d", got, b.N)
	}
	b.ReportMetric(float64(b.N)/elapsed.Seconds(), "msg/s")
}
