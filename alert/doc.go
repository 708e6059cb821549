// Package alert decides when a characteristic's groups have stopped
// agreeing and carries the resulting alerts through their life cycle. The
// monitor half turns each evaluation's Input into Conditions with a Monitor
// built from a Rule: means diverge (window F tests at several lengths and
// between-group contrast CUSUMs, Page 1954, each with its share of a
// false-alarm budget), spread diverges (Brown–Forsythe), group silent and
// input rejected, with confirmation over consecutive evaluations and
// clearing with hysteresis. The life-cycle half turns Conditions into alert
// records (watch → raised → acknowledged → cleared), events and sinks.
//
// The package imports stats only: the daemon builds each Input from its
// window (see cmd/lockstep's buildAlertInput).
//
// Caveats:
//   - Rule.Alpha is a per-evaluation budget; the false raises per day it
//     gives depend on the rates, the windows and Confirm. Measure them with
//     `lockstep calibrate` rather than reasoning from Alpha alone.
//   - The contrast CUSUMs see each bucket once, when it has ended (see
//     window's EndedSums); values that arrive later, within the allowed
//     lateness, reach the window F tests but not the CUSUMs.
//   - A Monitor is not safe for concurrent use. Its State is small and
//     meant to be persisted with each commit; Restore takes it back.
//   - lockstep is advisory: an alert is a prompt to look, not an interlock.
package alert
