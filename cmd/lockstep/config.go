package main

import (
	"errors"
	"fmt"
	"io"
	"os"
	"strings"
	"time"

	"github.com/pelletier/go-toml/v2"

	"github.com/lockstep-project/lockstep/ingest"
)

// Config is the configuration of lockstep run: a TOML file (see
// etc/lockstep.toml), over DefaultConfig, under environment variables and
// flags. Every field documents its default.
type Config struct {
	NATS   NATSConfig   `toml:"nats"`
	Ingest IngestConfig `toml:"ingest"`
	Store  StoreConfig  `toml:"store"`
	HTTP   HTTPConfig   `toml:"http"`
	Log    LogConfig    `toml:"log"`
	// Alerts are the default alert rule and the alert sinks (alertconfig.go).
	Alerts AlertsConfig `toml:"alerts"`

	// Defaults are the settings of every characteristic that does not set
	// its own, including those first seen in the stream.
	Defaults Settings `toml:"defaults"`
	// Characteristics by name (the subject token): their unit, nominal,
	// plausible range and own settings.
	Characteristics map[string]CharacteristicConfig `toml:"characteristics"`
}

// NATSConfig says where measurements come from.
type NATSConfig struct {
	// URL is "embedded" (an in-process server with JetStream) or one or
	// more server URLs separated by commas. Default: embedded.
	URL string `toml:"url"`
	// Listen is the embedded server's client address. Default
	// 127.0.0.1:4222; port 0 picks a free port.
	Listen string `toml:"listen"`
	// Data is the embedded server's JetStream directory. Default: beside
	// the store, FILE without its extension plus "-jetstream".
	Data string `toml:"data"`
	// Source is "jetstream" (durable, exactly once in the sums; default)
	// or "core" (at most once, fastest).
	Source string `toml:"source"`
	// Stream and Consumer name the JetStream stream and the durable
	// consumer. Defaults LOCKSTEP and lockstep. One consumer per store.
	Stream   string `toml:"stream"`
	Consumer string `toml:"consumer"`
	// CreateStream creates a missing stream on an external server
	// (always done with the embedded one). Default false: a missing stream
	// is an error.
	CreateStream bool `toml:"create_stream"`
	// Subjects is the subject filter. Default "meas.>".
	Subjects string `toml:"subjects"`
	// RejectPrefix starts the dead-letter subjects,
	// PREFIX.rejects.CHARACTERISTIC. Default "lockstep".
	RejectPrefix string `toml:"reject_prefix"`

	// Credentials: at most one of CredsFile, NKeyFile, Token, or User
	// with Password. Prefer the environment for secrets.
	CredsFile string `toml:"creds_file"`
	NKeyFile  string `toml:"nkey_file"`
	User      string `toml:"user"`
	Password  string `toml:"password"`
	Token     string `toml:"token"`
	// TLS: a CA file for the server's certificate and an optional client
	// certificate with its key.
	TLSCA   string `toml:"tls_ca"`
	TLSCert string `toml:"tls_cert"`
	TLSKey  string `toml:"tls_key"`

	// PendingMsgs and PendingBytes are the core subscription's pending
	// limits (defaults ingest.DefaultPendingMsgs, DefaultPendingBytes).
	PendingMsgs  int `toml:"pending_msgs"`
	PendingBytes int `toml:"pending_bytes"`
	// Batch is the number of JetStream messages pulled ahead. Default 1000.
	Batch int `toml:"batch"`
	// AckWait is JetStream's wait for an ack before it redelivers.
	// Default 30s.
	AckWait Duration `toml:"ack_wait"`
}

// IngestConfig says how messages become measurements.
type IngestConfig struct {
	// Template maps subjects to characteristic and group. Default
	// "meas.<characteristic>.<group>".
	Template string `toml:"template"`
	// Unknown is "accept" (default: unknown characteristics get the
	// defaults) or "reject" (unknown_characteristic).
	Unknown string `toml:"unknown"`
	// Time is what a measurement without a time is stamped with, and
	// what times are checked against: "stored" (the JetStream stored time,
	// else arrival; default) or "arrival".
	Time string `toml:"time"`
	// MaxFuture and MaxAge bound a measurement's time around that. Defaults
	// 5m and 168h; 0 switches the check off.
	MaxFuture Duration `toml:"max_future"`
	MaxAge    Duration `toml:"max_age"`
	// IDMemory is how many recent ids per characteristic are remembered to
	// reject duplicates. Default 100000; 0 switches it off.
	IDMemory *int `toml:"id_memory"`
	// MaxCharacteristics bounds the unknown characteristics accepted.
	// Default 1000.
	MaxCharacteristics int `toml:"max_characteristics"`
}

// StoreConfig says where and how state is kept.
type StoreConfig struct {
	// Path is the bbolt file. Default lockstep.db.
	Path string `toml:"path"`
	// CommitValues and CommitInterval bound a batch: it is committed when
	// it holds this many values (or rejects), or this long after its first.
	// Defaults 1000 and 200ms.
	CommitValues   int      `toml:"commit_values"`
	CommitInterval Duration `toml:"commit_interval"`
	// RetainRaw and RetainBuckets delete raw values and bucket states older
	// than this, once an hour. Default 0: keep everything.
	RetainRaw     Duration `toml:"retain_raw"`
	RetainBuckets Duration `toml:"retain_buckets"`
	// NoSync skips fsync: a machine crash can lose acked data. Tests only.
	NoSync bool `toml:"no_sync"`
}

// HTTPConfig is the HTTP API.
type HTTPConfig struct {
	// Listen is the address of the API and /metrics. Default
	// 127.0.0.1:8420. Beyond loopback, Token is required.
	Listen string `toml:"listen"`
	// Token is the bearer token of the API: writes (acknowledging an
	// alert) need it whenever it is set, and every request needs it when
	// Listen is not a loopback address. Prefer LOCKSTEP_HTTP_TOKEN.
	Token string `toml:"token"`
}

// LogConfig is the log.
type LogConfig struct {
	// Level: trace, debug, info (default), warn, error.
	Level string `toml:"level"`
	// Format: auto (default: console on a terminal, else JSON lines),
	// json or console.
	Format string `toml:"format"`
}

// Settings are the window and analysis settings of a characteristic. An
// absent field takes the default's (and the default's default, below).
type Settings struct {
	// Bucket is the bucket width (1m); Window the window length, a
	// multiple of it (30m).
	Bucket Duration `toml:"bucket"`
	Window Duration `toml:"window"`
	// Lateness is the allowed lateness (1m); 0 for none.
	Lateness Duration `toml:"lateness"`
	// SilentAfter drops a group with no value for this long (10m); 0
	// drops only groups with no value in the window.
	SilentAfter Duration `toml:"silent_after"`
	// Sample is the values kept per group and bucket for the rank and
	// spread tests (64, at most 4096); 0 keeps none.
	Sample *int `toml:"sample"`
	// Count > 0 makes the window the last Count values per group.
	Count *int `toml:"count"`
	// Alpha, Confidence and Power are the analysis levels (0.05, 0.95,
	// 0.9).
	Alpha      *float64 `toml:"alpha"`
	Confidence *float64 `toml:"confidence"`
	Power      *float64 `toml:"power"`
	// EvaluateEvery is the interval between evaluations (10s).
	EvaluateEvery Duration `toml:"evaluate_every"`
}

// CharacteristicConfig is one [characteristics.NAME] section.
type CharacteristicConfig struct {
	Settings
	// Unit, e.g. "g"; a measurement naming another is rejected.
	Unit string `toml:"unit"`
	// Nominal is what values are centred on: a decimal string ("500.00")
	// or a number. Default: the first value.
	Nominal any `toml:"nominal"`
	// Min and Max bound the plausible range, inclusive.
	Min *float64 `toml:"min"`
	Max *float64 `toml:"max"`
	// Alert is its own alert rule, over [alerts] (alertconfig.go).
	Alert *AlertRuleConfig `toml:"alert"`
}

// Duration is a TOML duration string such as "1m30s"; Set tells an
// explicit "0s" from an absent key.
type Duration struct {
	D   time.Duration
	Set bool
}

// UnmarshalText reads a Go duration ("200ms", "1m", "168h").
func (d *Duration) UnmarshalText(b []byte) error {
	s := string(b)
	x, err := time.ParseDuration(s)
	if err != nil {
		if strings.Trim(s, "0123456789") == "" {
			return fmt.Errorf("duration %s has no unit: write it as a string such as \"%ss\" or \"%sm\"", s, s, s)
		}
		return fmt.Errorf("duration %q: use a number and a unit, such as \"200ms\", \"30s\", \"1m\" or \"168h\"", s)
	}
	d.D, d.Set = x, true
	return nil
}

// setDuration returns a Duration that is set to x.
func setDuration(x time.Duration) Duration { return Duration{D: x, Set: true} }

// Defaults of Config.
const (
	defaultStream         = "LOCKSTEP"
	defaultConsumer       = "lockstep"
	defaultSubjects       = "meas.>"
	defaultRejectPrefix   = "lockstep"
	defaultStorePath      = "lockstep.db"
	defaultHTTPListen     = "127.0.0.1:8420"
	defaultNATSListen     = "127.0.0.1:4222"
	defaultCommitValues   = 1000
	defaultCommitInterval = 200 * time.Millisecond
	defaultEvaluateEvery  = 10 * time.Second
	natsEmbedded          = "embedded"
)

// DefaultConfig returns the configuration used when nothing is set: an
// embedded NATS server, a JetStream durable consumer on meas.>, the store
// lockstep.db and the API on 127.0.0.1:8420.
func DefaultConfig() *Config {
	return &Config{
		NATS: NATSConfig{
			Listen: defaultNATSListen, Source: "jetstream", Stream: defaultStream, Consumer: defaultConsumer,
			Subjects: defaultSubjects, RejectPrefix: defaultRejectPrefix,
		},
		Ingest: IngestConfig{Template: ingest.DefaultSubjectTemplate, Unknown: "accept", Time: "stored"},
		Store: StoreConfig{
			Path: defaultStorePath, CommitValues: defaultCommitValues,
			CommitInterval: setDuration(defaultCommitInterval),
		},
		HTTP: HTTPConfig{Listen: defaultHTTPListen},
		Alerts: AlertsConfig{
			SubjectPrefix: defaultRejectPrefix, Retain: setDuration(defaultAlertRetain),
		},
		Log: LogConfig{Level: "info", Format: "auto"},
	}
}

// ParseConfig reads a TOML configuration over cfg. Unknown keys are errors
// that name the key and its line; so are values of the wrong type.
func ParseConfig(r io.Reader, cfg *Config) error {
	dec := toml.NewDecoder(r)
	dec.DisallowUnknownFields()
	err := dec.Decode(cfg)
	var strict *toml.StrictMissingError
	var de *toml.DecodeError
	switch {
	case err == nil:
		return nil
	case errors.As(err, &strict):
		var errs []error
		for i := range strict.Errors {
			e := &strict.Errors[i]
			row, _ := e.Position()
			errs = append(errs, fmt.Errorf("line %d: unknown key %s (see etc/lockstep.toml for the keys)", row, keyPath(e.Key())))
		}
		return errors.Join(errs...)
	case errors.As(err, &de):
		row, col := de.Position()
		msg := strings.TrimPrefix(de.Error(), "toml: ")
		if k := de.Key(); len(k) > 0 {
			return fmt.Errorf("line %d, column %d: %s: %s", row, col, keyPath(k), msg)
		}
		return fmt.Errorf("line %d, column %d: %s", row, col, msg)
	}
	return err
}

// keyPath writes a TOML key as it is written in a file, quoting the parts
// that need it: characteristics."fill weight".unit.
func keyPath(k []string) string {
	parts := make([]string, len(k))
	for i, p := range k {
		if p == "" || strings.Trim(p, "abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ0123456789_-") != "" {
			p = fmt.Sprintf("%q", p)
		}
		parts[i] = p
	}
	return strings.Join(parts, ".")
}

// LoadConfig reads the file at path over cfg.
func LoadConfig(path string, cfg *Config) error {
	f, err := os.Open(path)
	if err != nil {
		return fmt.Errorf("open config: %w", err)
	}
	defer f.Close()
	if err := ParseConfig(f, cfg); err != nil {
		return fmt.Errorf("read config %s: %w", path, err)
	}
	return nil
}

// envVar is an environment variable read by lockstep run, over the file
// and under the flags. Secrets belong there rather than in the file.
type envVar struct {
	name, doc string
	set       func(c *Config, v string)
}

// envVars returns the environment variables lockstep run reads.
func envVars() []envVar {
	return []envVar{
		{"LOCKSTEP_NATS_URL", "NATS server URLs separated by commas, or embedded", func(c *Config, v string) { c.NATS.URL = v }},
		{"LOCKSTEP_NATS_USER", "NATS user name", func(c *Config, v string) { c.NATS.User = v }},
		{"LOCKSTEP_NATS_PASSWORD", "NATS password", func(c *Config, v string) { c.NATS.Password = v }},
		{"LOCKSTEP_NATS_TOKEN", "NATS token", func(c *Config, v string) { c.NATS.Token = v }},
		{"LOCKSTEP_NATS_CREDS", "NATS credentials file (JWT and seed)", func(c *Config, v string) { c.NATS.CredsFile = v }},
		{"LOCKSTEP_NATS_NKEY", "NATS nkey seed file", func(c *Config, v string) { c.NATS.NKeyFile = v }},
		{"LOCKSTEP_HTTP_TOKEN", "bearer token of the HTTP API (see [http] token)", func(c *Config, v string) { c.HTTP.Token = v }},
		{"LOCKSTEP_LOG_LEVEL", "log level", func(c *Config, v string) { c.Log.Level = v }},
	}
}

// applyEnv sets what the environment sets; an empty variable sets nothing.
func applyEnv(c *Config, getenv func(string) string) {
	for _, e := range envVars() {
		if v := getenv(e.name); v != "" {
			e.set(c, v)
		}
	}
}
