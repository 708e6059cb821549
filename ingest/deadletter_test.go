package ingest

import (
	"context"
	"errors"
	"fmt"
	"sync"
	"testing"
	"time"

	"github.com/rs/zerolog"
)

func TestDeadLettersPublish(t *testing.T) {
	ts := runTestServer(t)
	nc := ts.connect(t, zerolog.Nop())
	sub, err := nc.SubscribeSync("lockstep.dead.>")
	if err != nil {
		t.Fatal(err)
	}
	if err := nc.Flush(); err != nil {
		t.Fatal(err)
	}
	dl, err := NewDeadLetters(nc, DeadLetterOptions{})
	if err != nil {
		t.Fatal(err)
	}
	for i := range 3 {
		if !dl.Publish(fmt.Sprintf("lockstep.dead.fill.line%d", i), fmt.Appendf(nil, `{"reason":"not_a_number","n":%d}`, i)) {
			t.Fatalf("Publish %d dropped with an empty queue", i)
		}
	}
	if err := dl.Close(testCtx(t, 5*time.Second)); err != nil {
		t.Fatal(err)
	}
	for i := range 3 {
		m, err := sub.NextMsg(5 * time.Second)
		if err != nil {
			t.Fatal(err)
		}
		if want := fmt.Sprintf(`{"reason":"not_a_number","n":%d}`, i); m.Subject != fmt.Sprintf("lockstep.dead.fill.line%d", i) || string(m.Data) != want {
			t.Errorf("dead letter %d = %s %s", i, m.Subject, m.Data)
		}
	}
	if st := dl.Stats(); st.Published != 3 || st.Dropped != 0 || st.Failed != 0 || st.Queued != 0 {
		t.Errorf("Stats = %+v", st)
	}
	if dl.Publish("lockstep.dead.x", []byte("{}")) {
		t.Error("Publish after Close was accepted")
	}
	if err := dl.Close(context.Background()); err != nil {
		t.Errorf("second Close = %v", err)
	}
}

// blockingPublisher blocks every publish until released, and records what
// was published.
type blockingPublisher struct {
	entered chan struct{}
	release chan struct{}
	mu      sync.Mutex
	got     []string
	fail    error
}

func newBlockingPublisher() *blockingPublisher {
	return &blockingPublisher{entered: make(chan struct{}, 1), release: make(chan struct{})}
}

func (p *blockingPublisher) publish(subject string, body []byte) error {
	select {
	case p.entered <- struct{}{}:
	default:
	}
	<-p.release
	p.mu.Lock()
	defer p.mu.Unlock()
	p.got = append(p.got, subject)
	return p.fail
}

func noFlush(context.Context) error { return nil }

// TestDeadLettersQueueFull fills the queue while the publisher is stuck:
// Publish never blocks, the overflow is counted, and it is logged once per
// interval of the injected clock.
func TestDeadLettersQueueFull(t *testing.T) {
	var logs logBuffer
	now := time.Date(2026, 3, 1, 8, 0, 0, 0, time.UTC)
	var clockMu sync.Mutex
	clock := func() time.Time { clockMu.Lock(); defer clockMu.Unlock(); return now }
	advance := func(d time.Duration) { clockMu.Lock(); now = now.Add(d); clockMu.Unlock() }

	p := newBlockingPublisher()
	dl, err := newDeadLetters(p.publish, noFlush, DeadLetterOptions{QueueLen: 4, LogInterval: time.Minute, Logger: logs.logger(), Now: clock})
	if err != nil {
		t.Fatal(err)
	}
	dl.Publish("dead.0", nil)
	<-p.entered // the worker holds dead.0; the queue is empty again

	start := time.Now()
	accepted := 0
	for i := 1; i <= 20; i++ {
		if dl.Publish(fmt.Sprintf("dead.%d", i), nil) {
			accepted++
		}
	}
	if d := time.Since(start); d > time.Second {
		t.Errorf("20 publishes with a stuck publisher took %v", d)
	}
	if st := dl.Stats(); accepted != 4 || st.Dropped != 16 || st.Queued != 4 {
		t.Errorf("accepted %d, stats %+v; want 4 accepted, 16 dropped, 4 queued", accepted, st)
	}
	if c := logs.count("dead letters not published"); c != 1 {
		t.Errorf("%d log lines within one interval; want 1:\n%s", c, logs.String())
	}
	advance(2 * time.Minute)
	dl.Publish("dead.21", nil)
	if c := logs.count("dead letters not published"); c != 2 {
		t.Errorf("%d log lines after the interval; want 2:\n%s", c, logs.String())
	}
	if logs.count(`"dropped":16,"dropped_total":17`) != 1 {
		t.Errorf("the second line does not count the drop since the first:\n%s", logs.String())
	}

	close(p.release)
	if err := dl.Close(testCtx(t, 5*time.Second)); err != nil {
		t.Fatal(err)
	}
	if st := dl.Stats(); st.Published != 5 || st.Dropped != 17 {
		t.Errorf("after Close: %+v; want 5 published, 17 dropped", st)
	}
}

func TestDeadLettersCloseTimeoutAndFailures(t *testing.T) {
	p := newBlockingPublisher()
	p.fail = errors.New("nats: outbound buffer limit exceeded")
	dl, err := newDeadLetters(p.publish, noFlush, DeadLetterOptions{QueueLen: 8})
	if err != nil {
		t.Fatal(err)
	}
	dl.Publish("dead.0", nil)
	<-p.entered
	dl.Publish("dead.1", nil)
	dl.Publish("dead.2", nil)
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Millisecond)
	defer cancel()
	if err := dl.Close(ctx); !errors.Is(err, context.DeadlineExceeded) {
		t.Fatalf("Close with a stuck publisher = %v; want DeadlineExceeded", err)
	}
	close(p.release)
	// The worker finishes dead.0 (which fails) and drops the rest.
	waitFor(t, 5*time.Second, "the worker to give up", func() bool {
		st := dl.Stats()
		return st.Failed == 1 && st.Dropped == 2
	})
	if st := dl.Stats(); st.Published != 0 {
		t.Errorf("Stats = %+v", st)
	}
}

func TestDeadLettersOptions(t *testing.T) {
	if _, err := NewDeadLetters(nil, DeadLetterOptions{}); !errors.Is(err, ErrSourceOption) {
		t.Errorf("NewDeadLetters(nil) = %v", err)
	}
	if _, err := newDeadLetters(newBlockingPublisher().publish, noFlush, DeadLetterOptions{QueueLen: -1}); !errors.Is(err, ErrSourceOption) {
		t.Errorf("QueueLen -1 = %v", err)
	}
}
