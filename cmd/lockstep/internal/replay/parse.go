package replay

import (
	"fmt"
	"strings"
	"time"
)

// timeLayouts are the forms ParseTime reads, each with a zone.
var timeLayouts = [...]string{
	time.RFC3339Nano,
	"2006-01-02T15:04Z07:00",
	"2006-01-02 15:04:05.999999999Z07:00",
	"2006-01-02 15:04Z07:00",
}

// ParseTime reads a time given on the command line: RFC 3339 with a zone
// ("2026-12-01T06:00:00Z", "2026-12-01T07:00:00+01:00", seconds optional,
// a space for the T allowed), or a date alone ("2026-12-01"), which is
// midnight UTC. A time without a zone is refused rather than guessed.
func ParseTime(s string) (time.Time, error) {
	s = strings.TrimSpace(s)
	if s == "" {
		return time.Time{}, fmt.Errorf("time is empty: give one such as 2026-12-01T06:00:00Z")
	}
	for _, l := range timeLayouts {
		if t, err := time.Parse(l, s); err == nil {
			return t.UTC(), nil
		}
	}
	if t, err := time.Parse(time.DateOnly, s); err == nil {
		return t, nil
	}
	for _, l := range [...]string{"2006-01-02T15:04:05.999999999", "2006-01-02T15:04", "2006-01-02 15:04:05.999999999", "2006-01-02 15:04"} {
		if _, err := time.Parse(l, s); err == nil {
			return time.Time{}, fmt.Errorf("time %q has no zone: add Z for UTC or the offset, as in %sZ or %s+01:00", s, s, s)
		}
	}
	return time.Time{}, fmt.Errorf("time %q: use RFC 3339 with a zone, such as 2026-12-01T06:00:00Z, or a date such as 2026-12-01", short(s))
}

// ParseDuration reads a positive duration such as "30m", "10s", "1h30m"
// or "2d" (days of 24 h), up to 100 years.
func ParseDuration(s string) (time.Duration, error) {
	s = strings.TrimSpace(s)
	var d time.Duration
	var err error
	if rest, ok := strings.CutSuffix(s, "d"); ok && rest != "" && !strings.ContainsAny(rest, "hmsuµn") {
		var days time.Duration
		days, err = time.ParseDuration(rest + "h")
		if err == nil && (days > 100*365*time.Hour || days < -100*365*time.Hour) {
			return 0, fmt.Errorf("duration %q is longer than 100 years", s)
		}
		d = 24 * days
	} else {
		d, err = time.ParseDuration(s)
	}
	switch {
	case err != nil:
		return 0, fmt.Errorf("duration %q: use a number with a unit, such as 30m, 10s, 1h30m or 2d", short(s))
	case d <= 0:
		return 0, fmt.Errorf("duration %q must be positive", s)
	case d > 100*365*24*time.Hour:
		return 0, fmt.Errorf("duration %q is longer than 100 years", s)
	}
	return d, nil
}

// short cuts a long input for an error message.
func short(s string) string {
	if len(s) > 64 {
		return s[:64] + "…"
	}
	return s
}
