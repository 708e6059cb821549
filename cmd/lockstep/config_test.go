package main

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/window"
)

// parseAndValidate reads text over the defaults and validates it.
func parseAndValidate(text string) (*Config, error) {
	cfg := DefaultConfig()
	cfg.NATS.URL = natsEmbedded
	if err := ParseConfig(strings.NewReader(text), cfg); err != nil {
		return nil, err
	}
	return cfg, cfg.Validate()
}

// TestConfigErrors: every mistake is refused with a message that names
// where it is (line, or section, characteristic and key).
func TestConfigErrors(t *testing.T) {
	for _, tc := range []struct {
		name, text string
		want       []string // substrings of the error
	}{
		{"unknown key", "[defaults]\nwindow = \"30m\"\n\n[characteristics.fill]\nunit = \"g\"\ncolour = \"red\"\n",
			[]string{"line 6", "unknown key characteristics.fill.colour"}},
		{"unknown section", "[nats]\nurl = \"embedded\"\n[alarms]\nx = 1\n", []string{"line 3", "unknown key alarms"}},
		{"two unknown keys", "[store]\npaht = \"x\"\n[http]\nlisten = \"127.0.0.1:1\"\nlisen = \"x\"\n",
			[]string{"line 2: unknown key store.paht", "line 5: unknown key http.lisen"}},
		{"quoted name", "[characteristics.\"fill weight\"]\nunti = \"g\"\n", []string{`characteristics."fill weight".unti`}},
		{"bad duration", "[defaults]\nwindow = \"30x\"\n", []string{"line 2", "defaults.window", `duration "30x"`}},
		{"duration without unit", "[store]\ncommit_interval = 200\n", []string{"no unit", `"200s"`}},
		{"wrong type", "[store]\ncommit_values = \"many\"\n", []string{"line 2", "store.commit_values", "string"}},
		{"syntax", "[store\n", []string{"line 1"}},
		{"alpha out of range", "[characteristics.fill]\nalpha = 1.5\n", []string{`characteristic "fill":`, "alpha 1.5", "between 0 and 1"}},
		{"power in defaults", "[defaults]\npower = 0\n", []string{"[defaults]", "power 0"}},
		{"bad nominal", "[characteristics.fill]\nnominal = \"500,0\"\n", []string{`characteristic "fill":`, "nominal 500,0", "not a decimal"}},
		{"nominal table", "[characteristics.fill]\nnominal = [1]\n", []string{`characteristic "fill":`, "nominal"}},
		{"min above max", "[characteristics.fill]\nmin = 600\nmax = 400\n", []string{`characteristic "fill":`, "min 600 is above max 400"}},
		{"nominal outside range", "[characteristics.fill]\nnominal = \"700\"\nmin = 400\nmax = 600\n", []string{"nominal 700", "outside"}},
		{"window not a multiple", "[characteristics.fill]\nbucket = \"1m\"\nwindow = \"90s\"\n", []string{`characteristic "fill":`, "not a multiple"}},
		{"inherited bucket", "[defaults]\nbucket = \"7m\"\n[characteristics.fill]\nwindow = \"30m\"\n", []string{`characteristic "fill":`, "multiple"}},
		{"negative lateness", "[characteristics.fill]\nlateness = \"-1m\"\n", []string{`characteristic "fill":`, "lateness -1m0s"}},
		{"sample too big", "[characteristics.fill]\nsample = 5000\n", []string{"sample 5000", "4096"}},
		{"zero bucket", "[characteristics.fill]\nbucket = \"0s\"\n", []string{"bucket 0s", "positive"}},
		{"bad name", "[characteristics.\"fill.weight\"]\nunit = \"g\"\n", []string{`characteristic "fill.weight":`, "one subject token"}},
		{"rejects come back", "[nats]\nsubjects = \">\"\n", []string{"[nats] subjects \">\"", "dead-letter"}},
		{"rejects come back, prefix", "[nats]\nsubjects = \"meas.>\"\nreject_prefix = \"meas\"\n", []string{"dead-letter"}},
		{"bad source", "[nats]\nsource = \"kafka\"\n", []string{"[nats] source \"kafka\""}},
		{"bad template", "[ingest]\ntemplate = \"meas.<group>\"\n", []string{"[ingest] template"}},
		{"bad unknown policy", "[ingest]\nunknown = \"maybe\"\n", []string{"[ingest] unknown \"maybe\""}},
		{"bad listen", "[http]\nlisten = \"8420\"\n", []string{"[http] listen \"8420\"", "HOST:PORT"}},
		{"bad level", "[log]\nlevel = \"loud\"\n", []string{"[log] level \"loud\""}},
		{"commit values", "[store]\ncommit_values = 0\n", []string{"[store] commit_values 0"}},
		{"retention shorter than window", "[store]\nretain_buckets = \"10m\"\n", []string{"retain_buckets 10m0s"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := parseAndValidate(tc.text)
			if err == nil {
				t.Fatalf("no error for\n%s", tc.text)
			}
			for _, w := range tc.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q does not say %q", err, w)
				}
			}
		})
	}
}

// TestConfigSample: the shipped sample configuration is valid, and says
// what it says.
func TestConfigSample(t *testing.T) {
	f, err := os.Open(filepath.Join("etc", "lockstep.toml"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	cfg := DefaultConfig()
	if err := ParseConfig(f, cfg); err != nil {
		t.Fatal(err)
	}
	cfg.NATS.URL = natsEmbedded
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	fill := cfg.settingsFor("fill-weight")
	if !fill.Configured || fill.Unit != "g" || fill.Nominal == nil || fill.Nominal.String() != "500" || *fill.Min != 450 {
		t.Errorf("fill-weight settings %+v", fill)
	}
	seal := cfg.settingsFor("seal-temperature")
	if seal.Window.Length != 15*time.Minute || seal.Window.Bucket != time.Minute || seal.Window.SilentAfter != 5*time.Minute {
		t.Errorf("seal-temperature window %+v", seal.Window)
	}
	if cap := cfg.settingsFor("cap-torque"); cap.Window.Count != 50 {
		t.Errorf("cap-torque window %+v", cap.Window)
	}
	// Keep: the default rule's 30-minute alert span is the 30 whole
	// buckets before now, one more than the window holds besides the open
	// one (see spanKeep).
	if other := cfg.settingsFor("other"); other.Configured || other.Window != (window.Config{
		Bucket: time.Minute, Length: 30 * time.Minute, Lateness: time.Minute, SilentAfter: 10 * time.Minute, Sample: 64,
		Keep: time.Minute,
	}) || other.EvaluateEvery != 10*time.Second {
		t.Errorf("unconfigured settings %+v", other)
	}
}

// TestConfigSettings: [defaults] under a characteristic's own section, and
// an explicit zero switching lateness, silence and the sample off.
func TestConfigSettings(t *testing.T) {
	cfg, err := parseAndValidate(`
[defaults]
bucket = "10s"
window = "10m"
alpha = 0.01
evaluate_every = "2s"

[characteristics.a]
window = "1m"
lateness = "0s"
silent_after = "0s"
sample = 0
nominal = 12.50
`)
	if err != nil {
		t.Fatal(err)
	}
	a := cfg.settingsFor("a")
	// Keep: the default rule's 30-minute alert span needs 180 whole
	// 10-s buckets before now; the 1-minute window holds 5 of them besides
	// the open one: 175 more, 29m10s.
	want := window.Config{Bucket: 10 * time.Second, Length: time.Minute, Lateness: -1, SilentAfter: -1, Sample: -1, Keep: 29*time.Minute + 10*time.Second}
	if a.Window != want || a.Stats.Alpha != 0.01 || a.Stats.Power != 0.9 || a.EvaluateEvery != 2*time.Second {
		t.Errorf("settings of a: %+v; want window %+v, alpha 0.01, power 0.9, every 2s", a, want)
	}
	if a.Nominal == nil || a.Nominal.String() != "12.5" {
		t.Errorf("nominal %v; want 12.5", a.Nominal)
	}
	b := cfg.settingsFor("b")
	if b.Window.Length != 10*time.Minute || b.Window.Lateness != time.Minute {
		t.Errorf("settings of b: %+v", b.Window)
	}
	if a.stateHash() == b.stateHash() {
		t.Error("different samples give the same state hash")
	}
}

// TestConfigPrecedence: flag over environment over file over default.
func TestConfigPrecedence(t *testing.T) {
	dir := t.TempDir()
	path := writeConfig(t, dir, `
[nats]
url = "nats://file:4222"
password = "from-file"
stream = "FILESTREAM"

[http]
listen = "127.0.0.1:9000"

[defaults]
window = "20m"
`)
	env := map[string]string{"LOCKSTEP_NATS_URL": "nats://env:4222", "LOCKSTEP_NATS_PASSWORD": "from-env", "LOCKSTEP_NATS_TOKEN": ""}
	c := &RunCommand{Getenv: func(k string) string { return env[k] }}
	cfg, err := c.config([]string{"--config", path, "--nats", "nats://flag:4222", "--window", "40m"})
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct{ what, got, want string }{
		{"url (flag)", cfg.NATS.URL, "nats://flag:4222"},
		{"password (environment)", cfg.NATS.Password, "from-env"},
		{"stream (file)", cfg.NATS.Stream, "FILESTREAM"},
		{"http (file)", cfg.HTTP.Listen, "127.0.0.1:9000"},
		{"consumer (default)", cfg.NATS.Consumer, defaultConsumer},
		{"window (flag)", cfg.Defaults.Window.D.String(), "40m0s"},
	} {
		if tc.got != tc.want {
			t.Errorf("%s = %q; want %q", tc.what, tc.got, tc.want)
		}
	}

	cfg, err = (&RunCommand{Getenv: func(string) string { return "" }}).config(nil)
	if err != nil {
		t.Fatal(err)
	}
	if cfg.NATS.URL != natsEmbedded || cfg.Store.Path != defaultStorePath || cfg.HTTP.Listen != defaultHTTPListen || cfg.NATS.Source != "jetstream" {
		t.Errorf("no flags, no file: %+v", cfg)
	}
	if got := defaultNATSData("/var/lib/lockstep/lockstep.db"); got != "/var/lib/lockstep/lockstep-jetstream" {
		t.Errorf("JetStream directory %s", got)
	}
}

func TestSubjectMatches(t *testing.T) {
	for _, tc := range []struct {
		filter, subject string
		want            bool
	}{
		{"meas.>", "meas.a.b", true}, {"meas.>", "meas", false}, {"meas.>", "lockstep.rejects.x", false},
		{">", "lockstep.rejects.x", true}, {"*.rejects.*", "lockstep.rejects.x", true}, {"*.*", "a.b.c", false},
		{"lockstep.rejects.x", "lockstep.rejects.x", true}, {"a.*.c", "a.b.d", false},
	} {
		if got := subjectMatches(tc.filter, tc.subject); got != tc.want {
			t.Errorf("subjectMatches(%q, %q) = %v; want %v", tc.filter, tc.subject, got, tc.want)
		}
	}
}

// TestRunUsageErrors: mistakes on the command line exit with status 2.
func TestRunUsageErrors(t *testing.T) {
	for _, args := range [][]string{
		{"--bucket", "soon"},
		{"--no-such-flag"},
		{"extra-argument"},
	} {
		_, err := (&RunCommand{Getenv: func(string) string { return "" }}).config(args)
		if !errors.Is(err, errUsage) {
			t.Errorf("config(%q) = %v; want a usage error", args, err)
		}
	}
	_, err := (&RunCommand{Getenv: func(string) string { return "" }}).config([]string{"--config", "/no/such/file.toml"})
	if err == nil || !strings.Contains(err.Error(), "/no/such/file.toml") {
		t.Errorf("missing config file: %v", err)
	}
	_, err = (&RunCommand{Getenv: func(string) string { return "" }}).config([]string{"--source", "kafka"})
	if err == nil || !strings.Contains(err.Error(), "source") {
		t.Errorf("--source kafka: %v", err)
	}
}
