package main

import (
	"context"
	"errors"
	"fmt"
	"path/filepath"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"github.com/lockstep-project/lockstep/ingest"
	"github.com/lockstep-project/lockstep/store"
)

// fakeSource hands out prepared batches and records what is acked, checking
// that every ack comes after the commit that holds the acked messages.
type fakeSource struct {
	t       *testing.T
	st      *store.Store // to check the cursor at each ack; nil: no check
	mu      sync.Mutex
	batches [][]ingest.Msg
	acks    []uint64
	dropped uint64
	fetches int
}

var _ ingest.Source = (*fakeSource)(nil)

func (f *fakeSource) push(msgs ...ingest.Msg) {
	f.mu.Lock()
	f.batches = append(f.batches, msgs)
	f.mu.Unlock()
}

func (f *fakeSource) Fetch(ctx context.Context, _ int, maxWait time.Duration) ([]ingest.Msg, error) {
	f.mu.Lock()
	f.fetches++
	if len(f.batches) > 0 {
		b := f.batches[0]
		f.batches = f.batches[1:]
		f.mu.Unlock()
		return b, nil
	}
	f.mu.Unlock()
	select {
	case <-ctx.Done():
		return nil, ctx.Err()
	case <-time.After(min(maxWait, 2*time.Millisecond)):
		return nil, nil
	}
}

func (f *fakeSource) Ack(upTo uint64) error {
	if f.st != nil {
		cur, err := f.st.Cursor(defaultConsumer)
		if err != nil || cur < upTo {
			f.t.Errorf("ack up to %d with the stored cursor at %d (%v): acked before the commit", upTo, cur, err)
		}
	}
	f.mu.Lock()
	f.acks = append(f.acks, upTo)
	f.mu.Unlock()
	return nil
}

func (f *fakeSource) Stats() ingest.SourceStats {
	f.mu.Lock()
	defer f.mu.Unlock()
	return ingest.SourceStats{Dropped: f.dropped}
}

func (f *fakeSource) Close() error { return nil }

func (f *fakeSource) lastAck() uint64 {
	f.mu.Lock()
	defer f.mu.Unlock()
	if len(f.acks) == 0 {
		return 0
	}
	return f.acks[len(f.acks)-1]
}

func (f *fakeSource) drained() bool {
	f.mu.Lock()
	defer f.mu.Unlock()
	return len(f.batches) == 0 && f.fetches > 0
}

// deadBox collects dead letters.
type deadBox struct {
	mu   sync.Mutex
	subj []string
}

func (b *deadBox) Publish(subject string, _ []byte) bool {
	b.mu.Lock()
	b.subj = append(b.subj, subject)
	b.mu.Unlock()
	return true
}

// loopDaemon is a daemon on a store in dir, fed by a fakeSource.
type loopDaemon struct {
	*daemon
	store  *store.Store
	src    *fakeSource
	dead   *deadBox
	cancel context.CancelFunc
	done   chan error
}

// newLoopDaemon builds and restores a daemon for the config text (over the
// defaults, with a fast commit interval) on the store in dir.
func newLoopDaemon(t *testing.T, dir, text string) *loopDaemon {
	t.Helper()
	return newLoopDaemonOn(t, dir, text, nil)
}

// newLoopDaemonOn is newLoopDaemon with the store seen through wrap.
func newLoopDaemonOn(t *testing.T, dir, text string, wrap func(*store.Store) stateStore) *loopDaemon {
	t.Helper()
	cfg := DefaultConfig()
	cfg.NATS.URL = "nats://127.0.0.1:1"
	cfg.Store.CommitInterval = setDuration(5 * time.Millisecond)
	cfg.Defaults.EvaluateEvery = setDuration(10 * time.Millisecond)
	if err := ParseConfig(strings.NewReader(text), cfg); err != nil {
		t.Fatal(err)
	}
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	st, err := store.Open(filepath.Join(dir, "lockstep.db"), store.Options{NoSync: true})
	if err != nil {
		t.Fatal(err)
	}
	var ss stateStore = st
	if wrap != nil {
		ss = wrap(st)
	}
	d := newDaemon(cfg, ss, zerolog.Nop())
	src := &fakeSource{t: t}
	if cfg.NATS.Source == "jetstream" {
		src.st = st
	}
	box := &deadBox{}
	d.src, d.dead = src, box
	if d.val, err = ingest.NewValidator(validatorConfig(cfg)); err != nil {
		t.Fatal(err)
	}
	d.met.watch(d.val.Counters(), src, nil)
	if err := d.restore(time.Now()); err != nil {
		t.Fatal(err)
	}
	ld := &loopDaemon{daemon: d, store: st, src: src, dead: box}
	t.Cleanup(func() { ld.stop(t); _ = st.Close() })
	return ld
}

func (ld *loopDaemon) start() {
	ctx, cancel := context.WithCancel(context.Background())
	ld.cancel, ld.done = cancel, make(chan error, 1)
	go func() { ld.done <- ld.run(ctx) }()
}

// stop cancels the loop and waits for it.
func (ld *loopDaemon) stop(t *testing.T) {
	t.Helper()
	if ld.cancel == nil {
		return
	}
	ld.cancel()
	ld.cancel = nil
	if err := <-ld.done; err != nil {
		t.Errorf("run: %v", err)
	}
}

// close stops the loop and closes the store.
func (ld *loopDaemon) close(t *testing.T) {
	t.Helper()
	ld.stop(t)
	if err := ld.store.Close(); err != nil {
		t.Fatal(err)
	}
}

// jsMsgs returns JetStream messages with sequences from..to, one value each
// of group L<seq%3>.
func jsMsgs(from, to uint64) []ingest.Msg {
	var out []ingest.Msg
	now := time.Now()
	for seq := from; seq <= to; seq++ {
		out = append(out, ingest.Msg{
			Subject: fmt.Sprintf("meas.fill.L%d", seq%3), Data: fmt.Appendf(nil, `{"value":"500.%02d","id":"m%d"}`, seq%100, seq),
			Seq: seq, Stored: now, Arrived: now,
		})
	}
	return out
}

func waitUntil(t *testing.T, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(5 * time.Second)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("timed out waiting for %s", what)
		}
		time.Sleep(2 * time.Millisecond)
	}
}

func rawCount(t *testing.T, st stateStore, char string) int {
	t.Helper()
	n := 0
	if err := st.Raw(char, time.Time{}, time.Time{}, func(store.RawValue) error { n++; return nil }); err != nil {
		t.Fatal(err)
	}
	return n
}

// TestDaemonSkipsApplied: messages at or below the stored cursor (a
// redelivery after a restart) are skipped and acknowledged, never counted
// again; acks follow the commits.
func TestDaemonSkipsApplied(t *testing.T) {
	dir := t.TempDir()
	ld := newLoopDaemon(t, dir, "")
	ld.src.push(jsMsgs(1, 5)...)
	ld.start()
	waitUntil(t, "ack of 5", func() bool { return ld.src.lastAck() == 5 })
	ld.close(t)

	ld = newLoopDaemon(t, dir, "")
	if ld.cursor != 5 {
		t.Fatalf("restored cursor %d; want 5", ld.cursor)
	}
	ld.src.push(jsMsgs(3, 8)...) // 3, 4 and 5 again
	ld.src.push(jsMsgs(2, 2)...) // and 2 alone
	ld.start()
	waitUntil(t, "ack of 8", func() bool { return ld.src.lastAck() == 8 })
	waitUntil(t, "ack of 2", func() bool { return ld.src.drained() })
	// The fetches run ahead of the loop (stage.go): wait for an evaluation
	// that saw the applied values before stopping.
	waitUntil(t, "a report of 8 values", func() bool { return reportCount(ld) == 8 })
	ld.stop(t)
	if got := ld.met.skipped.Load(); got != 4 {
		t.Errorf("skipped %d messages; want 4", got)
	}
	if n := rawCount(t, ld.st, "fill"); n != 8 {
		t.Errorf("store holds %d raw values; want 8", n)
	}
	if got := ld.val.Counters().Accepted(); got != 3 {
		t.Errorf("accepted %d in the second run; want 3 (6, 7, 8)", got)
	}
	if total := reportCount(ld); total != 8 {
		t.Errorf("report counts %d values; want 8", total)
	}
}

// reportCount is the number of values in the latest report of "fill", or -1
// when there is none.
func reportCount(ld *loopDaemon) int64 {
	rep, ok := ld.book.get("fill")
	if !ok {
		return -1
	}
	var total int64
	for _, g := range rep.summary.Groups {
		total += g.N
	}
	return total
}

// TestDaemonCommitBySizeAndTime: a full batch is committed at once, a
// partial one after the commit interval, and rejects move the cursor too.
func TestDaemonCommitBySizeAndTime(t *testing.T) {
	ld := newLoopDaemon(t, t.TempDir(), "[store]\ncommit_values = 10\ncommit_interval = \"1h\"\n")
	ld.src.push(jsMsgs(1, 10)...)
	ld.src.push(jsMsgs(11, 14)...)
	ld.start()
	waitUntil(t, "the full batch", func() bool { return ld.src.lastAck() == 10 })
	time.Sleep(30 * time.Millisecond)
	if got := ld.src.lastAck(); got != 10 {
		t.Errorf("acked up to %d before the interval passed; want 10", got)
	}
	ld.stop(t) // the batch in flight is committed on the way out
	if cur, _ := ld.st.Cursor(defaultConsumer); cur != 14 || ld.src.lastAck() != 14 {
		t.Errorf("after stop: cursor %d, acked %d; want 14, 14", cur, ld.src.lastAck())
	}

	ld = newLoopDaemon(t, t.TempDir(), "[store]\ncommit_values = 1000\ncommit_interval = \"20ms\"\n")
	bad := ingest.Msg{Subject: "meas.fill.L1", Data: []byte(`{"value":"x"}`), Seq: 1, Arrived: time.Now()}
	ld.src.push(bad)
	ld.start()
	waitUntil(t, "the commit of a lone reject", func() bool { return ld.src.lastAck() == 1 })
	if cur, _ := ld.st.Cursor(defaultConsumer); cur != 1 {
		t.Errorf("cursor %d after a reject; want 1", cur)
	}
	ld.dead.wantSubjects(t, "lockstep.rejects.fill")
}

func (b *deadBox) wantSubjects(t *testing.T, want ...string) {
	t.Helper()
	b.mu.Lock()
	defer b.mu.Unlock()
	if fmt.Sprint(b.subj) != fmt.Sprint(want) {
		t.Errorf("dead letters on %v; want %v", b.subj, want)
	}
}

// TestDaemonCoreDrops: messages the core subscription dropped mark the
// reports incomplete, with a note; core messages carry no cursor.
func TestDaemonCoreDrops(t *testing.T) {
	ld := newLoopDaemon(t, t.TempDir(), "[nats]\nsource = \"core\"\n")
	now := time.Now()
	var msgs []ingest.Msg
	for i := range 6 {
		msgs = append(msgs, ingest.Msg{Subject: fmt.Sprintf("meas.seal.J%d", i%2), Data: fmt.Appendf(nil, "185.%d", i), Arrived: now})
	}
	ld.src.push(msgs...)
	ld.start()
	waitUntil(t, "a complete report", func() bool {
		r, ok := ld.book.get("seal")
		return ok && r.summary.Groups != nil && !r.summary.Incomplete && len(r.summary.Groups) == 2
	})
	ld.src.mu.Lock()
	ld.src.dropped = 17
	ld.src.mu.Unlock()
	waitUntil(t, "an incomplete report", func() bool {
		r, ok := ld.book.get("seal")
		return ok && r.summary.Incomplete
	})
	ld.stop(t)
	r, _ := ld.book.get("seal")
	if !strings.Contains(string(r.detail), `"incomplete": true`) || !strings.Contains(string(r.detail), "dropped 17 messages") {
		t.Errorf("report does not say it is incomplete:\n%s", r.detail)
	}
	if cur, _ := ld.st.Cursor(defaultConsumer); cur != 0 {
		t.Errorf("core messages stored cursor %d", cur)
	}
	if n := rawCount(t, ld.st, "seal"); n != 6 {
		t.Errorf("store holds %d raw values; want 6", n)
	}
}

// TestDaemonRestoresIDs: after a restart, a measurement published again
// with the id of a stored one (a new stream sequence, so the cursor does not
// skip it) is rejected as duplicate_id, as it was before the restart.
func TestDaemonRestoresIDs(t *testing.T) {
	dir := t.TempDir()
	ld := newLoopDaemon(t, dir, "")
	ld.src.push(jsMsgs(1, 5)...)
	ld.start()
	waitUntil(t, "ack of 5", func() bool { return ld.src.lastAck() == 5 })
	ld.close(t)

	ld = newLoopDaemon(t, dir, "")
	again := jsMsgs(3, 3)[0] // id m3, once more
	again.Seq = 6
	fresh := jsMsgs(7, 7)[0]
	ld.src.push(again, fresh)
	ld.start()
	waitUntil(t, "ack of 7", func() bool { return ld.src.lastAck() == 7 })
	ld.stop(t)
	c := ld.val.Counters()
	if c.Rejected(ingest.ReasonDuplicateID) != 1 || c.Accepted() != 1 {
		t.Errorf("after the restart: duplicate_id %d, accepted %d; want 1 and 1", c.Rejected(ingest.ReasonDuplicateID), c.Accepted())
	}
	if n := rawCount(t, ld.st, "fill"); n != 6 {
		t.Errorf("store holds %d raw values; want 6", n)
	}
}

// scriptedSource returns its steps in order, a batch or an error each, and
// then behaves as its fakeSource.
type scriptedSource struct {
	*fakeSource
	steps []any
}

func (s *scriptedSource) Fetch(ctx context.Context, max int, maxWait time.Duration) ([]ingest.Msg, error) {
	s.mu.Lock()
	if len(s.steps) > 0 {
		step := s.steps[0]
		s.steps = s.steps[1:]
		s.mu.Unlock()
		if err, ok := step.(error); ok {
			return nil, err
		}
		return step.([]ingest.Msg), nil
	}
	s.mu.Unlock()
	return s.fakeSource.Fetch(ctx, max, maxWait)
}

// TestDaemonSourceErrors: a transient fetch error is retried; a source that
// closes ends the loop with its error, after the batches fetched before it
// are applied, committed and acknowledged.
func TestDaemonSourceErrors(t *testing.T) {
	ld := newLoopDaemon(t, t.TempDir(), "")
	closed := fmt.Errorf("fetch from stream: %w: consumer deleted", ingest.ErrSourceClosed)
	src := &scriptedSource{fakeSource: ld.src, steps: []any{jsMsgs(1, 3), errors.New("timeout"), jsMsgs(4, 6), closed}}
	ld.daemon.src = src
	done := make(chan error, 1)
	go func() { done <- ld.run(context.Background()) }()
	select {
	case err := <-done:
		if !errors.Is(err, ingest.ErrSourceClosed) {
			t.Errorf("run returned %v; want an error wrapping ErrSourceClosed", err)
		}
	case <-time.After(10 * time.Second):
		t.Fatal("run did not return after the source closed")
	}
	if n := rawCount(t, ld.st, "fill"); n != 6 {
		t.Errorf("store holds %d raw values; want 6", n)
	}
	if cur, err := ld.st.Cursor(defaultConsumer); cur != 6 || err != nil {
		t.Errorf("stored cursor %d (%v); want 6", cur, err)
	}
	if got := src.lastAck(); got != 6 {
		t.Errorf("last ack %d; want 6", got)
	}
}

// TestDaemonLimits: a value or id longer than the store keeps, or a time
// the window cannot hold, is a counted reject, not a failed commit.
func TestDaemonLimits(t *testing.T) {
	ld := newLoopDaemon(t, t.TempDir(), "[ingest]\nmax_age = \"0s\"\nmax_future = \"0s\"\n")
	now := time.Now()
	long := "1." + strings.Repeat("1", 300)
	for i, data := range []string{
		`{"value":"` + long + `"}`,
		`{"value":"1","id":"` + strings.Repeat("x", 300) + `"}`,
		`{"value":"1","time":"1700-01-01T00:00:00Z"}`,
		`{"value":"1","time":"2200-01-01T00:00:00Z"}`,
		`{"value":"2"}`,
	} {
		ld.src.push(ingest.Msg{Subject: "meas.fill.L1", Data: []byte(data), Seq: uint64(i + 1), Stored: now, Arrived: now})
	}
	ld.start()
	waitUntil(t, "ack of 5", func() bool { return ld.src.lastAck() == 5 })
	ld.stop(t)
	c := ld.val.Counters()
	if c.Accepted() != 1 || c.Rejected(ingest.ReasonNotANumber) != 1 || c.Rejected(ingest.ReasonNotParseable) != 1 ||
		c.Rejected(ingest.ReasonTooOld) != 1 || c.Rejected(ingest.ReasonFromFuture) != 1 {
		t.Errorf("accepted %d, not_a_number %d, not_parseable %d, too_old %d, from_future %d; want 1 each",
			c.Accepted(), c.Rejected(ingest.ReasonNotANumber), c.Rejected(ingest.ReasonNotParseable),
			c.Rejected(ingest.ReasonTooOld), c.Rejected(ingest.ReasonFromFuture))
	}
	if n := rawCount(t, ld.st, "fill"); n != 1 {
		t.Errorf("store holds %d raw values; want 1", n)
	}
}

// TestDaemonSettingsChanged: a restart with another bucket width rebuilds
// the window from the raw values and rewrites the bucket states.
func TestDaemonSettingsChanged(t *testing.T) {
	dir := t.TempDir()
	ld := newLoopDaemon(t, dir, "[defaults]\nbucket = \"1m\"\n")
	ld.src.push(jsMsgs(1, 30)...)
	ld.start()
	waitUntil(t, "ack of 30", func() bool { return ld.src.lastAck() == 30 })
	ld.close(t)

	ld = newLoopDaemon(t, dir, "[defaults]\nbucket = \"30s\"\n")
	r, ok := ld.book.get("fill")
	if ok {
		t.Fatalf("report before the first evaluation: %+v", r.summary)
	}
	ld.start()
	waitUntil(t, "a report", func() bool { _, ok := ld.book.get("fill"); return ok })
	ld.stop(t)
	r, _ = ld.book.get("fill")
	var total int64
	for _, g := range r.summary.Groups {
		total += g.N
	}
	if total != 30 {
		t.Errorf("rebuilt window counts %d values; want 30", total)
	}
	n := int64(0)
	err := ld.st.Buckets("fill", time.Time{}, time.Time{}, func(bs store.BucketState) error {
		if bs.Start.Unix()%30 != 0 {
			t.Errorf("bucket state at %v", bs.Start)
		}
		n += bs.Acc.N
		return nil
	})
	if err != nil || n != 30 {
		t.Errorf("stored bucket states hold %d values (%v); want 30", n, err)
	}
	chars, _ := ld.st.Characteristics()
	if len(chars) != 1 || chars[0].SettingsHash != ld.cfg.settingsFor("fill").stateHash() {
		t.Errorf("stored record %+v does not carry the new settings hash", chars)
	}
}

// TestDaemonCountWindowRestart: a count-based window keeps no bucket
// states; a restart rebuilds it from the raw values.
func TestDaemonCountWindowRestart(t *testing.T) {
	dir := t.TempDir()
	const cfg = "[characteristics.fill]\ncount = 4\n"
	ld := newLoopDaemon(t, dir, cfg)
	ld.src.push(jsMsgs(1, 18)...) // six values for each of three groups
	ld.start()
	waitUntil(t, "ack of 18", func() bool { return ld.src.lastAck() == 18 })
	ld.close(t)

	ld = newLoopDaemon(t, dir, cfg)
	n := 0
	if err := ld.st.Buckets("fill", time.Time{}, time.Time{}, func(store.BucketState) error { n++; return nil }); err != nil || n != 0 {
		t.Errorf("%d bucket states stored for a count-based window (%v)", n, err)
	}
	ld.start()
	waitUntil(t, "a report", func() bool { _, ok := ld.book.get("fill"); return ok })
	ld.stop(t)
	r, _ := ld.book.get("fill")
	if len(r.summary.Groups) != 3 {
		t.Fatalf("groups %+v", r.summary.Groups)
	}
	for _, g := range r.summary.Groups {
		if g.N != 4 {
			t.Errorf("group %s holds %d values; want the last 4", g.Name, g.N)
		}
	}
}

// TestDaemonNominalChanged: a nominal that differs from the reference the
// stored sums are centred on is refused at start, with what to do.
func TestDaemonNominalChanged(t *testing.T) {
	dir := t.TempDir()
	ld := newLoopDaemon(t, dir, "[characteristics.fill]\nnominal = \"500.00\"\n")
	ld.src.push(jsMsgs(1, 3)...)
	ld.start()
	waitUntil(t, "ack of 3", func() bool { return ld.src.lastAck() == 3 })
	ld.close(t)

	cfg := DefaultConfig()
	cfg.NATS.URL = "nats://127.0.0.1:1"
	cfg.Characteristics = map[string]CharacteristicConfig{"fill": {Nominal: "501"}}
	st, err := store.Open(filepath.Join(dir, "lockstep.db"), store.Options{NoSync: true})
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	d := newDaemon(cfg, st, zerolog.Nop())
	if d.val, err = ingest.NewValidator(validatorConfig(cfg)); err != nil {
		t.Fatal(err)
	}
	err = d.restore(time.Now())
	if err == nil || !strings.Contains(err.Error(), `"fill"`) || !strings.Contains(err.Error(), "centred on 500") {
		t.Errorf("restore with another nominal: %v", err)
	}
}

// slowStore commits slowly, counting the commits and the largest batch.
type slowStore struct {
	*store.Store
	delay   time.Duration
	mu      sync.Mutex
	commits int
	largest int
}

func (s *slowStore) Commit(b *store.Batch) error {
	time.Sleep(s.delay)
	s.mu.Lock()
	s.commits++
	s.largest = max(s.largest, len(b.Raw))
	s.mu.Unlock()
	return s.Store.Commit(b)
}

// TestDaemonGroupCommit: while a slow commit is in flight the loop goes on
// applying, the next batch grows past commit_values, and every ack still
// follows the commit of what it covers (fakeSource checks the stored cursor
// at each ack).
func TestDaemonGroupCommit(t *testing.T) {
	var slow *slowStore
	ld := newLoopDaemonOn(t, t.TempDir(), "[store]\ncommit_values = 10\n", func(st *store.Store) stateStore {
		slow = &slowStore{Store: st, delay: 40 * time.Millisecond}
		return slow
	})
	for i := range 20 {
		ld.src.push(jsMsgs(uint64(10*i+1), uint64(10*i+10))...)
	}
	ld.start()
	waitUntil(t, "ack of 200", func() bool { return ld.src.lastAck() == 200 })
	ld.stop(t)
	slow.mu.Lock()
	commits, largest := slow.commits, slow.largest
	slow.mu.Unlock()
	if commits >= 20 || largest <= 10 {
		t.Errorf("%d commits, the largest of %d values; want fewer than 20 commits, batches grown past 10", commits, largest)
	}
	if n := rawCount(t, ld.st, "fill"); n != 200 {
		t.Errorf("store holds %d raw values; want 200", n)
	}
	ld.src.mu.Lock()
	acks := slices.Clone(ld.src.acks)
	ld.src.mu.Unlock()
	for i := 1; i < len(acks); i++ {
		if acks[i] <= acks[i-1] {
			t.Errorf("acks out of order: %v", acks)
			break
		}
	}
}

// TestDaemonUnitFromPayload: a characteristic without a configured unit
// shows the unit its first value names, and keeps it across a restart.
func TestDaemonUnitFromPayload(t *testing.T) {
	dir := t.TempDir()
	ld := newLoopDaemon(t, dir, "")
	now := time.Now()
	ld.src.push(
		ingest.Msg{Subject: "meas.bore.S1", Data: []byte(`{"value":"12.01","unit":"mm"}`), Seq: 1, Stored: now, Arrived: now},
		ingest.Msg{Subject: "meas.bore.S2", Data: []byte(`{"value":"12.03"}`), Seq: 2, Stored: now, Arrived: now},
	)
	ld.start()
	waitUntil(t, "a report in mm", func() bool { r, ok := ld.book.get("bore"); return ok && r.summary.Unit == "mm" })
	ld.close(t)
	ld = newLoopDaemon(t, dir, "")
	chars, err := ld.st.Characteristics()
	if err != nil || len(chars) != 1 || chars[0].Unit != "mm" {
		t.Errorf("stored %+v, %v; want bore in mm", chars, err)
	}
	ld.start()
	waitUntil(t, "a report in mm after the restart", func() bool { r, ok := ld.book.get("bore"); return ok && r.summary.Unit == "mm" })
}
