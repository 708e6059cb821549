package main

// Helpers of the end-to-end tests (crash_test.go, partition_test.go,
// e2e_bench_test.go): an in-process NATS server that can be stopped and
// started again on the same port and store directory, the daemon as a
// subprocess (this test binary, re-executed), a seeded plant of known
// measurements with the sums an uninterrupted computation gives, and readers
// of the daemon's store, HTTP API and JetStream consumer.

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"net"
	"net/http"
	"os"
	"os/exec"
	"os/signal"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	natstest "github.com/nats-io/nats-server/v2/test"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"github.com/lockstep-project/lockstep/stats"
	"github.com/lockstep-project/lockstep/store"
)

// daemonEnv, when set in the environment, makes TestE2EDaemonProcess run
// lockstep with the arguments it holds (a JSON array) instead of testing.
// Re-executing the test binary needs no toolchain at test time and runs the
// very code under test, with the race detector when the test has it.
const daemonEnv = "LOCKSTEP_E2E_DAEMON_ARGS"

// TestE2EDaemonProcess is not a test: it is the daemon subprocess of the
// end-to-end tests (see daemonProc). Without daemonEnv it does nothing.
func TestE2EDaemonProcess(t *testing.T) {
	raw := os.Getenv(daemonEnv)
	if raw == "" {
		t.Skip("helper process of the end-to-end tests; runs only when re-executed by them")
	}
	var args []string
	if err := json.Unmarshal([]byte(raw), &args); err != nil {
		fmt.Fprintf(os.Stderr, "e2e daemon: bad %s: %v\n", daemonEnv, err)
		os.Exit(2)
	}
	// The test holds the other end of standard input while it wants this
	// process: if the test process dies without cleaning up (a timeout
	// panic, say), the pipe closes and the daemon goes with it.
	go func() {
		_, _ = io.Copy(io.Discard, os.Stdin)
		fmt.Fprintln(os.Stderr, "e2e daemon: the test process is gone; exiting")
		os.Exit(3)
	}()
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	code := run(ctx, args, strings.NewReader(""), os.Stdout, os.Stderr)
	stop()
	os.Exit(code)
}

// ---------------------------------------------------------------------------
// NATS server

// e2eNATS is an in-process NATS server with JetStream on loopback. The
// first start picks a free port; restarts keep the port and the JetStream
// store directory, as a broker restart in a plant would.
type e2eNATS struct {
	t    testing.TB
	opts server.Options
	srv  *server.Server
}

// startE2ENATS starts a server with JetStream in t.TempDir(). configFile, if
// not empty, is a nats-server configuration file read first (for subject
// mappings); the test settings (loopback, free port, JetStream, store
// directory, no logs, no signal handlers) override what it says.
func startE2ENATS(t testing.TB, configFile string) *e2eNATS {
	t.Helper()
	opts := natstest.DefaultTestOptions
	if configFile != "" {
		o, err := server.ProcessConfigFile(configFile)
		if err != nil {
			t.Fatalf("nats-server config %s: %v", configFile, err)
		}
		opts = *o
		opts.NoLog, opts.NoSigs = true, true
	}
	opts.Host = "127.0.0.1"
	opts.Port = -1
	opts.JetStream = true
	opts.StoreDir = t.TempDir()
	ns := &e2eNATS{t: t, opts: opts}
	ns.start()
	ns.opts.Port = ns.srv.Addr().(*net.TCPAddr).Port
	t.Cleanup(ns.stop)
	return ns
}

func (ns *e2eNATS) start() {
	ns.t.Helper()
	opts := ns.opts
	ns.srv = natstest.RunServer(&opts)
	if !ns.srv.JetStreamEnabled() {
		ns.t.Fatalf("nats-server started without JetStream")
	}
}

// stop shuts the server down and waits for it; a second stop does nothing.
func (ns *e2eNATS) stop() {
	if ns.srv == nil {
		return
	}
	ns.srv.Shutdown()
	ns.srv.WaitForShutdown()
	ns.srv = nil
}

func (ns *e2eNATS) url() string {
	return "nats://" + net.JoinHostPort(ns.opts.Host, strconv.Itoa(ns.opts.Port))
}

// connect opens a client connection that reconnects quickly and forever, and
// closes it at cleanup.
func (ns *e2eNATS) connect(t testing.TB) *nats.Conn {
	t.Helper()
	nc, err := nats.Connect(ns.url(),
		nats.Name(t.Name()),
		nats.MaxReconnects(-1),
		nats.ReconnectWait(20*time.Millisecond),
		nats.ReconnectBufSize(-1), // publish nothing while disconnected: fail instead
	)
	if err != nil {
		t.Fatalf("connect to %s: %v", ns.url(), err)
	}
	t.Cleanup(nc.Close)
	return nc
}

// e2eCreateStream creates a file-backed stream on subjects.
func e2eCreateStream(t testing.TB, nc *nats.Conn, name string, subjects ...string) {
	t.Helper()
	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatalf("jetstream: %v", err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	if _, err := js.CreateStream(ctx, jetstream.StreamConfig{
		Name:     name,
		Subjects: subjects,
		Storage:  jetstream.FileStorage,
	}); err != nil {
		t.Fatalf("create stream %s: %v", name, err)
	}
}

// e2eProgress is what the server says of a durable consumer.
type e2eProgress struct {
	AckFloor      uint64 // stream sequence below which everything is acked
	NumPending    uint64 // matching messages not yet delivered
	NumAckPending int    // delivered, not acked
	Exists        bool
}

// done reports that every message matching the consumer was delivered and
// acknowledged; the daemon acks only after the commit that holds them.
func (p e2eProgress) done() bool {
	return p.Exists && p.NumPending == 0 && p.NumAckPending == 0
}

// e2eProgressOf asks the server about a durable consumer. A consumer that does
// not exist yet has Exists false and no error.
func e2eProgressOf(nc *nats.Conn, stream, durable string) (e2eProgress, error) {
	js, err := jetstream.New(nc)
	if err != nil {
		return e2eProgress{}, err
	}
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
	defer cancel()
	c, err := js.Consumer(ctx, stream, durable)
	if errors.Is(err, jetstream.ErrConsumerNotFound) {
		return e2eProgress{}, nil
	}
	if err != nil {
		return e2eProgress{}, err
	}
	ci := c.CachedInfo()
	return e2eProgress{
		AckFloor:      ci.AckFloor.Stream,
		NumPending:    ci.NumPending,
		NumAckPending: ci.NumAckPending,
		Exists:        true,
	}, nil
}

// ---------------------------------------------------------------------------
// The plant: seeded measurements with known values

// e2eChar is one characteristic of the test plant: its groups, nominal,
// spread, decimals and the offset of each group from the nominal.
type e2eChar struct {
	Name     string
	Groups   []string
	Nominal  float64
	SD       float64
	Decimals int
	Offsets  []float64 // per group, in units
}

// e2ePlant is four characteristics of a filling and sealing plant; two
// of them have a group that runs off nominal.
func e2ePlant() []e2eChar {
	return []e2eChar{
		{Name: "fill-weight", Groups: []string{"L1", "L2", "L3", "L4", "L5"}, Nominal: 500, SD: 0.8, Decimals: 3, Offsets: []float64{0, 0, 0.6, 0, 0}},
		{Name: "seal-temp", Groups: []string{"J1", "J2", "J3", "J4"}, Nominal: 185.5, SD: 1.2, Decimals: 1, Offsets: []float64{0, 0, 0, 0}},
		{Name: "cap-torque", Groups: []string{"H1", "H2", "H3", "H4", "H5", "H6"}, Nominal: 2.35, SD: 0.05, Decimals: 3, Offsets: []float64{0, 0, 0, 0, -0.04, 0}},
		{Name: "fill-height", Groups: []string{"N1", "N2", "N3"}, Nominal: 120, SD: 0.3, Decimals: 2, Offsets: []float64{0, 0, 0}},
	}
}

// e2eMeasurement is one published message.
type e2eMeasurement struct {
	Char, Group string
	Text        string // decimal text, as sent
	Time        time.Time
	ID          string
}

func (m e2eMeasurement) subject(prefix string) string { return prefix + "." + m.Char + "." + m.Group }

func (m e2eMeasurement) payload() []byte {
	b := make([]byte, 0, 96)
	b = append(b, `{"value":"`...)
	b = append(b, m.Text...)
	b = append(b, `","time":"`...)
	b = m.Time.AppendFormat(b, time.RFC3339Nano)
	b = append(b, `","id":"`...)
	b = append(b, m.ID...)
	b = append(b, `"}`...)
	return b
}

// e2eGenerate returns n measurements of the plant, seeded: a characteristic
// and a group drawn at random for each, its value normal around the
// nominal plus the group's offset, rounded to the characteristic's
// decimals. Event times rise with the index, evenly from start over span,
// so that in stream order nothing is late.
func e2eGenerate(plant []e2eChar, n int, seed uint64, start time.Time, span time.Duration) []e2eMeasurement {
	rng := rand.New(rand.NewPCG(seed, seed^0x9e3779b97f4a7c15))
	out := make([]e2eMeasurement, n)
	step := span / time.Duration(n)
	for i := range out {
		c := plant[rng.IntN(len(plant))]
		g := rng.IntN(len(c.Groups))
		v := c.Nominal + c.Offsets[g] + c.SD*rng.NormFloat64()
		out[i] = e2eMeasurement{
			Char:  c.Name,
			Group: c.Groups[g],
			Text:  strconv.FormatFloat(v, 'f', c.Decimals, 64),
			Time:  start.Add(time.Duration(i) * step).UTC(),
			ID:    c.Name + "-" + c.Groups[g] + "-" + strconv.Itoa(i),
		}
	}
	return out
}

// e2ePublish publishes ms to JetStream under prefix with PublishAsync, at most
// window publishes in flight, and waits for every acknowledgement. It fails
// the test on any publish error: the tests need to know exactly what the
// stream holds.
func e2ePublish(t testing.TB, nc *nats.Conn, prefix string, ms []e2eMeasurement, window int) {
	t.Helper()
	js, err := jetstream.New(nc, jetstream.WithPublishAsyncMaxPending(window))
	if err != nil {
		t.Fatalf("jetstream: %v", err)
	}
	var (
		mu    sync.Mutex
		first error
	)
	fail := func(err error) {
		mu.Lock()
		if first == nil {
			first = err
		}
		mu.Unlock()
	}
	futures := make([]jetstream.PubAckFuture, 0, window)
	check := func() {
		for _, f := range futures {
			select {
			case <-f.Ok():
			case err := <-f.Err():
				fail(fmt.Errorf("publish %s: %w", f.Msg().Subject, err))
			case <-time.After(30 * time.Second):
				fail(fmt.Errorf("publish %s: no acknowledgement in 30 s", f.Msg().Subject))
			}
		}
		futures = futures[:0]
	}
	for i := range ms {
		f, err := js.PublishAsync(ms[i].subject(prefix), ms[i].payload())
		if err != nil {
			t.Fatalf("publish message %d: %v", i, err)
		}
		futures = append(futures, f)
		if len(futures) == window {
			check()
		}
	}
	check()
	if first != nil {
		t.Fatal(first)
	}
}

// ---------------------------------------------------------------------------
// Expected sums and the store's sums

// e2eGroupKey names one group of one characteristic.
type e2eGroupKey struct{ Char, Group string }

// e2eBucketKey names one group in one bucket of one characteristic.
type e2eBucketKey struct {
	Char, Group string
	Start       int64 // Unix nanoseconds
}

// e2eSums are per-group accumulators and per-bucket counts.
type e2eSums struct {
	Groups  map[e2eGroupKey]stats.Accumulator
	Buckets map[e2eBucketKey]int64
}

// e2eBucketStart is window's bucketing: floor(t / width) on Unix time.
func e2eBucketStart(t time.Time, width time.Duration) int64 {
	ns, w := t.UnixNano(), int64(width)
	q := ns / w
	if ns%w < 0 {
		q--
	}
	return q * w
}

// e2eExpectedSums is the uninterrupted computation: every measurement, in
// publish order, centred exactly on its characteristic's reference as the
// store holds it and added (Welford) to its group's accumulator in its
// bucket; the buckets of a group are then merged in time order, as
// e2eReadStore merges the stored ones. refs maps characteristic to reference.
func e2eExpectedSums(t testing.TB, ms []e2eMeasurement, refs map[string]stats.Reference, width time.Duration) e2eSums {
	t.Helper()
	type acc struct {
		key e2eBucketKey
		acc stats.Accumulator
	}
	perBucket := map[e2eBucketKey]*stats.Accumulator{}
	for _, m := range ms {
		ref, ok := refs[m.Char]
		if !ok {
			t.Fatalf("no reference for characteristic %s", m.Char)
		}
		v, _, err := ref.CentreString(m.Text)
		if err != nil {
			t.Fatalf("centre %q: %v", m.Text, err)
		}
		k := e2eBucketKey{m.Char, m.Group, e2eBucketStart(m.Time, width)}
		a := perBucket[k]
		if a == nil {
			a = new(stats.Accumulator)
			perBucket[k] = a
		}
		a.Add(v)
	}
	all := make([]acc, 0, len(perBucket))
	for k, a := range perBucket {
		all = append(all, acc{k, *a})
	}
	return e2eMergeBuckets(all, func(a acc) (e2eBucketKey, stats.Accumulator) { return a.key, a.acc })
}

// e2eMergeBuckets merges bucket accumulators per group, in time order.
func e2eMergeBuckets[T any](items []T, get func(T) (e2eBucketKey, stats.Accumulator)) e2eSums {
	sort.Slice(items, func(i, j int) bool {
		ki, _ := get(items[i])
		kj, _ := get(items[j])
		if ki.Char != kj.Char {
			return ki.Char < kj.Char
		}
		if ki.Group != kj.Group {
			return ki.Group < kj.Group
		}
		return ki.Start < kj.Start
	})
	s := e2eSums{Groups: map[e2eGroupKey]stats.Accumulator{}, Buckets: map[e2eBucketKey]int64{}}
	for _, it := range items {
		k, a := get(it)
		g := e2eGroupKey{k.Char, k.Group}
		m := s.Groups[g]
		m.Merge(a)
		s.Groups[g] = m
		s.Buckets[k] += a.N
	}
	return s
}

// e2eStoreContents is what a stopped daemon's store holds.
type e2eStoreContents struct {
	Refs      map[string]stats.Reference
	Sums      e2eSums
	RawCount  map[e2eGroupKey]int64
	RawIDs    map[string]int // id → times stored
	RawNoID   int64          // raw values stored without an id
	RawBadTxt int64          // raw values whose text is not what was sent
	Cursor    uint64
}

// e2eReadStore opens a stopped daemon's store read-only and reads its
// characteristics, every bucket state (merged per group in time order) and
// every raw value. sent maps id → text, to check the stored text. consumer
// names the cursor to read.
func e2eReadStore(t testing.TB, path, consumer string, sent map[string]string) e2eStoreContents {
	t.Helper()
	st, err := store.OpenReadOnly(path, store.Options{Timeout: 5 * time.Second})
	if err != nil {
		t.Fatalf("open store %s: %v", path, err)
	}
	defer st.Close()
	if err := st.Verify(); err != nil {
		t.Errorf("store %s: Verify: %v", path, err)
	}
	chars, err := st.Characteristics()
	if err != nil {
		t.Fatalf("store characteristics: %v", err)
	}
	c := e2eStoreContents{
		Refs:     map[string]stats.Reference{},
		RawCount: map[e2eGroupKey]int64{},
		RawIDs:   map[string]int{},
	}
	var states []store.BucketState
	for _, ch := range chars {
		c.Refs[ch.Name] = stats.NewReference(ch.Reference)
		if err := st.Buckets(ch.Name, time.Time{}, time.Time{}, func(b store.BucketState) error {
			states = append(states, b)
			return nil
		}); err != nil {
			t.Fatalf("store buckets of %s: %v", ch.Name, err)
		}
		if err := st.Raw(ch.Name, time.Time{}, time.Time{}, func(r store.RawValue) error {
			c.RawCount[e2eGroupKey{r.Characteristic, r.Group}]++
			if r.ID == "" {
				c.RawNoID++
				return nil
			}
			c.RawIDs[r.ID]++
			if txt, ok := sent[r.ID]; ok && txt != r.Text {
				c.RawBadTxt++
			}
			return nil
		}); err != nil {
			t.Fatalf("store raw values of %s: %v", ch.Name, err)
		}
	}
	c.Sums = e2eMergeBuckets(states, func(b store.BucketState) (e2eBucketKey, stats.Accumulator) {
		return e2eBucketKey{b.Characteristic, b.Group, b.Start.UnixNano()}, b.Acc
	})
	if c.Cursor, err = st.Cursor(consumer); err != nil {
		t.Fatalf("store cursor: %v", err)
	}
	return c
}

// Tolerances of the comparison of means and M2 with the uninterrupted
// computation. Both sides sum the same centred float64 values of each
// bucket in the same order; they can differ only by rounding in how the
// daemon forms a bucket's state and merges partial sums, each merge
// costing a few ulps relative. With ~10⁴ values per group, ~10 buckets and
// values centred to within a few SD, that is below 1e-13 relative. The
// tolerances are 1e-10, three orders above that and five to six orders below
// the smallest effect of a single value counted twice or lost (a relative
// change of about 1/n ≈ 1e-4 in M2, and of about SD/n in the mean).
const (
	tolMeanSD = 1e-10 // |Δmean| ≤ tolMeanSD × SD
	tolM2Rel  = 1e-10 // |ΔM2| ≤ tolM2Rel × M2
)

// e2eCompareSums compares the store with the expected sums: counts per group
// and per bucket exactly, means and M2 to the tolerances above. It returns
// the largest relative differences seen, for the log.
func e2eCompareSums(t testing.TB, got, want e2eSums) (maxMean, maxM2 float64) {
	t.Helper()
	for k, w := range want.Groups {
		g, ok := got.Groups[k]
		if !ok {
			t.Errorf("%s/%s: not in the store (want n=%d)", k.Char, k.Group, w.N)
			continue
		}
		if g.N != w.N {
			t.Errorf("%s/%s: n = %d, want %d (%+d)", k.Char, k.Group, g.N, w.N, g.N-w.N)
		}
		sd := math.Sqrt(w.M2 / float64(w.N-1))
		dMean := math.Abs(g.Mean-w.Mean) / sd
		dM2 := math.Abs(g.M2-w.M2) / w.M2
		maxMean, maxM2 = max(maxMean, dMean), max(maxM2, dM2)
		if !(dMean <= tolMeanSD) {
			t.Errorf("%s/%s: mean = %.17g, want %.17g (differs by %.3g SD, tolerance %g)", k.Char, k.Group, g.Mean, w.Mean, dMean, tolMeanSD)
		}
		if !(dM2 <= tolM2Rel) {
			t.Errorf("%s/%s: M2 = %.17g, want %.17g (relative difference %.3g, tolerance %g)", k.Char, k.Group, g.M2, w.M2, dM2, tolM2Rel)
		}
	}
	for k, g := range got.Groups {
		if _, ok := want.Groups[k]; !ok {
			t.Errorf("%s/%s: in the store (n=%d) but never published", k.Char, k.Group, g.N)
		}
	}
	bad := 0
	for k, w := range want.Buckets {
		if g := got.Buckets[k]; g != w {
			if bad < 10 {
				t.Errorf("%s/%s bucket %s: n = %d, want %d", k.Char, k.Group, time.Unix(0, k.Start).UTC().Format(time.TimeOnly), g, w)
			}
			bad++
		}
	}
	for k, g := range got.Buckets {
		if _, ok := want.Buckets[k]; !ok {
			if bad < 10 {
				t.Errorf("%s/%s bucket %s: n = %d in the store, none published", k.Char, k.Group, time.Unix(0, k.Start).UTC().Format(time.TimeOnly), g)
			}
			bad++
		}
	}
	if bad > 0 {
		t.Errorf("%d bucket counts differ", bad)
	}
	return maxMean, maxM2
}

// e2eCompareRaw checks that every published measurement is stored as a raw
// value exactly once, with its text, and nothing else is.
func e2eCompareRaw(t testing.TB, c e2eStoreContents, ms []e2eMeasurement) {
	t.Helper()
	want := map[e2eGroupKey]int64{}
	for _, m := range ms {
		want[e2eGroupKey{m.Char, m.Group}]++
	}
	for k, w := range want {
		if g := c.RawCount[k]; g != w {
			t.Errorf("%s/%s: %d raw values stored, want %d (%+d)", k.Char, k.Group, g, w, g-w)
		}
	}
	if c.RawNoID > 0 {
		t.Errorf("%d raw values stored without their id", c.RawNoID)
	}
	dup, missing := 0, 0
	for _, m := range ms {
		switch n := c.RawIDs[m.ID]; {
		case n == 0:
			missing++
		case n > 1:
			dup++
		}
	}
	if dup > 0 || missing > 0 {
		t.Errorf("raw values by id: %d stored more than once, %d missing (of %d)", dup, missing, len(ms))
	}
	if len(c.RawIDs) > len(ms) {
		t.Errorf("%d raw ids stored, %d published", len(c.RawIDs), len(ms))
	}
	if c.RawBadTxt > 0 {
		t.Errorf("%d raw values stored with a text other than the one sent", c.RawBadTxt)
	}
}

// e2ePublishedCounts counts the measurements per group.
func e2ePublishedCounts(ms []e2eMeasurement) map[e2eGroupKey]int64 {
	n := map[e2eGroupKey]int64{}
	for _, m := range ms {
		n[e2eGroupKey{m.Char, m.Group}]++
	}
	return n
}

// ---------------------------------------------------------------------------
// The daemon subprocess

// daemonProc is lockstep run as a subprocess, restartable with the same
// arguments. Its standard output and error go to one log file, appended
// across restarts and shown when the test fails.
type daemonProc struct {
	t       testing.TB
	name    string
	args    []string
	logPath string
	http    string // host:port of its HTTP API

	cmd    *exec.Cmd
	exited chan struct{}
	err    error // of Wait, once exited is closed
	starts int
}

// newDaemonProc prepares a daemon; it starts nothing. The HTTP address is picked
// free on loopback.
func newDaemonProc(t testing.TB, name string, args []string) *daemonProc {
	t.Helper()
	d := &daemonProc{
		t:       t,
		name:    name,
		logPath: filepath.Join(t.TempDir(), name+".log"),
		http:    e2eFreeAddr(t),
	}
	d.args = append([]string{"run", "--http", d.http}, args...)
	t.Cleanup(func() {
		d.kill()
		if t.Failed() {
			d.dumpLog()
		}
	})
	return d
}

// e2eFreeAddr returns a loopback host:port that was free a moment ago.
func e2eFreeAddr(t testing.TB) string {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatalf("listen: %v", err)
	}
	addr := l.Addr().String()
	l.Close()
	return addr
}

// start starts the daemon process.
func (d *daemonProc) start() {
	d.t.Helper()
	if d.running() {
		d.t.Fatalf("%s: start while running", d.name)
	}
	args, err := json.Marshal(d.args)
	if err != nil {
		d.t.Fatal(err)
	}
	logf, err := os.OpenFile(d.logPath, os.O_CREATE|os.O_WRONLY|os.O_APPEND, 0o644)
	if err != nil {
		d.t.Fatal(err)
	}
	d.starts++
	fmt.Fprintf(logf, "=== start %d: lockstep %s\n", d.starts, strings.Join(d.args, " "))
	cmd := exec.Command(os.Args[0], "-test.run=^TestE2EDaemonProcess$", "-test.count=1")
	cmd.Env = append(os.Environ(), daemonEnv+"="+string(args))
	cmd.Stdout, cmd.Stderr = logf, logf
	// Standard input is a pipe whose write end this process holds until
	// Wait returns (see TestE2EDaemonProcess).
	if _, err := cmd.StdinPipe(); err != nil {
		logf.Close()
		d.t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		logf.Close()
		d.t.Fatalf("%s: start: %v", d.name, err)
	}
	d.cmd = cmd
	d.exited = make(chan struct{})
	go func(ch chan struct{}) {
		d.err = cmd.Wait()
		logf.Close()
		close(ch)
	}(d.exited)
}

func (d *daemonProc) running() bool {
	if d.cmd == nil {
		return false
	}
	select {
	case <-d.exited:
		return false
	default:
		return true
	}
}

// kill sends SIGKILL and waits for the process to go.
func (d *daemonProc) kill() {
	if d.cmd == nil {
		return
	}
	_ = d.cmd.Process.Signal(syscall.SIGKILL)
	<-d.exited
	d.cmd = nil
}

// stop sends SIGTERM and waits up to limit for the process to exit. It
// returns how long that took and the exit code; it kills the process and
// fails the test when the limit passes.
func (d *daemonProc) stop(limit time.Duration) (time.Duration, int) {
	d.t.Helper()
	if !d.running() {
		d.t.Fatalf("%s: not running at stop (exited: %v)", d.name, d.err)
	}
	t0 := time.Now()
	_ = d.cmd.Process.Signal(syscall.SIGTERM)
	select {
	case <-d.exited:
	case <-time.After(limit):
		d.kill()
		d.t.Fatalf("%s: did not exit within %v of SIGTERM", d.name, limit)
	}
	took := time.Since(t0)
	code := d.cmd.ProcessState.ExitCode()
	d.cmd = nil
	return took, code
}

// requireRunning fails the test when the daemon has exited by itself.
func (d *daemonProc) requireRunning() {
	d.t.Helper()
	if d.cmd != nil && !d.running() {
		d.t.Fatalf("%s exited by itself: %v\n%s", d.name, d.err, d.logTail(40))
	}
}

func (d *daemonProc) logTail(lines int) string {
	b, err := os.ReadFile(d.logPath)
	if err != nil {
		return ""
	}
	ls := strings.Split(strings.TrimRight(string(b), "\n"), "\n")
	if len(ls) > lines {
		ls = ls[len(ls)-lines:]
	}
	return strings.Join(ls, "\n")
}

func (d *daemonProc) dumpLog() {
	d.t.Logf("log of %s (last 80 lines):\n%s", d.name, d.logTail(80))
}

// waitReady polls /readyz until it answers 200.
func (d *daemonProc) waitReady(limit time.Duration) {
	d.t.Helper()
	deadline := time.Now().Add(limit)
	for {
		d.requireRunning()
		code, _, err := e2eGet(d.http, "/readyz")
		if err == nil && code == http.StatusOK {
			return
		}
		if time.Now().After(deadline) {
			d.t.Fatalf("%s: not ready within %v (last: %d %v)", d.name, limit, code, err)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

var e2eHTTPClient = &http.Client{Timeout: 5 * time.Second}

func e2eGet(addr, path string) (int, []byte, error) {
	resp, err := e2eHTTPClient.Get("http://" + addr + path)
	if err != nil {
		return 0, nil, err
	}
	defer resp.Body.Close()
	var buf bytes.Buffer
	_, err = buf.ReadFrom(resp.Body)
	return resp.StatusCode, buf.Bytes(), err
}

// e2eAPICount is one group's count in the window of GET
// /api/v1/characteristics/{name}, silent groups included.
type e2eAPICount struct {
	Name string `json:"name"`
	N    int64  `json:"n"`
}

// e2eAPICharacteristic is the part of GET /api/v1/characteristics/{name} the
// tests read.
type e2eAPICharacteristic struct {
	Counts []e2eAPICount `json:"counts"`
}

// windowCounts returns the per-group counts of a characteristic's latest
// report over HTTP.
func (d *daemonProc) windowCounts(char string) (map[string]int64, error) {
	code, body, err := e2eGet(d.http, "/api/v1/characteristics/"+char)
	if err != nil {
		return nil, err
	}
	if code != http.StatusOK {
		return nil, fmt.Errorf("GET %s: %d %s", char, code, bytes.TrimSpace(body))
	}
	var c e2eAPICharacteristic
	if err := json.Unmarshal(body, &c); err != nil {
		return nil, fmt.Errorf("GET %s: %w", char, err)
	}
	out := map[string]int64{}
	for _, g := range c.Counts {
		out[g.Name] = g.N
	}
	return out, nil
}

// waitWindowCounts polls the HTTP API until the window counts of every
// characteristic in want equal want; after limit it marks the test failed
// with the last difference and returns, so that the store can be compared
// too.
func (d *daemonProc) waitWindowCounts(want map[e2eGroupKey]int64, limit time.Duration) {
	d.t.Helper()
	byChar := map[string]map[string]int64{}
	for k, n := range want {
		if byChar[k.Char] == nil {
			byChar[k.Char] = map[string]int64{}
		}
		byChar[k.Char][k.Group] = n
	}
	deadline := time.Now().Add(limit)
	var last string
	for {
		d.requireRunning()
		last = ""
		for char, w := range byChar {
			got, err := d.windowCounts(char)
			if err != nil {
				last = err.Error()
				break
			}
			if diff := e2eCountDiff(got, w); diff != "" {
				last = char + ": " + diff
				break
			}
		}
		if last == "" {
			return
		}
		if time.Now().After(deadline) {
			d.t.Errorf("%s: window counts over HTTP not as published within %v: %s", d.name, limit, last)
			return
		}
		time.Sleep(50 * time.Millisecond)
	}
}

func e2eCountDiff(got, want map[string]int64) string {
	var diffs []string
	for g, w := range want {
		if got[g] != w {
			diffs = append(diffs, fmt.Sprintf("%s %d, want %d", g, got[g], w))
		}
	}
	for g, n := range got {
		if _, ok := want[g]; !ok {
			diffs = append(diffs, fmt.Sprintf("%s %d, want none", g, n))
		}
	}
	sort.Strings(diffs)
	return strings.Join(diffs, "; ")
}

// e2eWaitDone polls the durable consumer until every message matching it was
// delivered and acknowledged, while the daemon runs.
func e2eWaitDone(t testing.TB, nc *nats.Conn, stream, durable string, d *daemonProc, limit time.Duration) e2eProgress {
	t.Helper()
	deadline := time.Now().Add(limit)
	var (
		p   e2eProgress
		err error
	)
	for {
		d.requireRunning()
		p, err = e2eProgressOf(nc, stream, durable)
		if err == nil && p.done() {
			return p
		}
		if time.Now().After(deadline) {
			t.Fatalf("consumer %s not caught up within %v: %+v, %v", durable, limit, p, err)
		}
		time.Sleep(20 * time.Millisecond)
	}
}
