package ingest

import (
	"context"
	"errors"
	"fmt"
	"sync"
	"sync/atomic"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/rs/zerolog"
)

// Defaults of DeadLetterOptions.
const (
	DefaultDeadLetterQueue       = 4096
	DefaultDeadLetterLogInterval = 10 * time.Second
)

// DeadLetterOptions are the options of NewDeadLetters.
type DeadLetterOptions struct {
	// QueueLen is the number of rejects waiting to be published; beyond it
	// rejects are dropped and counted. Default: DefaultDeadLetterQueue.
	QueueLen int
	// LogInterval is the least time between two log lines about dropped or
	// failed rejects. Default: DefaultDeadLetterLogInterval.
	LogInterval time.Duration
	// Logger receives those lines. Default: silent.
	Logger zerolog.Logger
	// Now is the clock of the log interval. Default: time.Now.
	Now func() time.Time
}

// DeadLetterStats are the counters of a DeadLetters.
type DeadLetterStats struct {
	// Published counts the rejects handed to the connection.
	Published uint64
	// Dropped counts the rejects not published because the queue was full
	// (or DeadLetters was closed).
	Dropped uint64
	// Failed counts the rejects the connection refused (closed connection,
	// reconnect buffer full, bad subject).
	Failed uint64
	// Queued is the number of rejects waiting.
	Queued int
}

// DeadLetters publishes the bodies of rejected measurements to their
// dead-letter subjects, in the background, so that ingest never waits for
// them: Publish only queues. When the queue is full the reject is dropped
// and counted, and a line is logged at most once per LogInterval. The
// rejects are counted by reason elsewhere whatever happens here; the
// dead-letter stream is for looking at examples.
//
// Core NATS publishing gives no delivery guarantee; a stream on the
// dead-letter subjects keeps what the server received.
type DeadLetters struct {
	publish func(subject string, body []byte) error
	flush   func(ctx context.Context) error
	log     zerolog.Logger
	now     func() time.Time
	every   time.Duration

	mu     sync.RWMutex // guards closed against sends on q
	closed bool
	q      chan deadLetter
	done   chan struct{} // closed when the worker exits
	abort  atomic.Bool   // Close gave up: the worker skips what is left

	published, dropped, failed atomic.Uint64

	logMu      sync.Mutex
	lastLog    time.Time
	loggedDrop uint64
	loggedFail uint64
}

type deadLetter struct {
	subject string
	body    []byte
}

// NewDeadLetters starts a publisher on nc.
func NewDeadLetters(nc *nats.Conn, opt DeadLetterOptions) (*DeadLetters, error) {
	if nc == nil {
		return nil, fmt.Errorf("start dead-letter publisher: %w: no connection", ErrSourceOption)
	}
	return newDeadLetters(nc.Publish, func(ctx context.Context) error {
		if nc.IsClosed() {
			return nil
		}
		return nc.FlushWithContext(ctx)
	}, opt)
}

func newDeadLetters(publish func(string, []byte) error, flush func(context.Context) error, opt DeadLetterOptions) (*DeadLetters, error) {
	if opt.QueueLen == 0 {
		opt.QueueLen = DefaultDeadLetterQueue
	}
	if opt.LogInterval == 0 {
		opt.LogInterval = DefaultDeadLetterLogInterval
	}
	if opt.Now == nil {
		opt.Now = time.Now
	}
	if opt.QueueLen < 1 {
		return nil, fmt.Errorf("start dead-letter publisher: %w", optionError("queue length %d: must be at least 1", opt.QueueLen))
	}
	d := &DeadLetters{
		publish: publish,
		flush:   flush,
		log:     opt.Logger.With().Str("component", "ingest.deadletter").Logger(),
		now:     opt.Now,
		every:   opt.LogInterval,
		q:       make(chan deadLetter, opt.QueueLen),
		done:    make(chan struct{}),
	}
	go d.run()
	return d, nil
}

// Publish queues body for subject and returns at once: true if queued,
// false if dropped (queue full, or closed). body must not be modified
// afterwards.
func (d *DeadLetters) Publish(subject string, body []byte) bool {
	d.mu.RLock()
	ok := false
	if !d.closed {
		select {
		case d.q <- deadLetter{subject, body}:
			ok = true
		default:
		}
	}
	d.mu.RUnlock()
	if !ok {
		d.dropped.Add(1)
		d.maybeLog()
	}
	return ok
}

func (d *DeadLetters) run() {
	defer close(d.done)
	for m := range d.q {
		if d.abort.Load() {
			d.dropped.Add(1)
			continue
		}
		if err := d.publish(m.subject, m.body); err != nil {
			d.failed.Add(1)
			d.maybeLogErr(err, m.subject)
			continue
		}
		d.published.Add(1)
	}
}

// maybeLog logs drops and failures at most once per interval. It never
// waits: if another goroutine is logging, this one skips.
func (d *DeadLetters) maybeLog() { d.maybeLogErr(nil, "") }

func (d *DeadLetters) maybeLogErr(err error, subject string) {
	if !d.logMu.TryLock() {
		return
	}
	defer d.logMu.Unlock()
	t := d.now()
	if !d.lastLog.IsZero() && t.Sub(d.lastLog) < d.every {
		return
	}
	dropped, failed := d.dropped.Load(), d.failed.Load()
	ev := d.log.Warn().
		Uint64("dropped", dropped-d.loggedDrop).Uint64("dropped_total", dropped).
		Uint64("failed", failed-d.loggedFail).Uint64("failed_total", failed).
		Int("queue_len", cap(d.q))
	if err != nil {
		ev = ev.Err(err).Str("subject", subject)
	}
	ev.Msg("dead letters not published")
	d.lastLog, d.loggedDrop, d.loggedFail = t, dropped, failed
}

// Stats returns the counters.
func (d *DeadLetters) Stats() DeadLetterStats {
	return DeadLetterStats{
		Published: d.published.Load(),
		Dropped:   d.dropped.Load(),
		Failed:    d.failed.Load(),
		Queued:    len(d.q),
	}
}

// Close stops accepting rejects, publishes those queued and flushes the
// connection, giving up when ctx ends (what is left is counted as
// dropped). Close does not close the connection.
func (d *DeadLetters) Close(ctx context.Context) error {
	d.mu.Lock()
	if d.closed {
		d.mu.Unlock()
		return nil
	}
	d.closed = true
	close(d.q)
	d.mu.Unlock()

	select {
	case <-d.done:
	case <-ctx.Done():
		d.abort.Store(true)
		return fmt.Errorf("close dead-letter publisher with %d queued: %w", len(d.q), ctx.Err())
	}
	if err := d.flush(ctx); err != nil && !errors.Is(err, nats.ErrConnectionClosed) {
		return fmt.Errorf("flush dead letters: %w", err)
	}
	return nil
}
