package main

import (
	"errors"
	"fmt"
	"net/url"
	"time"

	"github.com/lockstep-project/lockstep/alert"
)

// AlertsConfig is the [alerts] section: the default alert rule of every
// characteristic (a characteristic's own [characteristics.NAME.alert]
// section changes what it sets), where alert events go, and how long
// cleared alerts are kept.
type AlertsConfig struct {
	AlertRuleConfig
	// SubjectPrefix starts the NATS subjects of the alert events,
	// PREFIX.alerts.CHARACTERISTIC. Default "lockstep".
	SubjectPrefix string `toml:"subject_prefix"`
	// Retain deletes cleared alerts that closed longer ago than this, once
	// an hour. Default 720h (30 days); 0 keeps them all.
	Retain Duration `toml:"retain"`
	// ClearAbsent clears a raised or acknowledged alert whose condition
	// the monitor has not reported for this many evaluations (a monitor
	// that lost its state). Default 60; 0: never.
	ClearAbsent *int `toml:"clear_absent"`
	// Webhook posts every alert event's JSON to a URL.
	Webhook WebhookConfig `toml:"webhook"`
}

// WebhookConfig is [alerts.webhook]. With no URL there is no webhook.
type WebhookConfig struct {
	// URL receives an HTTP POST of each event's JSON (http or https).
	URL string `toml:"url"`
	// Timeout bounds one POST (default 5s); Queue is how many events wait
	// for delivery before new ones are dropped and counted (default 1000);
	// Attempts is how often an event is tried (default 10), waiting
	// Backoff after the first failure (default 1s), doubling up to
	// MaxBackoff (default 1m).
	Timeout    Duration `toml:"timeout"`
	Queue      int      `toml:"queue"`
	Attempts   int      `toml:"attempts"`
	Backoff    Duration `toml:"backoff"`
	MaxBackoff Duration `toml:"max_backoff"`
}

// AlertRuleConfig is an alert rule as written in [alerts] or in
// [characteristics.NAME.alert]: an absent key keeps the value from the
// level above (the built-in defaults of alert.DefaultRule, then [alerts]).
// windows and cusums, when given, replace the list above them whole.
type AlertRuleConfig struct {
	Alpha       *float64         `toml:"alpha"`
	ClearAlpha  *float64         `toml:"clear_alpha"`
	Confidence  *float64         `toml:"confidence"`
	Practical   *float64         `toml:"practical"`
	Judge       *string          `toml:"judge"`
	MinN        *int64           `toml:"min_n"`
	MinGroups   *int             `toml:"min_groups"`
	Confirm     *int             `toml:"confirm"`
	ClearAfter  *int             `toml:"clear_after"`
	Test        *string          `toml:"test"`
	Windows     []WindowFConfig  `toml:"windows"`
	CUSUMs      []CUSUMConfig    `toml:"cusums"`
	Spread      SpreadRuleConfig `toml:"spread"`
	SilentAfter Duration         `toml:"silent_after"`
	Reject      RejectRuleConfig `toml:"reject"`
}

// WindowFConfig is one window F detector: {length = "5m", share = 0.2}.
type WindowFConfig struct {
	Length Duration `toml:"length"`
	Share  float64  `toml:"share"`
}

// CUSUMConfig is one between-group CUSUM detector: {k = 0.5, share = 0.3}
// (h = 0 or absent derives h from the share).
type CUSUMConfig struct {
	K     float64 `toml:"k"`
	H     float64 `toml:"h"`
	Share float64 `toml:"share"`
}

// SpreadRuleConfig is the spread-diverges condition's settings.
type SpreadRuleConfig struct {
	Off        *bool    `toml:"off"`
	Alpha      *float64 `toml:"alpha"`
	ClearAlpha *float64 `toml:"clear_alpha"`
	MinRatio   *float64 `toml:"min_ratio"`
}

// RejectRuleConfig is the input-rejected condition's settings.
type RejectRuleConfig struct {
	Off       *bool    `toml:"off"`
	Rate      *float64 `toml:"rate"`
	ClearRate *float64 `toml:"clear_rate"`
	MinCount  *uint64  `toml:"min_count"`
}

// Defaults of AlertsConfig.
const (
	defaultAlertRetain      = 30 * 24 * time.Hour
	defaultAlertClearAbsent = 60
)

// overlay applies what o sets to r, and returns the errors of the names it
// cannot read (judge, test).
func (o *AlertRuleConfig) overlay(r *alert.Rule) []error {
	var errs []error
	setF := func(dst *float64, v *float64) {
		if v != nil {
			*dst = *v
		}
	}
	setF(&r.Alpha, o.Alpha)
	setF(&r.ClearAlpha, o.ClearAlpha)
	setF(&r.Confidence, o.Confidence)
	setF(&r.Practical, o.Practical)
	if o.Judge != nil {
		switch *o.Judge {
		case "interval":
			r.Judge = alert.JudgeInterval
		case "estimate":
			r.Judge = alert.JudgeEstimate
		default:
			errs = append(errs, fmt.Errorf("judge %q is not interval or estimate", *o.Judge))
		}
	}
	if o.MinN != nil {
		r.MinN = *o.MinN
	}
	if o.MinGroups != nil {
		r.MinGroups = *o.MinGroups
	}
	if o.Confirm != nil {
		r.Confirm = *o.Confirm
	}
	if o.ClearAfter != nil {
		r.ClearAfter = *o.ClearAfter
	}
	if o.Test != nil {
		t, err := alert.ParseTestChoice(*o.Test)
		if err != nil {
			errs = append(errs, err)
		}
		r.Test = t
	}
	if o.Windows != nil {
		r.Windows = make([]alert.WindowF, len(o.Windows))
		for i, w := range o.Windows {
			r.Windows[i] = alert.WindowF{Length: w.Length.D, Share: w.Share}
		}
	}
	if o.CUSUMs != nil {
		r.CUSUMs = make([]alert.ContrastCUSUM, len(o.CUSUMs))
		for i, c := range o.CUSUMs {
			r.CUSUMs[i] = alert.ContrastCUSUM{K: c.K, H: c.H, Share: c.Share}
		}
	}
	if o.Spread.Off != nil {
		r.Spread.Off = *o.Spread.Off
	}
	setF(&r.Spread.Alpha, o.Spread.Alpha)
	setF(&r.Spread.ClearAlpha, o.Spread.ClearAlpha)
	setF(&r.Spread.MinRatio, o.Spread.MinRatio)
	if o.SilentAfter.Set {
		r.SilentAfter = o.SilentAfter.D
	}
	if o.Reject.Off != nil {
		r.Reject.Off = *o.Reject.Off
	}
	setF(&r.Reject.Rate, o.Reject.Rate)
	setF(&r.Reject.ClearRate, o.Reject.ClearRate)
	if o.Reject.MinCount != nil {
		r.Reject.MinCount = *o.Reject.MinCount
	}
	return errs
}

// alertRule resolves the alert rule of characteristic name: the built-in
// defaults, then [alerts], then [characteristics.NAME.alert]. The error
// names the section and each bad field.
func (c *Config) alertRule(name string) (alert.Rule, error) {
	r := alert.DefaultRule()
	where := "[alerts]"
	errs := c.Alerts.overlay(&r)
	if cc, ok := c.Characteristics[name]; ok && cc.Alert != nil {
		where = fmt.Sprintf("characteristic %q: [characteristics.%s.alert]", name, keyPath([]string{name}))
		errs = append(errs, cc.Alert.overlay(&r)...)
	}
	if err := r.Validate(); err != nil {
		errs = append(errs, err)
	}
	if len(errs) > 0 {
		return r, fmt.Errorf("%s: %w", where, errors.Join(errs...))
	}
	return r, nil
}

// checkAlerts checks the [alerts] section and every characteristic's alert
// rule, each error naming the section or characteristic and the field.
func (c *Config) checkAlerts() []error {
	var errs []error
	bad := func(format string, args ...any) {
		errs = append(errs, fmt.Errorf("[alerts] "+format, args...))
	}
	a := &c.Alerts
	if a.Retain.D < 0 {
		bad("retain %v: must not be negative (0 keeps every cleared alert)", a.Retain.D)
	}
	if a.ClearAbsent != nil && *a.ClearAbsent < 0 {
		bad("clear_absent %d: must not be negative (0: never)", *a.ClearAbsent)
	}
	if a.SubjectPrefix == "" || charNameProblem(a.SubjectPrefix) != "" {
		bad("subject_prefix %q: use one subject token such as lockstep", a.SubjectPrefix)
	}
	w := &a.Webhook
	if w.URL != "" {
		if u, err := url.Parse(w.URL); err != nil || (u.Scheme != "http" && u.Scheme != "https") || u.Host == "" {
			bad("webhook url %q: give an http or https URL", w.URL)
		}
	}
	for _, f := range []struct {
		key string
		v   int64
	}{{"timeout", int64(w.Timeout.D)}, {"queue", int64(w.Queue)}, {"attempts", int64(w.Attempts)},
		{"backoff", int64(w.Backoff.D)}, {"max_backoff", int64(w.MaxBackoff.D)}} {
		if f.v < 0 {
			bad("webhook %s: must not be negative (0 takes the default)", f.key)
		}
	}
	if _, err := c.alertRule(""); err != nil {
		// Every characteristic inherits the defaults' mistakes: say them once.
		return append(errs, err)
	}
	for name, cc := range c.Characteristics {
		if cc.Alert == nil || charNameProblem(name) != "" {
			continue
		}
		if _, err := c.alertRule(name); err != nil {
			errs = append(errs, err)
		}
	}
	return errs
}

// webhookOptions maps [alerts.webhook] to alert's options.
func (w *WebhookConfig) options() alert.WebhookOptions {
	return alert.WebhookOptions{URL: w.URL, Timeout: w.Timeout.D, Queue: w.Queue, Attempts: w.Attempts,
		Backoff: w.Backoff.D, MaxBackoff: w.MaxBackoff.D}
}

// clearAbsent is the resolved [alerts] clear_absent.
func (a *AlertsConfig) clearAbsent() int {
	if a.ClearAbsent == nil {
		return defaultAlertClearAbsent
	}
	return *a.ClearAbsent
}
