package main

import (
	"context"
	"errors"
	"time"

	"github.com/rs/zerolog"

	"github.com/lockstep-project/lockstep/ingest"
	"github.com/lockstep-project/lockstep/stats"
)

// The ingest stage runs on a goroutine of its own, ahead of the apply loop:
// it fetches a batch of messages, skips those at or below the applied stream
// sequence, decodes and validates the rest (the Validator is the stage's
// alone), republishes the rejects, and hands the loop the batch's outcomes
// in message order. The loop adds the accepted values to their windows,
// commits and acknowledges (commit.go). So decoding and validation of one
// batch overlap with the window updates and commit work of the one before,
// on another core. Within a batch the stage decodes stageAhead messages
// before it checks them, so that the Validator can fetch their places in
// the duplicate-id memory together (ingest.Validator.Prefetch); the checks
// still run one message after another, in order.
//
// Order. The stage passes every message it does not skip to the loop, in
// the order fetched, and the loop applies them in that order; the stage's
// cursor (the highest sequence it passed on) is therefore the loop's
// cursor a batch or two ahead, and skipping against it is what skipping
// against the loop's cursor was. Fetch runs here and Ack on the loop's
// goroutine; ingest.Source allows that.

// stageDepth is the number of prepared batches that may wait for the loop;
// the stage fetches no further until the loop takes one.
const stageDepth = 2

// itemKind says what one stage item is.
type itemKind uint8

const (
	itemSkip   itemKind = iota // a message at or below the cursor, to acknowledge only
	itemAccept                 // an accepted measurement
	itemReject                 // a rejected measurement or message, counted and dead-lettered
	itemEnd                    // the end of a message that was not skipped (its sequence, if any, is applied)
)

// textSpan is a piece of a stageBatch's text.
type textSpan struct{ off, n uint32 }

// stageItem is one outcome of the stage, in message order.
type stageItem struct {
	kind  itemKind
	seq   uint64 // itemSkip, itemEnd: the message's stream sequence (0: core NATS)
	char  string // itemAccept; itemReject: as far as the subject names it
	ref   stats.Reference
	t     time.Time
	value float64
	exact bool

	group, text, id, unit textSpan
}

// stageBatch is one fetched batch, prepared. The texts of its accepted
// measurements (group, decimal text, id, unit) are copied into buf, since
// the decoder reuses its buffers, and str is buf as one string, so that raw
// values take their texts from it without an allocation each.
type stageBatch struct {
	items []stageItem
	buf   []byte
	str   string
	err   error // why the stage ended, after these items; nil while it runs
}

// keep copies b into the batch's text.
func (sb *stageBatch) keep(b []byte) textSpan {
	s := textSpan{off: uint32(len(sb.buf)), n: uint32(len(b))}
	sb.buf = append(sb.buf, b...)
	return s
}

// bytes returns a span of the text as bytes, valid while the batch is.
func (sb *stageBatch) bytes(s textSpan) []byte { return sb.buf[s.off : s.off+s.n] }

// string returns a span of the text as a string, kept by the raw values.
func (sb *stageBatch) string(s textSpan) string { return sb.str[s.off : s.off+s.n] }

// stage is the ingest stage. Only its goroutine uses it, apart from out and
// free.
type stage struct {
	src          ingest.Source
	val          *ingest.Validator
	dead         deadLetterSink // nil: rejects are only counted
	log          zerolog.Logger
	now          func() time.Time
	stampStored  bool
	rejectPrefix string
	max          int    // messages per fetch
	cursor       uint64 // highest stream sequence passed on

	// Messages are decoded stageAhead at a time, each with a decoder of its
	// own, and the Validator prefetches their ids before checking them.
	decs     [stageAhead]ingest.Decoder
	payloads [stageAhead][]ingest.Payload
	errs     [stageAhead]error
	subj     []byte
	sink     uint64 // keeps the prefetch reads

	out  chan *stageBatch // to the loop, in order
	free chan *stageBatch // batches the loop has applied, for reuse
}

// newStage returns the stage for d, starting from d's cursor.
func (d *daemon) newStage() *stage {
	return &stage{
		src: d.src, val: d.val, dead: d.dead, log: d.log, now: d.now,
		stampStored: d.stampStored, rejectPrefix: d.rejectPrefix, max: d.commitValues, cursor: d.cursor,
		out:  make(chan *stageBatch, stageDepth),
		free: make(chan *stageBatch, stageDepth+2),
	}
}

// run fetches and prepares batches until ctx ends or the source closes; its
// last batch carries that error. It returns without it when quit closes.
func (s *stage) run(ctx context.Context, quit <-chan struct{}) {
	for {
		msgs, err := s.src.Fetch(ctx, s.max, maxIdle)
		var b *stageBatch
		if len(msgs) > 0 {
			b = s.prepare(msgs)
		}
		final := err != nil && (ctx.Err() != nil || errors.Is(err, ingest.ErrSourceClosed))
		if final {
			if b == nil {
				b = s.batch()
			}
			b.err = err
		}
		if b != nil {
			select {
			case s.out <- b:
			case <-quit:
				return
			}
		}
		switch {
		case final:
			return
		case err != nil:
			s.log.Warn().Err(err).Msg("fetch failed; retrying")
			select {
			case <-ctx.Done():
			case <-quit:
				return
			case <-time.After(100 * time.Millisecond):
			}
		}
	}
}

// batch returns an empty batch, reusing one the loop gave back.
func (s *stage) batch() *stageBatch {
	select {
	case b := <-s.free:
		return b
	default:
		return &stageBatch{}
	}
}

// recycle gives an applied batch back to the stage.
func (s *stage) recycle(b *stageBatch) {
	clear(b.items)
	b.items, b.buf, b.str, b.err = b.items[:0], b.buf[:0], "", nil
	select {
	case s.free <- b:
	default:
	}
}

// stageAhead is how many messages the stage decodes before it checks them:
// their lookups in the duplicate-id memory, each a cache miss at the default
// memory size, then overlap (ingest.Validator.Prefetch).
const stageAhead = 8

// prepare skips, decodes and validates msgs.
func (s *stage) prepare(msgs []ingest.Msg) *stageBatch {
	b := s.batch()
	for lo := 0; lo < len(msgs); lo += stageAhead {
		group := msgs[lo:min(lo+stageAhead, len(msgs))]
		for j := range group {
			msg := &group[j]
			s.payloads[j], s.errs[j] = nil, nil
			if msg.Seq != 0 && msg.Seq <= s.cursor {
				continue // skipped: the cursor only rises
			}
			s.payloads[j], s.errs[j] = s.decs[j].Decode(msg.Data)
			s.subj = append(s.subj[:0], msg.Subject...)
			s.val.Prefetch(s.subj, s.payloads[j])
		}
		s.sink += s.val.LoadPrefetched()
		for j := range group {
			s.message(b, &group[j], s.payloads[j], s.errs[j])
		}
	}
	clear(s.payloads[:])
	b.str = string(b.buf)
	return b
}

// message prepares one message, decoded by prepare into payloads or err:
// skipped when its sequence was passed on before, otherwise validated, each
// measurement on its own.
func (s *stage) message(b *stageBatch, msg *ingest.Msg, payloads []ingest.Payload, err error) {
	if msg.Seq != 0 && msg.Seq <= s.cursor {
		b.items = append(b.items, stageItem{kind: itemSkip, seq: msg.Seq})
		return
	}
	now := msg.Arrived
	if s.stampStored && !msg.Stored.IsZero() {
		now = msg.Stored
	}
	s.subj = append(s.subj[:0], msg.Subject...)
	if err != nil {
		r, rerr := s.val.Reject(s.subj, err)
		s.reject(b, r, rerr, msg)
	}
	var m ingest.Measurement // on the stack: Check's writes need no write barriers
	for i := range payloads {
		p := &payloads[i]
		r, rerr := s.val.Check(now, s.subj, p, &m)
		if r != ingest.ReasonNone {
			s.reject(b, r, rerr, msg)
			continue
		}
		b.items = append(b.items, stageItem{
			kind: itemAccept, char: m.Characteristic, ref: m.Reference, t: m.Time, value: m.Value, exact: m.Exact,
			group: b.keep(m.Group), text: b.keep(m.Text), id: b.keep(m.ID), unit: b.keep(p.Unit),
		})
	}
	if msg.Seq != 0 {
		s.cursor = msg.Seq
	}
	b.items = append(b.items, stageItem{kind: itemEnd, seq: msg.Seq})
}

// reject republishes a rejected measurement (or message) to its dead-letter
// subject. It was counted by the Validator; it reaches no sum.
func (s *stage) reject(b *stageBatch, r ingest.Reason, err error, msg *ingest.Msg) {
	char := ""
	var re *ingest.RejectError
	if errors.As(err, &re) {
		char = re.Characteristic
	}
	b.items = append(b.items, stageItem{kind: itemReject, char: char})
	if e := s.log.Debug(); e.Enabled() {
		e.Str("reason", r.String()).Str("subject", msg.Subject).Uint64("seq", msg.Seq).Err(err).Msg("measurement rejected")
	}
	if s.dead != nil {
		s.dead.Publish(ingest.DeadLetterSubject(s.rejectPrefix, char), ingest.RejectMessage(r, err, msg.Subject, msg.Data, s.now()))
	}
}
