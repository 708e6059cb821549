package window

import (
	"errors"
	"strings"
	"testing"
	"time"
)

func TestConfigValidate(t *testing.T) {
	tests := []struct {
		name string
		cfg  Config
		want []string // substrings of the error, all of them; none: valid
	}{
		{"defaults", Config{}, nil},
		{"an hour of 5-minute buckets", Config{Bucket: 5 * time.Minute, Length: time.Hour}, nil},
		{"no lateness", Config{Lateness: -1}, nil},
		{"no sample, never silent by time", Config{Sample: -1, SilentAfter: -1}, nil},
		{"count-based", Config{Count: 50}, nil},
		{"length not a multiple", Config{Length: 90 * time.Second},
			[]string{"window length 1m30s is not a multiple of the bucket 1m0s"}},
		{"negative bucket", Config{Bucket: -time.Second}, []string{"bucket -1s is negative"}},
		{"negative length", Config{Length: -time.Minute}, []string{"window length -1m0s is negative"}},
		{"lateness as long as the window", Config{Length: 10 * time.Minute, Lateness: 10 * time.Minute},
			[]string{"allowed lateness 10m0s is not shorter than the window length 10m0s"}},
		{"bucket too wide", Config{Bucket: MaxDuration + time.Nanosecond, Length: MaxDuration + time.Nanosecond},
			[]string{"bucket 1281023h", "exceeds the limit", "window length 1281023h"}},
		{"sample too large", Config{Sample: MaxSample + 1}, []string{"sample of 65537 values per group and bucket exceeds the limit of 65536"}},
		{"negative count", Config{Count: -3}, []string{"count -3 is negative"}},
		{"count too large", Config{Count: MaxCount + 1}, []string{"count 1048577 exceeds the limit"}},
		{"two problems at once", Config{Bucket: 7 * time.Second, Length: 30 * time.Second, Count: -1},
			[]string{"window length 30s is not a multiple of the bucket 7s", "count -1 is negative"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			err := tt.cfg.Validate()
			_, newErr := New(tt.cfg)
			if len(tt.want) == 0 {
				if err != nil || newErr != nil {
					t.Fatalf("Validate: %v; New: %v; want both nil", err, newErr)
				}
				return
			}
			if err == nil || newErr == nil {
				t.Fatalf("Validate: %v; New: %v; want errors containing %q", err, newErr, tt.want)
			}
			if !errors.Is(err, ErrConfig) {
				t.Errorf("error %q does not wrap ErrConfig", err)
			}
			for _, s := range tt.want {
				if !strings.Contains(err.Error(), s) {
					t.Errorf("error %q does not contain %q", err, s)
				}
			}
		})
	}
}

func TestConfigDefaults(t *testing.T) {
	w := newWindow(t, Config{Lateness: -1})
	want := Config{Bucket: time.Minute, Length: 30 * time.Minute, Lateness: -1,
		SilentAfter: 10 * time.Minute, Sample: 64}
	if got := w.Config(); got != want {
		t.Errorf("Config() = %+v, want %+v", got, want)
	}
}
