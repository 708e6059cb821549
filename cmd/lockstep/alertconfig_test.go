package main

import (
	"strings"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/alert"
)

func TestAlertConfigOverlay(t *testing.T) {
	cfg := DefaultConfig()
	cfg.NATS.URL = natsEmbedded
	text := `
[alerts]
alpha = 1e-4
confirm = 2
practical = 0.1
test = "welch"
windows = [{length = "5m", share = 0.2}]
cusums = [{k = 0.5, share = 0.3}]
spread = {min_ratio = 1.5}
reject = {rate = 0.1, clear_rate = 0.05}
retain = "48h"

[alerts.webhook]
url = "http://127.0.0.1:9/hook"
queue = 10

[characteristics.fill-weight]
unit = "g"

[characteristics.fill-weight.alert]
practical = 0.5
judge = "estimate"
clear_after = 7
`
	if err := ParseConfig(strings.NewReader(text), cfg); err != nil {
		t.Fatal(err)
	}
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	def, err := cfg.alertRule("other")
	if err != nil {
		t.Fatal(err)
	}
	if def.Alpha != 1e-4 || def.Confirm != 2 || def.Practical != 0.1 || def.Test != alert.TestWelch ||
		len(def.Windows) != 1 || def.Windows[0].Length != 5*time.Minute || len(def.CUSUMs) != 1 || def.CUSUMs[0].K != 0.5 ||
		def.Spread.MinRatio != 1.5 || def.Reject.Rate != 0.1 || def.ClearAfter != alert.DefaultRule().ClearAfter {
		t.Errorf("[alerts] rule %+v", def)
	}
	fw, err := cfg.alertRule("fill-weight")
	if err != nil {
		t.Fatal(err)
	}
	if fw.Practical != 0.5 || fw.Judge != alert.JudgeEstimate || fw.ClearAfter != 7 || fw.Alpha != 1e-4 || fw.Confirm != 2 {
		t.Errorf("fill-weight rule %+v: its own over [alerts] over the defaults", fw)
	}
	if cfg.Alerts.Retain.D != 48*time.Hour || cfg.Alerts.Webhook.options().Queue != 10 || cfg.Alerts.clearAbsent() != defaultAlertClearAbsent {
		t.Errorf("alerts config %+v", cfg.Alerts)
	}
}

func TestAlertConfigErrors(t *testing.T) {
	for _, tt := range []struct {
		name, text string
		want       []string
	}{
		{"bad alpha in a characteristic", "[characteristics.fill-weight.alert]\nalpha = 1.5\n",
			[]string{`characteristic "fill-weight"`, "alert", "alpha 1.5"}},
		{"bad judge", "[characteristics.seal.alert]\njudge = \"mean\"\n", []string{`characteristic "seal"`, `judge "mean"`}},
		{"bad test in defaults", "[alerts]\ntest = \"anova\"\n", []string{"[alerts]", `test "anova"`}},
		{"confirm 0", "[alerts]\nconfirm = 0\n", []string{"[alerts]", "confirm 0"}},
		{"shares over 1", "[alerts]\nwindows = [{length = \"1m\", share = 0.7}, {length = \"5m\", share = 0.7}]\ncusums = []\n",
			[]string{"[alerts]", "shares"}},
		{"webhook url", "[alerts.webhook]\nurl = \"ftp://x\"\n", []string{"[alerts] webhook url"}},
		{"negative queue", "[alerts.webhook]\nurl = \"http://x\"\nqueue = -1\n", []string{"webhook queue"}},
		{"negative retain", "[alerts]\nretain = \"-1h\"\n", []string{"[alerts] retain"}},
		{"subject prefix", "[alerts]\nsubject_prefix = \"a.b\"\n", []string{"subject_prefix"}},
	} {
		t.Run(tt.name, func(t *testing.T) {
			cfg := DefaultConfig()
			cfg.NATS.URL = natsEmbedded
			if err := ParseConfig(strings.NewReader(tt.text), cfg); err != nil {
				t.Fatal(err)
			}
			err := cfg.Validate()
			if err == nil {
				t.Fatal("accepted")
			}
			for _, w := range tt.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q does not say %q", err, w)
				}
			}
		})
	}
	// An unknown key of an alert section is an error naming its line.
	cfg := DefaultConfig()
	err := ParseConfig(strings.NewReader("[characteristics.fill.alert]\nconfrim = 2\n"), cfg)
	if err == nil || !strings.Contains(err.Error(), "line 2") || !strings.Contains(err.Error(), "characteristics.fill.alert.confrim") {
		t.Errorf("unknown key: %v", err)
	}
}
