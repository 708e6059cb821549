package main

import (
	"time"

	"github.com/lockstep-project/lockstep/alert"
	"github.com/lockstep-project/lockstep/stats"
	"github.com/lockstep-project/lockstep/window"
)

// buildAlertInput makes the alert monitor's Input for one evaluation of
// window w at now, whose evaluation ev the caller has just made with
// w.Evaluate(now, ...):
//
//   - one Span per rule.Windows entry, the last Length of whole buckets
//     before now (w.SpanSums);
//   - Recent, the buckets that ended in (prev, now] (w.EndedSums): prev is
//     the previous evaluation's now, persisted with the monitor's state so
//     that after a restart no bucket reaches the CUSUMs twice; zero on the
//     very first evaluation, which then takes every bucket kept as one
//     increment;
//   - the main window's report and bounds, the silent groups and each
//     group's last-seen bound from ev;
//   - accepted and rejected, the characteristic's message counts since the
//     previous evaluation.
//
// It costs O(groups × buckets in the spans); the slices are new, so the
// Input may be kept.
func buildAlertInput(w *window.Window, ev window.Evaluation, now time.Time, rule alert.Rule, prev time.Time,
	accepted, rejected uint64, unit string, ref stats.Reference) alert.Input {
	in := alert.Input{
		Time: now, Unit: unit, Reference: ref,
		Groups:     append([]string(nil), w.Groups()...),
		RecentFrom: prev,
		ReportFrom: ev.From, ReportTo: ev.To,
		Silent:   append([]string(nil), ev.Silent...),
		Accepted: accepted, Rejected: rejected,
	}
	rep := ev.Report
	in.Report = &rep
	bucket := w.Config().Bucket
	// The end of the last whole bucket: buckets are counted from the Unix
	// epoch, as the window counts them.
	bns := int64(bucket)
	ens := now.UnixNano() / bns * bns
	if ens > now.UnixNano() {
		ens -= bns
	}
	end := time.Unix(0, ens).UTC()
	for _, d := range rule.Windows {
		n := max(d.Length/bucket, 1)
		in.Spans = append(in.Spans, alert.Span{
			Length: d.Length, From: end.Add(-n * bucket), To: end,
			Groups: w.SpanSums(now, d.Length, nil),
		})
	}
	in.Recent = w.EndedSums(prev, now, nil)
	in.LastSeen = make([]time.Time, len(in.Groups))
	for i, c := range ev.Counts {
		if i < len(in.LastSeen) {
			in.LastSeen[i] = c.Last
		}
	}
	return in
}
