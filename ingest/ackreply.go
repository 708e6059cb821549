package ingest

import (
	"strings"
	"time"
)

// ackMeta is what the JetStream source needs of a delivered message's
// metadata, read from its reply subject.
type ackMeta struct {
	delivered   uint64    // times the message was delivered, 1 the first time
	streamSeq   uint64    // the message's stream sequence
	consumerSeq uint64    // the delivery's consumer sequence
	stored      time.Time // when the stream stored the message
	pending     uint64    // messages of the consumer's subjects not yet delivered
}

// parseAckReply reads the metadata of a JetStream message from its reply
// (ack) subject without allocating, and reports whether the subject has the
// form it expects. The form is that of the NATS server's ack subjects, as
// nats.go reads them (jetstream.Msg.Metadata, internal/parser), in two
// versions:
//
//	$JS.ACK.<stream>.<consumer>.<delivered>.<sseq>.<cseq>.<tm>.<pending>
//	$JS.ACK.<domain>.<account hash>.<stream>.<consumer>.<delivered>.<sseq>.<cseq>.<tm>.<pending>[.<token>...]
//
// with 9 tokens in the first and at least 11 in the second, <tm> in Unix
// nanoseconds. It is stricter than nats.go: a number must be decimal
// digits, not empty, and fit in 63 bits (nats.go reads anything else as 0
// or wraps around); on false, use jetstream.Msg.Metadata, which gives the
// error or the lenient reading.
func parseAckReply(reply string) (ackMeta, bool) {
	const prefix = "$JS.ACK."
	if !strings.HasPrefix(reply, prefix) {
		return ackMeta{}, false
	}
	// One pass: the ends of the first 9 tokens after $JS.ACK., and how
	// many tokens there are (7 in version 1, at least 9 in version 2).
	rest := reply[len(prefix):]
	var ends [9]int
	n := 0
	for i := 0; i < len(rest); i++ {
		if rest[i] == '.' {
			if n < len(ends) {
				ends[n] = i
			}
			n++
		}
	}
	if n < len(ends) {
		ends[n] = len(rest)
	}
	n++        // tokens
	first := 2 // the token of <delivered>, 0-based: after stream and consumer
	switch {
	case n == 7:
	case n >= 9:
		first = 4 // after domain and account hash too
	default:
		return ackMeta{}, false
	}
	var nums [5]uint64
	for i := range nums {
		k := first + i
		start := 0
		if k > 0 {
			start = ends[k-1] + 1
		}
		x, ok := parseAckNum(rest[start:ends[k]])
		if !ok {
			return ackMeta{}, false
		}
		nums[i] = x
	}
	return ackMeta{
		delivered:   nums[0],
		streamSeq:   nums[1],
		consumerSeq: nums[2],
		stored:      time.Unix(0, int64(nums[3])),
		pending:     nums[4],
	}, true
}

// parseAckNum reads a token of decimal digits below 2⁶³.
func parseAckNum(s string) (uint64, bool) {
	if s == "" || len(s) > 19 { // 19 digits may still exceed 2⁶³−1: checked below
		return 0, false
	}
	var x uint64
	for i := 0; i < len(s); i++ {
		c := s[i]
		if c < '0' || c > '9' {
			return 0, false
		}
		x = x*10 + uint64(c-'0') // at most 19 digits: no uint64 overflow
	}
	if x > 1<<63-1 {
		return 0, false
	}
	return x, true
}
