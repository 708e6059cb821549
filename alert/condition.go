package alert

import (
	"time"
)

// This file is the contract between the two halves of the package:
//
//   - the monitor (rule.go, detectors, CUSUM): per characteristic, it turns
//     each evaluation's Input into Conditions, doing the confirmation
//     (Rule.Confirm consecutive evaluations) and the clearing with
//     hysteresis (Rule.ClearAfter quiet evaluations at the looser clearing
//     threshold) itself;
//   - the life cycle (machine.go, events, sinks): it turns Conditions into
//     alert records with states watch → raised → acknowledged → cleared,
//     each transition an Event, persisted, deduplicated across restarts and
//     sent to the sinks.

// Kind is what an alert is about.
type Kind uint8

// The alert kinds.
const (
	KindNone          Kind = iota
	KindMeansDiverge       // one or more groups' means moved away from the others
	KindSpreadDiverge      // one group's spread differs from the others'
	KindGroupSilent        // a group that was reporting stopped while others go on
	KindInputRejected      // the reject rate of the characteristic's input exceeds a threshold
)

var kindNames = [...]string{"", "means-diverge", "spread-diverge", "group-silent", "input-rejected"}

// String returns the kind's name as it appears in JSON, logs and subjects.
func (k Kind) String() string {
	if int(k) < len(kindNames) {
		return kindNames[k]
	}
	return "unknown"
}

// ParseKind returns the Kind named s, or KindNone.
func ParseKind(s string) Kind {
	for k, n := range kindNames {
		if n == s && k != 0 {
			return Kind(k)
		}
	}
	return KindNone
}

// Phase is where a condition stands after one evaluation, as the monitor
// sees it.
type Phase uint8

// The phases of a condition.
const (
	// PhaseWatch: the condition holds at this evaluation but is not (yet)
	// confirmed: it has held for fewer than Rule.Confirm consecutive
	// evaluations. A condition that was in watch and is absent from the
	// next Step's result did not confirm and is gone.
	PhaseWatch Phase = iota + 1
	// PhaseRaise: confirmed at this evaluation or earlier and not cleared;
	// reported at every evaluation while it lasts, with the latest figures.
	PhaseRaise
	// PhaseClear: a raised condition cleared at this evaluation (it stayed
	// below the clearing threshold for Rule.ClearAfter evaluations). It is
	// reported once; afterwards it is absent.
	PhaseClear
)

var phaseNames = [...]string{"", "watch", "raise", "clear"}

// String returns the phase's name.
func (p Phase) String() string {
	if int(p) < len(phaseNames) {
		return phaseNames[p]
	}
	return "unknown"
}

// Condition is what the monitor reports for one alertable condition at one
// evaluation. Figures are in the characteristic's units where they have
// units; fields that do not apply to the kind are zero.
type Condition struct {
	Kind  Kind
	Phase Phase
	// Key tells conditions of the same kind apart within a characteristic:
	// "" for means, spread and input conditions (one of each per
	// characteristic at a time), the group's name for a silent group.
	Key string
	// Detector names what fired, e.g. "F 5m", "Welch F 30m", "CUSUM"
	// (several joined by ", " when more than one holds).
	Detector string
	// Groups names the groups concerned (the divergent ones, the noisy or
	// silent one), in the window's group order.
	Groups []string
	// Direction of a means shift: +1 high, −1 low (0 otherwise).
	Direction int
	// Shift is the named group's mean minus the mean of the others, with
	// its confidence interval [Lower, Upper] (means conditions).
	Shift, Lower, Upper float64
	// Test is "F" or "Welch F"; F and P are its statistic and p-value for
	// the window it was judged on; Effect is ω² of that window.
	Test   string
	F, P   float64
	Effect float64
	// Ratio is the named group's SD over the pooled within-group SD
	// (spread conditions).
	Ratio float64
	// RejectRate is the share of messages rejected (input conditions).
	RejectRate float64
	// From and To bound the window the figures come from.
	From, To time.Time
	// Reason says in one line of words why the condition holds (or
	// cleared), for the log, the dashboard and the events.
	Reason string
}
