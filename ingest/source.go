package ingest

import (
	"context"
	"errors"
	"fmt"
	"sync"
	"sync/atomic"
	"time"
)

// Msg is one message as delivered by a Source.
type Msg struct {
	// Subject is the subject the message was published on.
	Subject string
	// Data is the payload. It is never reused by the Source: a caller may
	// keep it as long as it likes.
	Data []byte
	// Seq is the JetStream stream sequence, from the message metadata; 0 for
	// core NATS.
	Seq uint64
	// Stored is the time JetStream stored the message; zero for core NATS.
	Stored time.Time
	// Arrived is the time this process received the message.
	Arrived time.Time
}

// Source delivers messages in batches. Fetch is called from one goroutine
// at a time, and so is Ack, which may be another goroutine than Fetch's (a
// caller that decodes on one goroutine and commits on another); Stats (and
// JetStreamSource.Lag) may be called from any.
//
// The loop a caller runs is: Fetch a batch, apply every message whose Seq is
// above the highest Seq applied so far (starting from the cursor stored with
// the sums), commit, then Ack the highest committed Seq. A Source may deliver
// a message again (a JetStream redelivery, or the replay after a consumer
// reset described at JetStreamSource); skipping Seq at or below the highest
// applied one is what makes that harmless.
type Source interface {
	// Fetch returns up to max messages, waiting at most maxWait for the
	// first one; once one is there it returns what is buffered without
	// waiting for more. An empty batch with a nil error is normal: nothing
	// arrived in time. The returned slice belongs to the caller. Fetch
	// returns ctx.Err() when ctx ends first, and an error wrapping
	// ErrSourceClosed after Close or once the source can deliver nothing
	// more (the connection was closed, the consumer was deleted).
	Fetch(ctx context.Context, max int, maxWait time.Duration) ([]Msg, error)
	// Ack acknowledges every fetched message with Seq ≤ upTo and nothing
	// above. It is called only after the store commit that holds those
	// messages. It is a no-op for core NATS, and for an upTo below every
	// message fetched and not yet acknowledged.
	Ack(upTo uint64) error
	// Stats returns counters since the source was created.
	Stats() SourceStats
	// Close stops delivery and releases the subscription. Messages fetched
	// but not acknowledged are redelivered to the next consumer (JetStream)
	// or lost (core NATS). Close does not close the connection.
	Close() error
}

var (
	_ Source = (*CoreSource)(nil)
	_ Source = (*JetStreamSource)(nil)
)

// SourceStats are the counters of a Source. All of them only grow, except
// Buffered.
type SourceStats struct {
	// Delivered counts the messages returned by Fetch.
	Delivered uint64
	// Dropped counts the messages this client discarded because the
	// subscriber fell behind (core NATS: a pending limit was exceeded). An
	// increase means a gap in the data: reports of the windows it touches
	// are incomplete. Always 0 for JetStream, which holds messages in the
	// stream instead.
	Dropped uint64
	// Redelivered counts the JetStream messages returned by Fetch that the
	// server had delivered before (after a restart, a reset, or an expired
	// ack wait). The caller skips those at or below its cursor.
	Redelivered uint64
	// Buffered is the number of messages received and not yet returned by
	// Fetch.
	Buffered int
	// AckedSeq is the highest stream sequence acknowledged (JetStream).
	AckedSeq uint64
	// Resets counts the times the JetStream consumer was reset to its ack
	// floor, at start and after deliveries were lost in transit.
	Resets uint64
	// ConsumerErrors counts asynchronous JetStream consumer errors (missed
	// heartbeats, server status messages); each is logged.
	ConsumerErrors uint64
	// Reconnects counts the reconnections of the underlying connection.
	Reconnects uint64
}

// Sentinel errors of the NATS sources.
var (
	// ErrSourceClosed: the source was closed, or can deliver nothing more.
	ErrSourceClosed = errors.New("source closed")
	// ErrStreamNotFound: the JetStream stream does not exist and
	// JetStreamOptions.CreateStream is false.
	ErrStreamNotFound = errors.New("stream not found")
	// ErrJetStreamDisabled: the server (or the account) has no JetStream.
	ErrJetStreamDisabled = errors.New("JetStream not enabled")
	// ErrSourceOption: an option of a source or of the connection is
	// invalid; the message names it.
	ErrSourceOption = errors.New("invalid option")
)

// checkFetchArgs validates Fetch's max.
func checkFetchArgs(max int) error {
	if max < 1 {
		return fmt.Errorf("fetch messages: %w: max must be at least 1, got %d", ErrSourceOption, max)
	}
	return nil
}

// handoff is the bounded buffer between a NATS delivery goroutine (put) and
// the caller of Fetch (take). put blocks while the buffer is full, which
// pushes back into the NATS client: the core subscription's pending limits
// then decide what is dropped, and a JetStream consumer stops pulling.
//
// An epoch lets the JetStream source discard everything buffered at once
// (a consumer reset) and refuse stale puts from a consumer being stopped.
type handoff[T any] struct {
	mu     sync.Mutex
	space  sync.Cond // signalled when items leave or the handoff closes
	items  []T
	limit  int
	epoch  uint64
	closed bool
	err    error         // why it closed; nil means ErrSourceClosed
	ready  chan struct{} // a token when items went from none to some
	done   chan struct{} // closed with the handoff
	count  atomic.Int64  // len(items), readable without the lock
}

func newHandoff[T any](limit int) *handoff[T] {
	h := &handoff[T]{
		items: make([]T, 0, limit),
		limit: limit,
		ready: make(chan struct{}, 1),
		done:  make(chan struct{}),
	}
	h.space.L = &h.mu
	return h
}

// put appends v, waiting for room. It returns false, dropping v, when the
// handoff is closed or has moved past epoch.
func (h *handoff[T]) put(v T, epoch uint64) bool {
	h.mu.Lock()
	for len(h.items) >= h.limit && !h.closed && h.epoch == epoch {
		h.space.Wait()
	}
	if h.closed || h.epoch != epoch {
		h.mu.Unlock()
		return false
	}
	h.items = append(h.items, v)
	h.count.Store(int64(len(h.items)))
	if len(h.items) == 1 {
		select {
		case h.ready <- struct{}{}:
		default:
		}
	}
	h.mu.Unlock()
	return true
}

// take returns up to max items, waiting at most maxWait for the first.
// Items still buffered when the handoff closed by itself (closeWith) are
// returned before its error; after close they are discarded.
func (h *handoff[T]) take(ctx context.Context, max int, maxWait time.Duration) ([]T, error) {
	var timeout <-chan time.Time
	for {
		h.mu.Lock()
		if n := min(len(h.items), max); n > 0 {
			out := make([]T, n)
			copy(out, h.items)
			rest := copy(h.items, h.items[n:])
			clear(h.items[rest:])
			h.items = h.items[:rest]
			h.count.Store(int64(rest))
			h.space.Broadcast()
			h.mu.Unlock()
			return out, nil
		}
		closed, err := h.closed, h.err
		h.mu.Unlock()
		if closed {
			if err == nil {
				err = ErrSourceClosed
			}
			return nil, err
		}
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		if maxWait <= 0 {
			return nil, nil
		}
		if timeout == nil {
			t := time.NewTimer(maxWait)
			defer t.Stop()
			timeout = t.C
		}
		select {
		case <-h.ready:
		case <-h.done:
		case <-timeout:
			return nil, nil
		case <-ctx.Done():
			return nil, ctx.Err()
		}
	}
}

// newEpoch discards every buffered item, wakes a blocked put (which then
// drops its item) and returns the new epoch.
func (h *handoff[T]) newEpoch() uint64 {
	h.mu.Lock()
	defer h.mu.Unlock()
	h.epoch++
	clear(h.items)
	h.items = h.items[:0]
	h.count.Store(0)
	h.space.Broadcast()
	return h.epoch
}

// currentEpoch returns the epoch puts must carry.
func (h *handoff[T]) currentEpoch() uint64 {
	h.mu.Lock()
	defer h.mu.Unlock()
	return h.epoch
}

// close discards the buffer: take returns ErrSourceClosed from now on.
func (h *handoff[T]) close() {
	h.mu.Lock()
	defer h.mu.Unlock()
	if !h.closed {
		clear(h.items)
		h.items = h.items[:0]
		h.count.Store(0)
	}
	h.closeLocked(nil)
}

// closeWith marks the end of delivery with err (which should wrap
// ErrSourceClosed) but lets take drain what is buffered first.
func (h *handoff[T]) closeWith(err error) {
	h.mu.Lock()
	defer h.mu.Unlock()
	h.closeLocked(err)
}

func (h *handoff[T]) closeLocked(err error) {
	if h.closed {
		return
	}
	h.closed, h.err = true, err
	close(h.done)
	h.space.Broadcast()
}

// buffered returns the number of items waiting.
func (h *handoff[T]) buffered() int { return int(h.count.Load()) }
