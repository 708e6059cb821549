package alert

import (
	"errors"
	"strings"
	"testing"
	"time"
)

func TestDefaultRuleValid(t *testing.T) {
	if err := DefaultRule().Validate(); err != nil {
		t.Fatalf("default rule: %v", err)
	}
}

func TestRuleValidateNamesField(t *testing.T) {
	tests := []struct {
		name   string
		change func(*Rule)
		want   string
	}{
		{"alpha", func(r *Rule) { r.Alpha = 1.5 }, "alpha 1.5 is not between 0 and 1"},
		{"clear below alpha", func(r *Rule) { r.ClearAlpha = 1e-6 }, "clear-alpha 1e-06 is below alpha"},
		{"confidence", func(r *Rule) { r.Confidence = 0 }, "confidence 0"},
		{"practical", func(r *Rule) { r.Practical = -1 }, "practical difference -1"},
		{"min-n", func(r *Rule) { r.MinN = 1 }, "min-n 1"},
		{"min-groups", func(r *Rule) { r.MinGroups = 1 }, "min-groups 1"},
		{"confirm", func(r *Rule) { r.Confirm = 0 }, "confirm 0"},
		{"clear-after", func(r *Rule) { r.ClearAfter = 0 }, "clear-after 0"},
		{"test", func(r *Rule) { r.Test = 9 }, "test 9"},
		{"no detector", func(r *Rule) { r.Windows, r.CUSUMs = nil, nil }, "no means detector"},
		{"window length", func(r *Rule) { r.Windows[0].Length = 0 }, "windows[0] length 0s"},
		{"window repeat", func(r *Rule) { r.Windows[1].Length = r.Windows[0].Length }, "windows[1] length 1m0s repeats windows[0]"},
		{"window share", func(r *Rule) { r.Windows[1].Share = 0 }, "windows[1] share 0"},
		{"cusum k", func(r *Rule) { r.CUSUMs[0].K = -1 }, "cusums[0] k -1"},
		{"cusum h", func(r *Rule) { r.CUSUMs[1].H = -2 }, "cusums[1] h -2"},
		{"shares", func(r *Rule) { r.CUSUMs[0].Share = 0.9 }, "shares sum to"},
		{"spread ratio", func(r *Rule) { r.Spread.MinRatio = 0.5 }, "spread min-ratio 0.5"},
		{"silent", func(r *Rule) { r.SilentAfter = -time.Second }, "silent-after -1s"},
		{"reject rate", func(r *Rule) { r.Reject.Rate = 2 }, "reject rate 2"},
		{"reject clear", func(r *Rule) { r.Reject.ClearRate = 0.5 }, "reject clear-rate 0.5"},
		{"reject min", func(r *Rule) { r.Reject.MinCount = 0 }, "reject min-count 0"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			r := DefaultRule()
			tt.change(&r)
			err := r.Validate()
			if err == nil {
				t.Fatal("no error")
			}
			if !errors.Is(err, ErrRule) {
				t.Errorf("error %v does not wrap ErrRule", err)
			}
			if !strings.Contains(err.Error(), tt.want) {
				t.Errorf("error %q does not say %q", err, tt.want)
			}
			if _, err := NewMonitor(r); err == nil {
				t.Error("NewMonitor took an invalid rule")
			}
		})
	}
}

func TestRuleSwitchedOffParts(t *testing.T) {
	r := DefaultRule()
	r.Spread = SpreadRule{Off: true}
	r.Reject = RejectRule{Off: true}
	r.SilentAfter = 0
	if err := r.Validate(); err != nil {
		t.Errorf("switched-off parts are not validated, got %v", err)
	}
}

func TestParseTestChoice(t *testing.T) {
	for _, c := range []TestChoice{TestAuto, TestClassic, TestWelch} {
		got, err := ParseTestChoice(c.String())
		if err != nil || got != c {
			t.Errorf("ParseTestChoice(%q) = %v, %v", c, got, err)
		}
	}
	if _, err := ParseTestChoice("anova"); err == nil {
		t.Error("ParseTestChoice(anova) gave no error")
	}
}

func TestDurationName(t *testing.T) {
	for d, want := range map[time.Duration]string{
		time.Minute: "1m", 30 * time.Minute: "30m", time.Hour: "1h", 90 * time.Minute: "1h30m",
		50 * time.Second: "50s", 90 * time.Second: "1m30s", 0: "0s",
	} {
		if got := durationName(d); got != want {
			t.Errorf("durationName(%v) = %q, want %q", d, got, want)
		}
	}
}
