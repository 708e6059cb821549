package alert

import (
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"time"
)

// State is where an alert stands in its life cycle.
type State uint8

// The states of an alert: watch (seen, not yet confirmed) → raised →
// acknowledged → cleared. A watch that does not confirm ends as cleared too.
const (
	StateNone State = iota // before the alert existed (the Previous of its first event)
	StateWatch
	StateRaised
	StateAcknowledged
	StateCleared
)

var stateNames = [...]string{"", "watch", "raised", "acknowledged", "cleared"}

// String returns the state's name as it appears in JSON and logs ("" for
// StateNone).
func (s State) String() string {
	if int(s) < len(stateNames) {
		return stateNames[s]
	}
	return "unknown"
}

// Open reports whether an alert in state s is still open (watch, raised or
// acknowledged).
func (s State) Open() bool { return s == StateWatch || s == StateRaised || s == StateAcknowledged }

// ParseState returns the State named s, and false for an unknown name.
func ParseState(s string) (State, bool) {
	for i, n := range stateNames {
		if n == s && i != 0 {
			return State(i), true
		}
	}
	return StateNone, false
}

// Transition is what an event records.
type Transition uint8

// The transitions. TransitionUpdated is a change of an open alert's figures
// without a change of state.
const (
	TransitionNone Transition = iota
	TransitionWatch
	TransitionRaised
	TransitionAcknowledged
	TransitionCleared
	TransitionUpdated
)

var transitionNames = [...]string{"", "watch", "raised", "acknowledged", "cleared", "updated"}

// String returns the transition's name as it appears in JSON and logs.
func (t Transition) String() string {
	if int(t) < len(transitionNames) {
		return transitionNames[t]
	}
	return "unknown"
}

// ParseTransition returns the Transition named s, and false for an unknown
// name.
func ParseTransition(s string) (Transition, bool) {
	for i, n := range transitionNames {
		if n == s && i != 0 {
			return Transition(i), true
		}
	}
	return TransitionNone, false
}

// Alert is the record of one alert: what it is about, its latest figures
// (from the monitor's Condition) and the times of its life cycle. Zero times
// are "not yet".
type Alert struct {
	// ID is stable: derived from Characteristic, Kind, Key and Opened
	// (AlertID), so the same alert gets the same id after a restart.
	ID             string
	Characteristic string
	Kind           Kind
	Key            string
	State          State

	// The latest figures, as in Condition.
	Groups              []string
	Direction           int
	Shift, Lower, Upper float64
	Unit                string
	Test                string
	F, P, Effect        float64
	Ratio               float64
	RejectRate          float64
	Detector            string
	From, To            time.Time
	Reason              string

	Opened, Raised, Acknowledged time.Time
	AcknowledgedBy, Note         string
	Cleared, Updated             time.Time
}

// Event is one transition of one alert: its id is stable (derived from the
// alert's id, the transition and its time), Alert is the alert as it stands
// after the transition and Previous the state before it.
type Event struct {
	ID         string
	Time       time.Time
	Transition Transition
	Previous   State
	Alert      Alert
}

// AlertID returns the id of the alert of a characteristic, kind and key
// opened at opened: the first 16 bytes of the SHA-256 of those four, in hex.
// No randomness, so ids are the same in every run and after a restart.
func AlertID(characteristic string, kind Kind, key string, opened time.Time) string {
	h := sha256.New()
	writeField(h, characteristic)
	writeField(h, kind.String())
	writeField(h, key)
	var b [8]byte
	binary.BigEndian.PutUint64(b[:], uint64(opened.UnixNano()))
	h.Write(b[:])
	return hex.EncodeToString(h.Sum(nil)[:16])
}

// eventID returns the id of an event: the alert's id, the transition and
// the time, hashed as in AlertID (first 12 bytes).
func eventID(alertID string, t Transition, at time.Time) string {
	h := sha256.New()
	writeField(h, alertID)
	writeField(h, t.String())
	var b [8]byte
	binary.BigEndian.PutUint64(b[:], uint64(at.UnixNano()))
	h.Write(b[:])
	return hex.EncodeToString(h.Sum(nil)[:12])
}

// writeField writes s with its length, so that fields cannot run into each
// other ("ab","c" differs from "a","bc").
func writeField(h interface{ Write([]byte) (int, error) }, s string) {
	var b [binary.MaxVarintLen64]byte
	n := binary.PutUvarint(b[:], uint64(len(s)))
	_, _ = h.Write(b[:n])
	_, _ = h.Write([]byte(s))
}

// clone returns a copy of a that shares no slice with it.
func (a Alert) clone() Alert {
	a.Groups = append([]string(nil), a.Groups...)
	return a
}
