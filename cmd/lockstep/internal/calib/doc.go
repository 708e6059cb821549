// Package calib is the engine behind `lockstep calibrate`: it runs the
// daemon's window and alert monitor code over simulated streams of parallel
// groups — in control, with one group shifted, and with every group
// drifting together — and measures, for a grid of alert settings, the false
// raises per period and the time to raise, beside two per-group textbook
// baselines (a Shewhart chart of subgroup means and a per-group CUSUM on
// each group's own target, Page 1954) held at the same false-alarm rate.
//
// Values are simulated one by one, normal with the given SD, at each
// group's rate, and go through window.Window's Add; each evaluation takes
// the spans and ended buckets from the window as the daemon does
// (SpanSums, EndedSums) and steps one alert.Monitor per grid point on the
// same Input, so every grid point sees the same stream of statistics. The
// full stats.Report is not made (the means detectors do not need it): the
// spread, silent-group and input conditions are not calibrated here, and
// the automatic test is the classic F (the spreads are equal in the
// simulation).
//
// Runs are split into replicates, each with its own random stream derived
// from the seed and its number, and spread over workers; results are
// gathered by replicate number, so the output does not depend on the
// number of workers or their scheduling.
package calib
