package alert

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/http"
	"net/url"
	"sync"
	"sync/atomic"
	"time"

	"github.com/rs/zerolog"
)

// WebhookOptions configure a Webhook. Zero fields take the defaults.
type WebhookOptions struct {
	// URL receives each event's JSON in an HTTP POST; http or https.
	// Required.
	URL string
	// Timeout bounds one POST, from connecting to reading the response.
	// Default 5s.
	Timeout time.Duration
	// Queue is how many events wait for delivery; an event sent while the
	// queue is full is dropped and counted. Default 1000.
	Queue int
	// Attempts is how many times an event is posted before it is given up
	// and counted as failed. Default 10.
	Attempts int
	// Backoff is the wait after the first failed attempt; it doubles after
	// each further one, up to MaxBackoff. Defaults 1s and 1m: ten attempts
	// then span about five minutes, so a webhook that restarts loses
	// nothing.
	Backoff, MaxBackoff time.Duration
	// Client posts the events; default a client with Timeout.
	Client *http.Client
	// Log gets the failures; default silent.
	Log zerolog.Logger
}

// WebhookStats are a Webhook's counters: events delivered (a 2xx
// response), given up (Failed: attempts exhausted, a response that retrying
// cannot help such as 400, or undelivered at Close), dropped because the
// queue was full, waiting now (Queued, the one in delivery included), and
// failed attempts that were retried.
type WebhookStats struct {
	Sent, Failed, Dropped, Retried uint64
	Queued                         int64
}

// Webhook posts events to an HTTP endpoint from a goroutine of its own,
// with retries and exponential backoff, through a bounded queue. Send never
// blocks: a slow or dead endpoint fills the queue, and what does not fit is
// dropped and counted, so the caller (the daemon's loop) is never slowed.
type Webhook struct {
	opt    WebhookOptions
	queue  chan []byte
	stop   context.Context
	cancel context.CancelFunc
	done   chan struct{}

	closeOnce sync.Once
	mu        sync.RWMutex // guards closed against Send
	closed    bool

	sent, failed, dropped, retried atomic.Uint64
	queued                         atomic.Int64
}

// NewWebhook checks the options and starts the delivering goroutine; Close
// stops it.
func NewWebhook(opt WebhookOptions) (*Webhook, error) {
	u, err := url.Parse(opt.URL)
	if err != nil || (u.Scheme != "http" && u.Scheme != "https") || u.Host == "" {
		return nil, fmt.Errorf("create webhook: URL %q is not an http or https URL", opt.URL)
	}
	for _, f := range []struct {
		name string
		v    int64
	}{{"timeout", int64(opt.Timeout)}, {"queue", int64(opt.Queue)}, {"attempts", int64(opt.Attempts)},
		{"backoff", int64(opt.Backoff)}, {"max_backoff", int64(opt.MaxBackoff)}} {
		if f.v < 0 {
			return nil, fmt.Errorf("create webhook: %s is negative", f.name)
		}
	}
	if opt.Timeout == 0 {
		opt.Timeout = 5 * time.Second
	}
	if opt.Queue == 0 {
		opt.Queue = 1000
	}
	if opt.Attempts == 0 {
		opt.Attempts = 10
	}
	if opt.Backoff == 0 {
		opt.Backoff = time.Second
	}
	if opt.MaxBackoff == 0 {
		opt.MaxBackoff = time.Minute
	}
	opt.MaxBackoff = max(opt.MaxBackoff, opt.Backoff)
	if opt.Client == nil {
		opt.Client = &http.Client{Timeout: opt.Timeout}
	}
	w := &Webhook{opt: opt, queue: make(chan []byte, opt.Queue), done: make(chan struct{})}
	w.stop, w.cancel = context.WithCancel(context.Background())
	go w.deliver()
	return w, nil
}

// Send queues ev for delivery and returns at once; when the queue is full
// the event is dropped and counted.
func (w *Webhook) Send(ev Event) {
	b, err := json.Marshal(ev)
	if err != nil {
		w.failed.Add(1)
		w.opt.Log.Error().Err(err).Str("alert", ev.Alert.ID).Msg("alert event not encoded for the webhook")
		return
	}
	w.mu.RLock()
	defer w.mu.RUnlock()
	if w.closed {
		w.dropped.Add(1)
		return
	}
	select {
	case w.queue <- b:
		w.queued.Add(1)
	default:
		if w.dropped.Add(1) == 1 {
			w.opt.Log.Warn().Int("queue", w.opt.Queue).Str("alert", ev.Alert.ID).
				Msg("webhook queue full: alert events are dropped (counted in lockstep_alert_webhook_events_total)")
		}
	}
}

// Stats returns the counters.
func (w *Webhook) Stats() WebhookStats {
	return WebhookStats{Sent: w.sent.Load(), Failed: w.failed.Load(), Dropped: w.dropped.Load(),
		Retried: w.retried.Load(), Queued: w.queued.Load()}
}

// Close stops taking events and delivers those queued until ctx ends; what
// is left then is counted as failed. Calls after the first return nil.
func (w *Webhook) Close(ctx context.Context) error {
	var err error
	w.closeOnce.Do(func() {
		w.mu.Lock()
		w.closed = true
		close(w.queue)
		w.mu.Unlock()
		select {
		case <-w.done:
		case <-ctx.Done():
			w.cancel()
			<-w.done
			err = fmt.Errorf("close webhook: %w; undelivered events counted as failed", ctx.Err())
		}
		w.cancel()
	})
	return err
}

// deliver posts the queued events one after the other.
func (w *Webhook) deliver() {
	defer close(w.done)
	for b := range w.queue {
		w.post(b)
		w.queued.Add(-1)
	}
}

// errPermanent marks a response that retrying cannot help.
var errPermanent = errors.New("not retried")

// post delivers one event, retrying with backoff.
func (w *Webhook) post(b []byte) {
	wait := w.opt.Backoff
	for attempt := 1; ; attempt++ {
		if w.stop.Err() != nil {
			w.failed.Add(1)
			return
		}
		err := w.once(b)
		if err == nil {
			w.sent.Add(1)
			return
		}
		if errors.Is(err, errPermanent) || attempt >= w.opt.Attempts {
			w.failed.Add(1)
			w.opt.Log.Error().Err(err).Int("attempts", attempt).Msg("alert event not delivered to the webhook; given up")
			return
		}
		w.retried.Add(1)
		w.opt.Log.Warn().Err(err).Int("attempt", attempt).Dur("retry_in", wait).Msg("webhook delivery failed; retrying")
		t := time.NewTimer(wait)
		select {
		case <-t.C:
		case <-w.stop.Done():
			t.Stop()
		}
		wait = min(2*wait, w.opt.MaxBackoff)
	}
}

// once posts b once.
func (w *Webhook) once(b []byte) error {
	ctx, cancel := context.WithTimeout(w.stop, w.opt.Timeout)
	defer cancel()
	req, err := http.NewRequestWithContext(ctx, http.MethodPost, w.opt.URL, bytes.NewReader(b))
	if err != nil {
		return fmt.Errorf("post alert event: %w: %w", err, errPermanent)
	}
	req.Header.Set("Content-Type", "application/json")
	req.Header.Set("User-Agent", "lockstep")
	resp, err := w.opt.Client.Do(req)
	if err != nil {
		return fmt.Errorf("post alert event: %w", err)
	}
	_, _ = io.Copy(io.Discard, io.LimitReader(resp.Body, 64<<10))
	resp.Body.Close()
	switch s := resp.StatusCode; {
	case s >= 200 && s < 300:
		return nil
	case s == http.StatusRequestTimeout || s == http.StatusTooManyRequests || s >= 500:
		return fmt.Errorf("post alert event: %s", resp.Status)
	default:
		return fmt.Errorf("post alert event: %s: %w", resp.Status, errPermanent)
	}
}
