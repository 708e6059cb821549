package main

import (
	"sync"

	"github.com/prometheus/client_golang/prometheus"

	"github.com/lockstep-project/lockstep/alert"
)

// alertMetrics are the alert runtime's metrics: events by kind and
// transition, open alerts by kind and state, and the webhook's counters,
// read when /metrics is scraped.
type alertMetrics struct {
	a *alerting

	mu     sync.Mutex
	events map[[2]string]uint64 // kind, transition

	eventsDesc, openDesc, webhookDesc, queuedDesc *prometheus.Desc
}

var _ prometheus.Collector = (*alertMetrics)(nil)

func newAlertMetrics(a *alerting) *alertMetrics {
	return &alertMetrics{
		a: a, events: map[[2]string]uint64{},
		eventsDesc: prometheus.NewDesc("lockstep_alert_events_total",
			"Alert events by kind and transition (watch, raised, acknowledged, cleared, updated).", []string{"kind", "transition"}, nil),
		openDesc: prometheus.NewDesc("lockstep_alerts_open",
			"Open alerts by kind and state (watch, raised, acknowledged).", []string{"kind", "state"}, nil),
		webhookDesc: prometheus.NewDesc("lockstep_alert_webhook_events_total",
			"Alert events through the webhook by result: sent, failed (given up), dropped (queue full) or retried (attempts that failed and were tried again).",
			[]string{"result"}, nil),
		queuedDesc: prometheus.NewDesc("lockstep_alert_webhook_queued", "Alert events waiting for the webhook.", nil, nil),
	}
}

// count counts one event.
func (m *alertMetrics) count(ev alert.Event) {
	m.mu.Lock()
	m.events[[2]string{ev.Alert.Kind.String(), ev.Transition.String()}]++
	m.mu.Unlock()
}

func (m *alertMetrics) Describe(ch chan<- *prometheus.Desc) {
	ch <- m.eventsDesc
	ch <- m.openDesc
	ch <- m.webhookDesc
	ch <- m.queuedDesc
}

func (m *alertMetrics) Collect(ch chan<- prometheus.Metric) {
	m.mu.Lock()
	for k, v := range m.events {
		ch <- prometheus.MustNewConstMetric(m.eventsDesc, prometheus.CounterValue, float64(v), k[0], k[1])
	}
	m.mu.Unlock()
	// Every kind and open state, so that a dashboard sees zeros too.
	open := m.a.openCounts()
	for k := alert.KindMeansDiverge; k <= alert.KindInputRejected; k++ {
		for _, s := range []alert.State{alert.StateWatch, alert.StateRaised, alert.StateAcknowledged} {
			ch <- prometheus.MustNewConstMetric(m.openDesc, prometheus.GaugeValue,
				float64(open[[2]string{k.String(), s.String()}]), k.String(), s.String())
		}
	}
	if w := m.a.webhook(); w != nil {
		st := w.Stats()
		for _, r := range []struct {
			name string
			v    uint64
		}{{"sent", st.Sent}, {"failed", st.Failed}, {"dropped", st.Dropped}, {"retried", st.Retried}} {
			ch <- prometheus.MustNewConstMetric(m.webhookDesc, prometheus.CounterValue, float64(r.v), r.name)
		}
		ch <- prometheus.MustNewConstMetric(m.queuedDesc, prometheus.GaugeValue, float64(st.Queued))
	}
}
