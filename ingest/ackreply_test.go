package ingest

import (
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/nats-io/nats.go/jetstream"
	"github.com/rs/zerolog"
)

// TestParseAckReply reads ack subjects of both versions; the forms are the
// ones nats.go documents in internal/parser (GetMetadataFields).
func TestParseAckReply(t *testing.T) {
	stored := time.Unix(0, 1764657000123456789)
	want := ackMeta{delivered: 2, streamSeq: 12345, consumerSeq: 678, stored: stored, pending: 9}
	for _, s := range []string{
		"$JS.ACK.FILL.lockstep.2.12345.678.1764657000123456789.9",
		"$JS.ACK._.ACCHASH.FILL.lockstep.2.12345.678.1764657000123456789.9.random",
		"$JS.ACK.hub.ACCHASH.FILL.lockstep.2.12345.678.1764657000123456789.9", // 11 tokens: no final one
		"$JS.ACK.hub.ACCHASH.FILL.lockstep.2.12345.678.1764657000123456789.9.a.b",
	} {
		got, ok := parseAckReply(s)
		if !ok || got.delivered != want.delivered || got.streamSeq != want.streamSeq || got.consumerSeq != want.consumerSeq ||
			!got.stored.Equal(want.stored) || got.pending != want.pending {
			t.Errorf("parseAckReply(%q) = %+v, %v; want %+v", s, got, ok, want)
		}
	}
	for _, s := range []string{
		"",
		"$JS.ACK.FILL.lockstep.2.12345.678.1764657000123456789",            // 8 tokens
		"$JS.ACK.hub.FILL.lockstep.2.12345.678.1764657000123456789.9",      // 10 tokens
		"$JS.NAK.FILL.lockstep.2.12345.678.1764657000123456789.9",          // not an ack subject
		"$JS.ACK.FILL.lockstep.2.12x45.678.1764657000123456789.9",          // not digits
		"$JS.ACK.FILL.lockstep..12345.678.1764657000123456789.9",           // empty number
		"$JS.ACK.FILL.lockstep.2.-1.678.1764657000123456789.9",             // sign
		"$JS.ACK.FILL.lockstep.2.9223372036854775808.678.17646570001.9",    // 2⁶³
		"$JS.ACK.FILL.lockstep.2.99999999999999999999.678.17646570001.9",   // 20 digits
		"_INBOX.abc.FILL.lockstep.2.12345.678.1764657000123456789.9.x.y.z", // a plain reply
	} {
		if got, ok := parseAckReply(s); ok {
			t.Errorf("parseAckReply(%q) = %+v, want false", s, got)
		}
	}
	if got, ok := parseAckReply("$JS.ACK.S.C.1.9223372036854775807.1.0.0"); !ok || got.streamSeq != 1<<63-1 {
		t.Errorf("2⁶³−1: %+v, %v", got, ok)
	}
}

// TestParseAckReplyServer: on messages a JetStream server delivered,
// parseAckReply agrees with jetstream.Msg.Metadata.
func TestParseAckReplyServer(t *testing.T) {
	ts := runTestServer(t)
	nc := ts.connect(t, zerolog.Nop())
	js := newJS(t, nc)
	createTestStream(t, js, "ACKS", "acks.>")
	publishJS(t, js, "acks.a", 1, 5)
	ctx := testCtx(t, 10*time.Second)
	cons, err := js.CreateConsumer(ctx, "ACKS", jetstream.ConsumerConfig{Durable: "d", AckPolicy: jetstream.AckExplicitPolicy})
	if err != nil {
		t.Fatal(err)
	}
	batch, err := cons.Fetch(5, jetstream.FetchMaxWait(5*time.Second))
	if err != nil {
		t.Fatal(err)
	}
	n := 0
	for m := range batch.Messages() {
		n++
		md, err := m.Metadata()
		if err != nil {
			t.Fatal(err)
		}
		got, ok := parseAckReply(m.Reply())
		if !ok || got.delivered != md.NumDelivered || got.streamSeq != md.Sequence.Stream || got.consumerSeq != md.Sequence.Consumer ||
			!got.stored.Equal(md.Timestamp) || got.pending != md.NumPending {
			t.Errorf("reply %q: parseAckReply %+v, %v; Metadata %+v", m.Reply(), got, ok, md)
		}
	}
	if n != 5 {
		t.Fatalf("fetched %d of 5 messages", n)
	}
}

// FuzzParseAckReply: parseAckReply never panics, and what it accepts is
// what a plain split of the subject into its tokens says.
func FuzzParseAckReply(f *testing.F) {
	f.Add("$JS.ACK.FILL.lockstep.2.12345.678.1764657000123456789.9")
	f.Add("$JS.ACK._.ACCHASH.FILL.lockstep.2.12345.678.1764657000123456789.9.random")
	f.Add("$JS.ACK.a.b.c.d.e.f.g")
	f.Fuzz(func(t *testing.T, s string) {
		got, ok := parseAckReply(s)
		if !ok {
			return
		}
		tok := strings.Split(s, ".")
		if tok[0] != "$JS" || tok[1] != "ACK" || len(tok) != 9 && len(tok) < 11 {
			t.Fatalf("accepted %q", s)
		}
		first := 4
		if len(tok) >= 11 {
			first = 6
		}
		for i, x := range []uint64{got.delivered, got.streamSeq, got.consumerSeq, uint64(got.stored.UnixNano()), got.pending} {
			if strconv.FormatUint(x, 10) != strings.TrimLeft(tok[first+i], "0") && !(x == 0 && strings.Trim(tok[first+i], "0") == "") {
				t.Fatalf("%q: number %d read as %d", s, i, x)
			}
		}
	})
}
