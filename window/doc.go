// Package window keeps the rolling window of one characteristic: per-group
// accumulators in time buckets (or the last N values per group), closed by a
// watermark and aggregated by a sliding aggregation whose cost does not grow
// with the window's length. Each evaluation turns the window into a
// stats.Report, together with the window's bounds, each group's count and
// the groups that went silent.
//
// The core types are Config (bucket width, window length, allowed lateness,
// silence, sample size, or a count), Window (one characteristic; Group
// interns group names, Add takes a centred value and returns a Result:
// Added, Late, Expired or Rejected), and Evaluation (the result of
// Evaluate). Buckets and Restore carry a window across a restart.
//
// Time is injected: event times come with each value, and Evaluate and
// Sums take now; the package never reads the clock and uses no global
// random source.
//
// Caveats:
//   - A Window is not safe for concurrent use.
//   - The watermark follows the largest event time of any group: one value
//     stamped far in the future makes everything after it late. Reject
//     implausible event times before Add.
//   - now should not go backwards; buckets dropped for a later now do not
//     come back. Data stamped after now extend the window to their bucket.
//   - Merging accumulators rounds, and the two-stacks aggregation merges
//     buckets in groupings that depend on the window's history, so two
//     windows with the same buckets agree to rounding, not bit for bit,
//     unless both were re-formed (Buckets re-forms the window; a restored
//     window starts re-formed).
//   - The values behind the value-based tests are a stratified sample:
//     up to Config.Sample per group and bucket (see Config.Sample).
//   - Silence is measured to the bucket in a time-based window: a group is
//     reported silent up to one bucket late, never early.
package window
