// Package replay re-runs the evaluations of one characteristic over a stored
// period: it rebuilds the rolling window from the store, either from the
// retained raw values (re-added, in time order, to a fresh window.Window:
// exact) or from the stored bucket states (window.Restore, when the raw
// values have aged out), evaluates it at every step, and turns each
// evaluation into a Row for the table, CSV and JSON-lines writers.
//
// The core types are Spec (what to replay, with which window and step),
// Plan (a Spec checked against the store: the source, the groups, the
// number of evaluations), Eval (one evaluation, as window.Evaluate made it),
// Row (what a replay prints of it) and the Writer implementations.
//
// Semantics: the evaluation at time T sees the values stamped before T, as
// the daemon's evaluation at wall-clock time T sees the values that arrived
// before it. Evaluations are at From, From+Step, … up to and including To.
//
// Caveats:
//   - Memory is constant in the length of the period: the store's iterators
//     are streamed and only one window is held. A count-based window is
//     rebuilt from the characteristic's first retained value, so its time
//     grows with the retained history.
//   - Replay from raw values re-adds every value in time order, so a value
//     the daemon found late (and kept only for replay) is in the replayed
//     window. Without late values, and with the daemon's history (the same
//     groups first seen in the same order, the same evaluation times since
//     the characteristic's first value or the daemon's last start), the
//     replay reproduces the daemon's evaluations bit for bit; otherwise to
//     rounding, because the window's sliding aggregate merges buckets in
//     groupings that depend on its history (see package window).
//   - Replay from bucket states needs the window length, the step and From
//     on multiples of the stored bucket width, and the bucket and sample
//     settings the states were stored with.
package replay
