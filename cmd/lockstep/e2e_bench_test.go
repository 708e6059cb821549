package main

// End-to-end throughput of lockstep run, each figure a ratio against a
// ceiling measured in the same benchmark, on the same machine, against the
// same in-process NATS server, alternating ceiling and daemon round by round:
//
//   - BenchmarkE2ECore: core NATS. Ceiling: a bare subscriber that only counts
//     messages. Daemon: lockstep run --source core in this process (decode,
//     validate, window update, and its store commits of raw values and
//     bucket states).
//   - BenchmarkE2EJetStream: a stream filled beforehand. Ceiling: an ack-none
//     consumer that only counts messages. Daemon: lockstep run --source
//     jetstream with a new durable consumer and a new store each round (bbolt
//     commits, AckAll after each commit).
//
// Each has three sub-benchmarks, the daemon's store settings: default (fsync,
// a commit every 1000 values), batch10k ([store] commit_values = 10000) and
// nosync ([store] no_sync = true, which is for tests only: it shows what the
// loop does when commits cost no fsync).
//
// Each round times the stretch between 5 % and 95 % of the messages, so that
// start-up and the last partial commit (up to the commit interval) weigh on
// neither side. Run with
//
//	go test -run '^$' -bench 'E2E' -benchtime 3x ./cmd/lockstep
//
// and read the metrics ceiling-msg/s, daemon-msg/s and ratio (medians over
// the rounds), and beside them the CPU this process (NATS server,
// publisher and consumer together) spent per message in each kind of
// round, and how many cores it kept busy: when that is the machine's CPU
// count, the ratio is set by CPU per message, not by any one goroutine.
// The daemon's progress is read by polling (its /metrics for core, the
// consumer's ack floor for JetStream) with the crossing times interpolated
// between polls; the ceilings stamp their own.

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"sync/atomic"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
)

// benchStoreVariants are the daemon's store settings the benchmarks
// compare, as config files.
var benchStoreVariants = []struct{ name, config string }{
	{"default", ""},
	{"batch10k", "[store]\ncommit_values = 10000\n"},
	{"nosync", "[store]\nno_sync = true\n"},
}

// benchConfig writes a variant's config file into dir and returns the
// arguments that use it.
func benchConfig(tb testing.TB, dir, config string) []string {
	tb.Helper()
	if config == "" {
		return nil
	}
	path := filepath.Join(dir, "lockstep.toml")
	if err := os.WriteFile(path, []byte(config), 0o644); err != nil {
		tb.Fatal(err)
	}
	return []string{"--config", path}
}

const (
	benchCoreMessages = 300_000
	benchJSMessages   = 300_000
	benchStream       = "BENCH"
	benchBatch        = 1000 // pull batch of both JetStream consumers: the daemon's default
)

// benchMsg is one message ready to publish.
type benchMsg struct {
	subject string
	data    []byte
}

// benchMessages returns n measurements of the test plant as messages, with
// event times over the last ten minutes.
func benchMessages(n int) []benchMsg {
	ms := e2eGenerate(e2ePlant(), n, 7, time.Now().Add(-10*time.Minute), 9*time.Minute)
	out := make([]benchMsg, n)
	for i, m := range ms {
		out[i] = benchMsg{subject: m.subject("meas"), data: m.payload()}
	}
	return out
}

// span records when a count passes 5 % and 95 % of n, and gives the rate
// between the two. A count seen by polling passes a mark between two polls;
// the time is interpolated linearly between them, so that the poll interval
// costs little precision.
type span struct {
	n        int64
	lo, hi   int64
	tLo, tHi time.Time

	prevC int64
	prevT time.Time
}

func newSpan(n int) *span {
	return &span{n: int64(n), lo: int64(n) / 20, hi: int64(n) - int64(n)/20}
}

// see records count c observed at t; it reports whether c reached n.
func (s *span) see(c int64, t time.Time) bool {
	cross := func(mark int64) time.Time {
		if s.prevT.IsZero() || c <= s.prevC {
			return t
		}
		f := float64(mark-s.prevC) / float64(c-s.prevC)
		return s.prevT.Add(time.Duration(f * float64(t.Sub(s.prevT))))
	}
	if s.tLo.IsZero() && c >= s.lo {
		s.tLo = cross(s.lo)
	}
	if s.tHi.IsZero() && c >= s.hi {
		s.tHi = cross(s.hi)
	}
	s.prevC, s.prevT = c, t
	return c >= s.n
}

func (s *span) rate() float64 {
	if s.tLo.IsZero() || s.tHi.IsZero() || !s.tHi.After(s.tLo) {
		return 0
	}
	return float64(s.hi-s.lo) / s.tHi.Sub(s.tLo).Seconds()
}

// pollCount polls count every interval until it reaches the span's n, or
// stops growing for stall, or limit passes; it returns the last count. A
// count is stamped with the middle of the call that read it.
func pollCount(s *span, interval time.Duration, count func() (int64, error), stall, limit time.Duration) (int64, error) {
	deadline := time.Now().Add(limit)
	var last int64 = -1
	lastChange := time.Now()
	for {
		t0 := time.Now()
		c, err := count()
		now := time.Now()
		if err == nil {
			if s.see(c, t0.Add(now.Sub(t0)/2)) {
				return c, nil
			}
			if c != last {
				last, lastChange = c, now
			}
		}
		switch {
		case now.After(deadline):
			return last, fmt.Errorf("count %d of %d after %v (last error: %v)", last, s.n, limit, err)
		case now.Sub(lastChange) > stall:
			return last, fmt.Errorf("count stuck at %d of %d for %v (last error: %v)", last, s.n, stall, err)
		}
		time.Sleep(interval)
	}
}

// publishCore publishes msgs on nc as fast as the connection takes them.
func publishCore(nc *nats.Conn, msgs []benchMsg) error {
	for i := range msgs {
		if err := nc.Publish(msgs[i].subject, msgs[i].data); err != nil {
			return err
		}
	}
	return nc.Flush()
}

// inProcDaemon is lockstep run in this process, for the benchmarks.
type inProcDaemon struct {
	http   string
	cancel context.CancelFunc
	done   chan error
}

// startInProc runs lockstep run with args (plus --http on a free loopback
// port and a store in dir) and returns once it has restored its state and
// subscribed.
func startInProc(tb testing.TB, dir string, args ...string) *inProcDaemon {
	tb.Helper()
	ctx, cancel := context.WithCancel(context.Background())
	d := &inProcDaemon{http: e2eFreeAddr(tb), cancel: cancel, done: make(chan error, 1)}
	started := make(chan struct{})
	cmd := &RunCommand{
		Stdout: io.Discard, Stderr: io.Discard,
		Getenv:  func(string) string { return "" },
		started: func(runInfo) { close(started) },
	}
	args = append([]string{"--http", d.http, "--store", filepath.Join(dir, "lockstep.db"), "--log-level", "warn"}, args...)
	go func() { d.done <- cmd.Run(ctx, args) }()
	select {
	case <-started:
	case err := <-d.done:
		cancel()
		tb.Fatalf("lockstep run %s: %v", strings.Join(args, " "), err)
	case <-time.After(15 * time.Second):
		cancel()
		tb.Fatalf("lockstep run did not start within 15 s")
	}
	return d
}

// stop stops the daemon and waits for Run to return.
func (d *inProcDaemon) stop(tb testing.TB) {
	tb.Helper()
	d.cancel()
	select {
	case err := <-d.done:
		if err != nil {
			tb.Errorf("lockstep run: %v", err)
		}
	case <-time.After(10 * time.Second):
		tb.Errorf("lockstep run did not stop within 10 s")
	}
}

// metric reads one sample from the daemon's /metrics, e.g.
// lockstep_messages_total{result="applied"}.
func (d *inProcDaemon) metric(sample string) (int64, error) {
	resp, err := e2eHTTPClient.Get("http://" + d.http + "/metrics")
	if err != nil {
		return 0, err
	}
	defer resp.Body.Close()
	sc := bufio.NewScanner(resp.Body)
	sc.Buffer(make([]byte, 0, 64<<10), 1<<20)
	for sc.Scan() {
		if rest, ok := strings.CutPrefix(sc.Text(), sample+" "); ok {
			v, err := strconv.ParseFloat(strings.TrimSpace(rest), 64)
			return int64(v), err
		}
	}
	if err := sc.Err(); err != nil {
		return 0, err
	}
	return 0, fmt.Errorf("no sample %s in /metrics", sample)
}

// checkAllAdded fails the benchmark unless every message went into a window:
// a benchmark of rejects or drops would measure something else.
func (d *inProcDaemon) checkAllAdded(tb testing.TB, n int) {
	tb.Helper()
	added, err := d.metric(`lockstep_window_values_total{result="added"}`)
	if err != nil || added != int64(n) {
		rej, _ := d.metric(`lockstep_measurements_total{result="rejected"}`)
		drop, _ := d.metric(`lockstep_dropped_messages_total`)
		tb.Fatalf("daemon added %d of %d values to its windows (%v); rejected %d, dropped %d", added, n, err, rej, drop)
	}
}

// roundResult is one timed round: the rate between the 5 % and 95 % marks,
// and the CPU the whole process (NATS server, publisher and consumer
// alike) used over the round, per message and per second of wall time.
type roundResult struct {
	rate      float64 // messages per second
	cpuPerMsg float64 // µs of CPU per message
	cores     float64 // CPU seconds per wall second: 2 on a busy 2-CPU machine
}

// cpuMeter measures a round's CPU time and wall time.
type cpuMeter struct {
	cpu0 time.Duration
	t0   time.Time
	ok   bool
}

func startCPU() cpuMeter {
	c, ok := processCPU()
	return cpuMeter{cpu0: c, t0: time.Now(), ok: ok}
}

// result returns the CPU used since the meter started, over n messages;
// the caller sets the rate.
func (m cpuMeter) result(n int) roundResult {
	var r roundResult
	c, ok := processCPU()
	wall := time.Since(m.t0)
	if m.ok && ok && n > 0 && wall > 0 {
		r.cpuPerMsg = float64((c - m.cpu0).Microseconds()) / float64(n)
		r.cores = (c - m.cpu0).Seconds() / wall.Seconds()
	}
	return r
}

// median returns the median of xs (xs is sorted in place).
func median(xs []float64) float64 {
	slices.Sort(xs)
	n := len(xs)
	if n == 0 {
		return 0
	}
	if n%2 == 1 {
		return xs[n/2]
	}
	return (xs[n/2-1] + xs[n/2]) / 2
}

// report reports the medians and their ratio, and the CPU figures: when
// the cores are busy (cores near the machine's CPU count) the ratio is one
// of CPU per message, since server, publisher and consumer share them.
func report(b *testing.B, ceiling, daemon []roundResult, target float64) {
	med := func(rs []roundResult, f func(roundResult) float64) float64 {
		xs := make([]float64, len(rs))
		for i, r := range rs {
			xs[i] = f(r)
		}
		return median(xs)
	}
	rate := func(r roundResult) float64 { return r.rate }
	cpu := func(r roundResult) float64 { return r.cpuPerMsg }
	cores := func(r roundResult) float64 { return r.cores }
	c, d := med(ceiling, rate), med(daemon, rate)
	b.ReportMetric(c, "ceiling-msg/s")
	b.ReportMetric(d, "daemon-msg/s")
	if c > 0 {
		b.ReportMetric(d/c, "ratio")
	}
	cc, dc := med(ceiling, cpu), med(daemon, cpu)
	b.ReportMetric(cc, "ceiling-cpu-µs/msg")
	b.ReportMetric(dc, "daemon-cpu-µs/msg")
	b.Logf("rounds: ceiling %.0f msg/s, daemon %.0f msg/s (median of %d), ratio %.3f (target ≥ %.2f)", c, d, len(daemon), d/c, target)
	b.Logf("process CPU per message (server, publisher, consumer): ceiling %.2f µs, daemon %.2f µs; cores busy: ceiling %.2f, daemon %.2f of %d",
		cc, dc, med(ceiling, cores), med(daemon, cores), runtime.NumCPU())
}

// BenchmarkE2ECore compares lockstep run on core NATS with a bare
// subscriber that only counts messages, 300 000 messages per round each.
// The target is a ratio of at least 0.75.
func BenchmarkE2ECore(b *testing.B) {
	ns := startE2ENATS(b, "")
	msgs := benchMessages(benchCoreMessages)
	pub := ns.connect(b)
	for _, v := range benchStoreVariants {
		b.Run(v.name, func(b *testing.B) {
			var ceiling, daemon []roundResult
			round := 0
			for b.Loop() {
				round++
				ceiling = append(ceiling, coreBare(b, ns, pub, msgs))
				daemon = append(daemon, coreDaemon(b, ns, pub, msgs, v.config, round))
			}
			report(b, ceiling, daemon, 0.75)
		})
	}
}

// coreBare times a subscriber that counts messages.
func coreBare(b *testing.B, ns *e2eNATS, pub *nats.Conn, msgs []benchMsg) roundResult {
	b.Helper()
	nc := ns.connect(b)
	defer nc.Close()
	var n atomic.Int64
	s := newSpan(len(msgs))
	// The callback stamps the two marks itself: no polling error.
	var tLo, tHi atomic.Int64
	lo, hi := s.lo, s.hi
	sub, err := nc.Subscribe("meas.>", func(*nats.Msg) {
		c := n.Add(1)
		if c == lo {
			tLo.Store(time.Now().UnixNano())
		}
		if c == hi {
			tHi.Store(time.Now().UnixNano())
		}
	})
	if err != nil {
		b.Fatal(err)
	}
	if err := sub.SetPendingLimits(-1, -1); err != nil {
		b.Fatal(err)
	}
	if err := nc.Flush(); err != nil {
		b.Fatal(err)
	}
	meter := startCPU()
	if err := publishCore(pub, msgs); err != nil {
		b.Fatal(err)
	}
	got, err := pollCount(newSpan(len(msgs)), 10*time.Millisecond, func() (int64, error) { return n.Load(), nil }, 2*time.Second, 60*time.Second)
	res := meter.result(len(msgs))
	if err != nil {
		b.Fatalf("bare subscriber: %v", err)
	}
	_ = sub.Unsubscribe()
	s.tLo, s.tHi = time.Unix(0, tLo.Load()), time.Unix(0, tHi.Load())
	if got != int64(len(msgs)) {
		b.Fatalf("bare subscriber got %d of %d", got, len(msgs))
	}
	res.rate = s.rate()
	return res
}

// coreDaemon times lockstep run --source core on the same messages.
func coreDaemon(b *testing.B, ns *e2eNATS, pub *nats.Conn, msgs []benchMsg, config string, round int) roundResult {
	b.Helper()
	dir := b.TempDir()
	d := startInProc(b, dir, append(benchConfig(b, dir, config),
		"--nats", ns.url(), "--source", "core", "--subjects", "meas.>",
		"--bucket", "1m", "--window", "30m", "--evaluate-every", "10s")...)
	defer d.stop(b)
	done := make(chan error, 1)
	meter := startCPU()
	go func() { done <- publishCore(pub, msgs) }()
	s := newSpan(len(msgs))
	_, err := pollCount(s, 25*time.Millisecond, func() (int64, error) { return d.metric(`lockstep_messages_total{result="applied"}`) }, 2*time.Second, 60*time.Second)
	res := meter.result(len(msgs))
	if perr := <-done; perr != nil {
		b.Fatal(perr)
	}
	if err != nil {
		b.Fatalf("daemon, round %d: %v", round, err)
	}
	d.checkAllAdded(b, len(msgs))
	res.rate = s.rate()
	return res
}

// BenchmarkE2EJetStream compares lockstep run on a JetStream durable
// consumer (bbolt commits with fsync, acks after each) with an ack-none
// consumer that only counts messages, on a stream of 300 000 messages
// filled once. The target is a ratio of at least 0.65.
func BenchmarkE2EJetStream(b *testing.B) {
	ns := startE2ENATS(b, "")
	nc := ns.connect(b)
	e2eCreateStream(b, nc, benchStream, "meas.>")
	ms := e2eGenerate(e2ePlant(), benchJSMessages, 8, time.Now().Add(-10*time.Minute), 9*time.Minute)
	e2ePublish(b, nc, "meas", ms, 4096)
	round := 0
	for _, v := range benchStoreVariants {
		b.Run(v.name, func(b *testing.B) {
			var ceiling, daemon []roundResult
			for b.Loop() {
				round++ // consumer names stay unique across the variants
				ceiling = append(ceiling, jsAckNone(b, nc, round))
				daemon = append(daemon, jsDaemon(b, ns, nc, v.config, round))
			}
			report(b, ceiling, daemon, 0.65)
		})
	}
}

// jsAckNone times an ack-none pull consumer that counts messages.
func jsAckNone(b *testing.B, nc *nats.Conn, round int) roundResult {
	b.Helper()
	js, err := jetstream.New(nc)
	if err != nil {
		b.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	name := fmt.Sprintf("acknone-%d", round)
	cons, err := js.CreateConsumer(ctx, benchStream, jetstream.ConsumerConfig{
		Durable: name, AckPolicy: jetstream.AckNonePolicy, DeliverPolicy: jetstream.DeliverAllPolicy,
	})
	if err != nil {
		b.Fatal(err)
	}
	defer func() { _ = js.DeleteConsumer(context.Background(), benchStream, name) }()
	s := newSpan(benchJSMessages)
	var n, tLo, tHi atomic.Int64
	lo, hi := s.lo, s.hi
	meter := startCPU()
	cc, err := cons.Consume(func(jetstream.Msg) {
		c := n.Add(1)
		if c == lo {
			tLo.Store(time.Now().UnixNano())
		}
		if c == hi {
			tHi.Store(time.Now().UnixNano())
		}
	}, jetstream.PullMaxMessages(benchBatch))
	if err != nil {
		b.Fatal(err)
	}
	got, err := pollCount(newSpan(benchJSMessages), 10*time.Millisecond, func() (int64, error) { return n.Load(), nil }, 2*time.Second, 60*time.Second)
	res := meter.result(benchJSMessages)
	cc.Stop()
	if err != nil {
		b.Fatalf("ack-none consumer: %v", err)
	}
	if got != benchJSMessages {
		b.Fatalf("ack-none consumer got %d of %d", got, benchJSMessages)
	}
	s.tLo, s.tHi = time.Unix(0, tLo.Load()), time.Unix(0, tHi.Load())
	res.rate = s.rate()
	return res
}

// jsDaemon times lockstep run on a new durable consumer with a new store,
// by the consumer's ack floor: the daemon acks after the commit.
func jsDaemon(b *testing.B, ns *e2eNATS, nc *nats.Conn, config string, round int) roundResult {
	b.Helper()
	durable := fmt.Sprintf("lockstep-%d", round)
	s := newSpan(benchJSMessages)
	dir := b.TempDir()
	// The meter includes the daemon's start (creating its consumer and an
	// empty store: a few milliseconds), which consumes already.
	meter := startCPU()
	d := startInProc(b, dir, append(benchConfig(b, dir, config),
		"--nats", ns.url(), "--source", "jetstream", "--stream", benchStream, "--consumer", durable,
		"--bucket", "1m", "--window", "30m", "--evaluate-every", "10s")...)
	defer d.stop(b)
	_, err := pollCount(s, 10*time.Millisecond, func() (int64, error) {
		p, err := e2eProgressOf(nc, benchStream, durable)
		if err == nil && !p.Exists {
			err = errors.New("no consumer yet")
		}
		return int64(p.AckFloor), err
	}, 5*time.Second, 120*time.Second)
	res := meter.result(benchJSMessages)
	if err != nil {
		b.Fatalf("daemon, round %d: %v", round, err)
	}
	d.checkAllAdded(b, benchJSMessages)
	res.rate = s.rate()
	return res
}
