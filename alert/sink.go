package alert

import (
	"encoding/json"
	"strings"

	"github.com/rs/zerolog"
)

// Sink takes the events of the alert life cycle. Send must not block the
// caller for long (the daemon's loop calls it): a sink that does I/O queues.
type Sink interface {
	Send(ev Event)
}

// Publisher publishes a message on a subject; *nats.Conn's Publish has this
// shape, so the alert package needs no NATS import.
type Publisher interface {
	Publish(subject string, data []byte) error
}

// NATSSink publishes each event's JSON on PREFIX.alerts.CHARACTERISTIC.
// A core NATS publish only buffers in the client, so it does not block.
type NATSSink struct {
	pub    Publisher
	prefix string
	log    zerolog.Logger
}

var (
	_ Sink = (*NATSSink)(nil)
	_ Sink = (*LogSink)(nil)
	_ Sink = (*Webhook)(nil)
)

// NewNATSSink returns the sink publishing through pub under prefix
// (default "lockstep"); failures are logged on log.
func NewNATSSink(pub Publisher, prefix string, log zerolog.Logger) *NATSSink {
	if prefix == "" {
		prefix = "lockstep"
	}
	return &NATSSink{pub: pub, prefix: prefix, log: log}
}

// Subject returns the subject of the events of characteristic char. A
// characteristic name holds no NATS wildcard or separator when it came
// from a subject token; other characters that a token may not hold are
// replaced by "_".
func Subject(prefix, char string) string {
	return prefix + ".alerts." + strings.Map(func(r rune) rune {
		switch r {
		case '.', '*', '>', ' ', '\t', '\r', '\n':
			return '_'
		}
		return r
	}, char)
}

// Send publishes ev.
func (s *NATSSink) Send(ev Event) {
	b, err := json.Marshal(ev)
	if err == nil {
		err = s.pub.Publish(Subject(s.prefix, ev.Alert.Characteristic), b)
	}
	if err != nil {
		s.log.Warn().Err(err).Str("alert", ev.Alert.ID).Str("transition", ev.Transition.String()).Msg("alert event not published")
	}
}

// LogSink writes one structured line per event: warn for raised, info for
// the other transitions, debug for updates.
type LogSink struct{ log zerolog.Logger }

// NewLogSink returns the sink writing to log.
func NewLogSink(log zerolog.Logger) *LogSink { return &LogSink{log: log} }

// Send logs ev.
func (s *LogSink) Send(ev Event) {
	var e *zerolog.Event
	switch ev.Transition {
	case TransitionRaised:
		e = s.log.Warn()
	case TransitionUpdated:
		e = s.log.Debug()
	default:
		e = s.log.Info()
	}
	if !e.Enabled() {
		return
	}
	a := &ev.Alert
	e = e.Str("event", ev.ID).Str("alert", a.ID).Str("characteristic", a.Characteristic).
		Str("kind", a.Kind.String()).Str("key", a.Key).Str("transition", ev.Transition.String()).
		Str("previous", ev.Previous.String()).Str("state", a.State.String()).Strs("groups", a.Groups).
		Str("detector", a.Detector)
	switch a.Kind {
	case KindMeansDiverge:
		e = e.Int("direction", a.Direction).Float64("shift", a.Shift).Float64("lower", a.Lower).Float64("upper", a.Upper).
			Str("unit", a.Unit).Str("test", a.Test).Float64("f", a.F).Float64("p", a.P).Float64("effect", a.Effect)
	case KindSpreadDiverge:
		e = e.Float64("ratio", a.Ratio).Float64("p", a.P)
	case KindInputRejected:
		e = e.Float64("reject_rate", a.RejectRate)
	}
	if ev.Transition == TransitionAcknowledged {
		e = e.Str("acknowledged_by", a.AcknowledgedBy).Str("note", a.Note)
	}
	e.Str("reason", a.Reason).Msg("alert " + ev.Transition.String())
}
