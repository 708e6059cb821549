package replay

import (
	"strings"
	"testing"
	"time"
)

func TestParseTime(t *testing.T) {
	want := time.Date(2026, 12, 1, 6, 0, 0, 0, time.UTC)
	for _, s := range []string{"2026-12-01T06:00:00Z", "2026-12-01T07:00:00+01:00", "2026-12-01T06:00Z", "2026-12-01 06:00:00Z", " 2026-12-01T06:00:00.000Z "} {
		got, err := ParseTime(s)
		if err != nil || !got.Equal(want) || got.Location() != time.UTC {
			t.Errorf("ParseTime(%q) = %v, %v; want %v", s, got, err, want)
		}
	}
	if got, err := ParseTime("2026-12-01"); err != nil || !got.Equal(want.Add(-6*time.Hour)) {
		t.Errorf("a date: %v, %v", got, err)
	}
	for s, msg := range map[string]string{
		"":                     "empty",
		"2026-12-01T06:00:00":  "has no zone",
		"2026-12-01 06:00":     "has no zone",
		"tomorrow":             "RFC 3339",
		"2026-13-01T06:00:00Z": "RFC 3339",
	} {
		if _, err := ParseTime(s); err == nil || !strings.Contains(err.Error(), msg) {
			t.Errorf("ParseTime(%q): %v, want an error with %q", s, err, msg)
		}
	}
}

func TestParseDuration(t *testing.T) {
	for s, want := range map[string]time.Duration{"30m": 30 * time.Minute, "10s": 10 * time.Second, "1h30m": 90 * time.Minute, "2d": 48 * time.Hour, "1.5d": 36 * time.Hour} {
		if got, err := ParseDuration(s); err != nil || got != want {
			t.Errorf("ParseDuration(%q) = %v, %v; want %v", s, got, err, want)
		}
	}
	for _, s := range []string{"", "0s", "-5m", "5", "d", "1e3d", "200y", "99999999h", "3md"} {
		if d, err := ParseDuration(s); err == nil {
			t.Errorf("ParseDuration(%q) = %v, want an error", s, d)
		}
	}
}

// FuzzParseTime: any input gives a UTC time or an error, never a panic,
// and a parsed time formats back to a time that parses to itself.
func FuzzParseTime(f *testing.F) {
	for _, s := range []string{"2026-12-01T06:00:00Z", "2026-12-01T07:00:00+01:00", "2026-12-01", "2026-12-01 06:00Z", "x", ""} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		got, err := ParseTime(s)
		if err != nil {
			return
		}
		if got.Location() != time.UTC {
			t.Fatalf("ParseTime(%q) is not UTC: %v", s, got)
		}
		again, err := ParseTime(got.Format(time.RFC3339Nano))
		if err != nil || !again.Equal(got) {
			t.Fatalf("ParseTime(%q) = %v does not round-trip: %v, %v", s, got, again, err)
		}
	})
}

// FuzzParseDuration: any input gives a positive duration of at most 100
// years or an error, never a panic.
func FuzzParseDuration(f *testing.F) {
	for _, s := range []string{"30m", "2d", "1h30m", "-1s", "0", "1e9d", "d"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		d, err := ParseDuration(s)
		if err == nil && (d <= 0 || d > 100*365*24*time.Hour) {
			t.Fatalf("ParseDuration(%q) = %v", s, d)
		}
	})
}
