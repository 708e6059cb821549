package main

import (
	"sync/atomic"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/collectors"

	"github.com/lockstep-project/lockstep/ingest"
)

// metrics are the daemon's Prometheus metrics, in a registry of their own
// (never the global one). Counters that ingest keeps already (accepted and
// rejected measurements by reason, the source's deliveries and drops, the
// dead letters) are read from there when /metrics is scraped, so that the
// numbers cannot disagree; the loop's own counts are atomics read the same
// way, and the histograms are observed by the loop.
type metrics struct {
	reg *prometheus.Registry

	commitValues  prometheus.Histogram
	commitSeconds prometheus.Histogram
	evalSeconds   prometheus.Histogram

	applied, skipped                 atomic.Uint64 // messages
	added, late, expired, winRejects atomic.Uint64 // values, by window result
	characteristics                  atomic.Int64
	cursor                           atomic.Uint64
}

// newMetrics returns the metrics with the histograms, the loop's counters
// and the Go and process collectors registered.
func newMetrics() *metrics {
	m := &metrics{
		reg: prometheus.NewRegistry(),
		commitValues: prometheus.NewHistogram(prometheus.HistogramOpts{
			Name:    "lockstep_commit_values",
			Help:    "Values and rejects in one store commit.",
			Buckets: prometheus.ExponentialBuckets(1, 4, 9), // 1 … 65536
		}),
		commitSeconds: prometheus.NewHistogram(prometheus.HistogramOpts{
			Name:    "lockstep_commit_duration_seconds",
			Help:    "Time of one store commit, fsync included.",
			Buckets: prometheus.ExponentialBuckets(0.0001, 2.5, 12), // 0.1 ms … 2.4 s
		}),
		evalSeconds: prometheus.NewHistogram(prometheus.HistogramOpts{
			Name:    "lockstep_evaluation_duration_seconds",
			Help:    "Time of one evaluation of one characteristic's window.",
			Buckets: prometheus.ExponentialBuckets(0.00005, 2.5, 12), // 50 µs … 1.2 s
		}),
	}
	m.reg.MustRegister(m.commitValues, m.commitSeconds, m.evalSeconds,
		collectors.NewGoCollector(), collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}),
		&loopCollector{m: m})
	return m
}

// watch registers the counters of ingest: the validator's, the source's and
// the dead letters' (dead may be nil).
func (m *metrics) watch(counters *ingest.Counters, src ingest.Source, dead *ingest.DeadLetters) {
	m.reg.MustRegister(&ingestCollector{counters: counters, src: src, dead: dead})
}

var (
	_ prometheus.Collector = (*loopCollector)(nil)
	_ prometheus.Collector = (*ingestCollector)(nil)
)

// loopCollector reports the loop's atomics.
type loopCollector struct{ m *metrics }

func (c *loopCollector) descs() (msgs, values, chars, cursor *prometheus.Desc) {
	return prometheus.NewDesc("lockstep_messages_total",
			"Messages fetched, by result: applied, or skipped as at or below the stored cursor (a redelivery).", []string{"result"}, nil),
		prometheus.NewDesc("lockstep_window_values_total",
			"Accepted values by what the window did with them: added; late or expired (kept for replay, not in the live window); rejected (time out of range).",
			[]string{"result"}, nil),
		prometheus.NewDesc("lockstep_characteristics", "Characteristics with a live window.", nil, nil),
		prometheus.NewDesc("lockstep_cursor_sequence", "Last stream sequence committed to the store (JetStream).", nil, nil)
}

func (c *loopCollector) Describe(ch chan<- *prometheus.Desc) {
	a, b, d, e := c.descs()
	ch <- a
	ch <- b
	ch <- d
	ch <- e
}

func (c *loopCollector) Collect(ch chan<- prometheus.Metric) {
	msgs, values, chars, cursor := c.descs()
	m := c.m
	counter := func(d *prometheus.Desc, v uint64, label string) {
		ch <- prometheus.MustNewConstMetric(d, prometheus.CounterValue, float64(v), label)
	}
	counter(msgs, m.applied.Load(), "applied")
	counter(msgs, m.skipped.Load(), "skipped")
	counter(values, m.added.Load(), "added")
	counter(values, m.late.Load(), "late")
	counter(values, m.expired.Load(), "expired")
	counter(values, m.winRejects.Load(), "rejected")
	ch <- prometheus.MustNewConstMetric(chars, prometheus.GaugeValue, float64(m.characteristics.Load()))
	ch <- prometheus.MustNewConstMetric(cursor, prometheus.GaugeValue, float64(m.cursor.Load()))
}

// ingestCollector reports the counters ingest keeps.
type ingestCollector struct {
	counters *ingest.Counters
	src      ingest.Source
	dead     *ingest.DeadLetters
}

type ingestDescs struct {
	measurements, rejects, dropped, redelivered, resets, reconnects, lag, dead *prometheus.Desc
}

func (c *ingestCollector) descs() ingestDescs {
	return ingestDescs{
		measurements: prometheus.NewDesc("lockstep_measurements_total",
			"Measurements checked, by result: accepted, or rejected (see lockstep_rejects_total).", []string{"result"}, nil),
		rejects: prometheus.NewDesc("lockstep_rejects_total",
			"Measurements rejected, by reason; none of them reaches the sums.", []string{"reason"}, nil),
		dropped: prometheus.NewDesc("lockstep_dropped_messages_total",
			"Messages the core NATS subscription dropped because lockstep fell behind; reports of the windows they touch are marked incomplete.", nil, nil),
		redelivered: prometheus.NewDesc("lockstep_redelivered_messages_total",
			"JetStream messages delivered again (after a restart, a reset or an expired ack wait).", nil, nil),
		resets: prometheus.NewDesc("lockstep_consumer_resets_total",
			"Resets of the JetStream consumer to its ack floor.", nil, nil),
		reconnects: prometheus.NewDesc("lockstep_nats_reconnects_total", "Reconnections to NATS.", nil, nil),
		lag: prometheus.NewDesc("lockstep_consumer_lag_messages",
			"Messages in the stream not yet delivered to the consumer, as of the last fetch (JetStream).", nil, nil),
		dead: prometheus.NewDesc("lockstep_dead_letters_total",
			"Rejects republished to the dead-letter subjects, by result: published, dropped (queue full) or failed.", []string{"result"}, nil),
	}
}

func (c *ingestCollector) Describe(ch chan<- *prometheus.Desc) {
	d := c.descs()
	for _, x := range []*prometheus.Desc{d.measurements, d.rejects, d.dropped, d.redelivered, d.resets, d.reconnects, d.lag, d.dead} {
		ch <- x
	}
}

func (c *ingestCollector) Collect(ch chan<- prometheus.Metric) {
	d := c.descs()
	counter := func(desc *prometheus.Desc, v uint64, labels ...string) {
		ch <- prometheus.MustNewConstMetric(desc, prometheus.CounterValue, float64(v), labels...)
	}
	counter(d.measurements, c.counters.Accepted(), "accepted")
	counter(d.measurements, c.counters.RejectedTotal(), "rejected")
	for r := range ingest.Reasons() {
		counter(d.rejects, c.counters.Rejected(r), r.String())
	}
	st := c.src.Stats()
	counter(d.dropped, st.Dropped)
	counter(d.redelivered, st.Redelivered)
	counter(d.resets, st.Resets)
	counter(d.reconnects, st.Reconnects)
	if l, ok := c.src.(interface{ Lag() uint64 }); ok {
		ch <- prometheus.MustNewConstMetric(d.lag, prometheus.GaugeValue, float64(l.Lag()))
	}
	if c.dead != nil {
		ds := c.dead.Stats()
		counter(d.dead, ds.Published, "published")
		counter(d.dead, ds.Dropped, "dropped")
		counter(d.dead, ds.Failed, "failed")
	}
}
