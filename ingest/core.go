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

// Defaults of CoreOptions.
//
// Core NATS does not wait for a slow subscriber: the client library
// buffers what the subscriber has not taken yet, up to the subscription's
// pending limits, and drops every message beyond them. nats.go's defaults
// (512 Ki messages, 64 MiB) are not a decision made for this workload: a
// subscriber decoding with encoding/json lost about half of a 1.2–1.6 M
// msg/s stream with them. No limit saves a subscriber that is slower than
// its stream for good; what a limit buys is the length of a burst or of a
// stall (a slow store commit, a garbage collection, the backlog flushed
// after a publisher reconnects) that passes without loss. The defaults
// here hold about 0.7–0.9 s of the fastest stream measured (1 Mi messages
// at 1.2–1.6 M msg/s), and minutes of a plant's ordinary rate, in at most
// 128 MiB of payload (about a million 120-byte measurements) — plus about
// 150 bytes per message of client bookkeeping, so roughly 300 MB when full.
// The byte limit is what protects the process when payloads are large.
// Whatever is dropped is counted (SourceStats.Dropped) and logged; where no
// loss is acceptable, use JetStream.
const (
	DefaultPendingMsgs  = 1 << 20
	DefaultPendingBytes = 128 << 20
	DefaultCoreBuffer   = 8192
)

// CoreOptions are the options of NewCoreSource.
type CoreOptions struct {
	// Queue, if set, joins a queue group: each message goes to one member.
	Queue string
	// PendingMsgs and PendingBytes are the subscription's pending limits:
	// received messages not yet handed to Fetch, beyond which the client
	// drops. Defaults: DefaultPendingMsgs, DefaultPendingBytes; -1 means
	// no limit (and no protection against running out of memory).
	PendingMsgs, PendingBytes int
	// Buffer is the number of messages kept ready for Fetch, on top of the
	// pending limits. Default: DefaultCoreBuffer.
	Buffer int
	// Logger receives the source's events. Default: silent.
	Logger zerolog.Logger
	// Now stamps Msg.Arrived. Default: time.Now.
	Now func() time.Time
}

func (o CoreOptions) withDefaults() (CoreOptions, error) {
	if o.PendingMsgs == 0 {
		o.PendingMsgs = DefaultPendingMsgs
	}
	if o.PendingBytes == 0 {
		o.PendingBytes = DefaultPendingBytes
	}
	if o.Buffer == 0 {
		o.Buffer = DefaultCoreBuffer
	}
	if o.Now == nil {
		o.Now = time.Now
	}
	switch {
	case o.PendingMsgs < -1:
		return o, optionError("pending messages %d: use a positive limit, or -1 for none", o.PendingMsgs)
	case o.PendingBytes < -1:
		return o, optionError("pending bytes %d: use a positive limit, or -1 for none", o.PendingBytes)
	case o.Buffer < 1:
		return o, optionError("buffer %d: must be at least 1", o.Buffer)
	}
	return o, nil
}

// CoreSource delivers messages of a core NATS subscription. Core NATS keeps
// nothing: messages published while the subscriber is disconnected, and
// messages beyond the pending limits, are lost; the latter are counted in
// Stats().Dropped. Seq and Stored are zero and Ack does nothing.
type CoreSource struct {
	nc      *nats.Conn
	sub     *nats.Subscription
	subject string
	h       *handoff[Msg]
	log     zerolog.Logger

	delivered atomic.Uint64
	dropped   atomic.Uint64 // last known sub.Dropped(), kept after Close
	closeOnce sync.Once
	closeErr  error
}

// NewCoreSource subscribes to subject (wildcards allowed) on nc.
func NewCoreSource(nc *nats.Conn, subject string, opt CoreOptions) (*CoreSource, error) {
	opt, err := opt.withDefaults()
	if err != nil {
		return nil, fmt.Errorf("subscribe to %q: %w", subject, err)
	}
	if nc == nil {
		return nil, fmt.Errorf("subscribe to %q: %w: no connection", subject, ErrSourceOption)
	}
	s := &CoreSource{
		nc:      nc,
		subject: subject,
		h:       newHandoff[Msg](opt.Buffer),
		log:     opt.Logger.With().Str("component", "ingest.core").Str("subject", subject).Logger(),
	}
	now := opt.Now
	handler := func(m *nats.Msg) {
		// nats.go allocates Subject and Data per message: keeping them is safe.
		s.h.put(Msg{Subject: m.Subject, Data: m.Data, Arrived: now()}, 0)
	}
	if opt.Queue != "" {
		s.sub, err = nc.QueueSubscribe(subject, opt.Queue, handler)
	} else {
		s.sub, err = nc.Subscribe(subject, handler)
	}
	if err != nil {
		return nil, fmt.Errorf("subscribe to %q: %w", subject, err)
	}
	if err := s.sub.SetPendingLimits(opt.PendingMsgs, opt.PendingBytes); err != nil {
		_ = s.sub.Unsubscribe()
		return nil, fmt.Errorf("set pending limits of %q: %w", subject, err)
	}
	s.sub.SetClosedHandler(func(string) {
		// The connection closed for good (or Close unsubscribed): deliver
		// what is buffered, then report the end.
		s.h.closeWith(fmt.Errorf("fetch from %q: %w: subscription closed", subject, ErrSourceClosed))
	})
	// The server must know the subscription before the caller (or a test)
	// publishes.
	if err := nc.Flush(); err != nil {
		_ = s.sub.Unsubscribe()
		return nil, fmt.Errorf("subscribe to %q: %w", subject, err)
	}
	s.log.Debug().Int("pending_msgs", opt.PendingMsgs).Int("pending_bytes", opt.PendingBytes).Msg("subscribed")
	return s, nil
}

// Fetch returns up to max messages, waiting at most maxWait for the first.
func (s *CoreSource) Fetch(ctx context.Context, max int, maxWait time.Duration) ([]Msg, error) {
	if err := checkFetchArgs(max); err != nil {
		return nil, err
	}
	msgs, err := s.h.take(ctx, max, maxWait)
	s.delivered.Add(uint64(len(msgs)))
	if err != nil && !errors.Is(err, ErrSourceClosed) {
		return msgs, err
	}
	if err != nil && len(msgs) == 0 {
		return nil, err
	}
	return msgs, nil
}

// Ack does nothing: core NATS has no acknowledgements.
func (s *CoreSource) Ack(uint64) error { return nil }

// Stats returns the counters. Dropped is read from the subscription, so it
// is current even between slow-consumer events.
func (s *CoreSource) Stats() SourceStats {
	st := SourceStats{
		Delivered:  s.delivered.Load(),
		Buffered:   s.h.buffered(),
		Reconnects: s.nc.Stats().Reconnects,
	}
	if n, err := s.sub.Dropped(); err == nil {
		s.dropped.Store(uint64(n))
	}
	st.Dropped = s.dropped.Load()
	if n, _, err := s.sub.Pending(); err == nil {
		st.Buffered += n
	}
	return st
}

// Close unsubscribes. Messages buffered and not fetched are lost.
func (s *CoreSource) Close() error {
	s.closeOnce.Do(func() {
		if n, err := s.sub.Dropped(); err == nil {
			s.dropped.Store(uint64(n))
		}
		s.h.close()
		if err := s.sub.Unsubscribe(); err != nil && !errors.Is(err, nats.ErrConnectionClosed) && !errors.Is(err, nats.ErrBadSubscription) {
			s.closeErr = fmt.Errorf("unsubscribe from %q: %w", s.subject, err)
		}
		if d := s.dropped.Load(); d > 0 {
			s.log.Warn().Uint64("dropped", d).Uint64("delivered", s.delivered.Load()).Msg("closed after dropping messages")
		}
	})
	return s.closeErr
}
