package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"strings"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
	"github.com/rs/zerolog"

	"github.com/lockstep-project/lockstep/ingest"
	"github.com/lockstep-project/lockstep/store"
)

// RunCommand is lockstep run, the daemon.
type RunCommand struct {
	Stdout, Stderr io.Writer
	// Getenv reads the environment; nil means os.Getenv.
	Getenv func(string) string

	// started, when set, is called once the daemon has restored its state
	// and serves HTTP, just before the loop starts (for tests and lockstep
	// demo).
	started func(runInfo)
	// clock, when set, is the daemon's clock instead of time.Now: lockstep
	// demo's simulated time (demo.go). It stamps arrivals, evaluations and
	// alerts.
	clock func() time.Time
}

// runInfo says where a running daemon can be reached.
type runInfo struct {
	HTTP string // host:port of the API
	NATS string // URL of the NATS server (the embedded one's, if so)
}

// shutdownTimeout bounds the shutdown after the loop has stopped.
const shutdownTimeout = 5 * time.Second

// Usage returns the help text of lockstep run.
func (c *RunCommand) Usage() string {
	var env strings.Builder
	for _, e := range envVars() {
		fmt.Fprintf(&env, "  %-24s %s\n", e.name, e.doc)
	}
	return `Usage: lockstep run [options]

Runs the daemon: subscribes to measurements on NATS, keeps exact running sums
per group in rolling windows, stores them with every raw value in a bbolt file,
evaluates each characteristic's window on an interval and serves the reports:

  GET /api/v1/characteristics         every characteristic's state
  GET /api/v1/characteristics/NAME    its latest report (the fields of
                                      lockstep check --json, plus window,
                                      counts, silent and incomplete)
  GET /api/v1/alerts                  open alerts (?state=all: with the
                                      recently cleared); /api/v1/alerts/ID one
  POST /api/v1/alerts/ID/ack          acknowledge: {"by": "...", "note": "..."}
                                      (see lockstep alerts --help)
  GET /                               the shift dashboard (see lockstep demo)
  GET /api/v1/stream                  server-sent events: summaries, alert events
  GET /metrics                        Prometheus metrics
  GET /healthz, /readyz               liveness, readiness

With no options it runs an embedded NATS server with JetStream on
127.0.0.1:4222, reads meas.<characteristic>.<group> subjects (meas.fill-weight.L3)
with payloads such as {"value": "500.12", "time": "2026-03-01T08:00:00Z"},
creates every characteristic it sees with the default settings, keeps its
state in lockstep.db and serves the API on 127.0.0.1:8420. Rejected
measurements are counted by reason and republished to
lockstep.rejects.<characteristic>; they never reach the sums.

lockstep is advisory: it is not a safety interlock and does not replace the
plant's quality procedures, local regulations or licensed practice.

Options (over the config file, which is over the defaults):
  --config FILE          TOML configuration (see etc/lockstep.toml); unknown keys are errors
  --nats URL|embedded    NATS server URLs separated by commas, or embedded
                         (default: embedded unless the config or LOCKSTEP_NATS_URL names a URL)
  --nats-listen H:P      the embedded server's client address (default 127.0.0.1:4222; port 0: any free port)
  --nats-data DIR        the embedded server's JetStream directory (default: beside the store,
                         lockstep-jetstream for lockstep.db)
  --source S             jetstream (durable; default) or core (at most once, fastest)
  --stream NAME          JetStream stream (default LOCKSTEP)
  --consumer NAME        durable consumer, one per store (default lockstep)
  --create-stream        create the stream on an external server if it is missing
                         (always done with the embedded server)
  --subjects PATTERN     subject filter (default meas.>)
  --store FILE           state file (default lockstep.db)
  --http HOST:PORT       API and /metrics address (default 127.0.0.1:8420); beyond
                         loopback every request needs LOCKSTEP_HTTP_TOKEN
  --bucket D             default bucket width (default 1m)
  --window D             default window length, a multiple of the bucket (default 30m)
  --evaluate-every D     default interval between evaluations (default 10s)
  --log-level L          trace, debug, info (default), warn or error

Flags set the defaults of every characteristic; a characteristic's own section
in the config file still wins for it.

Environment (over the config file, under the flags):
` + env.String() + `
Stopping: SIGINT or SIGTERM stops fetching, commits and acknowledges the batch
in flight and closes everything within 5 s.
`
}

// Run parses the options and runs the daemon until ctx ends.
func (c *RunCommand) Run(ctx context.Context, args []string) error {
	cfg, err := c.config(args)
	if err != nil {
		return err
	}
	log, err := newLogger(c.Stderr, cfg.Log.Level, cfg.Log.Format)
	if err != nil {
		return fmt.Errorf("%w: %v", errUsage, err)
	}
	return c.serve(ctx, cfg, log)
}

// config builds the configuration: defaults, the file, the environment,
// the flags; then validates it.
func (c *RunCommand) config(args []string) (*Config, error) {
	fs := newFlagSet("run")
	configPath := fs.String("config", "", "")
	natsURL := fs.String("nats", "", "")
	natsListen := fs.String("nats-listen", "", "")
	natsData := fs.String("nats-data", "", "")
	source := fs.String("source", "", "")
	stream := fs.String("stream", "", "")
	consumer := fs.String("consumer", "", "")
	createStream := fs.Bool("create-stream", false, "")
	subjects := fs.String("subjects", "", "")
	storePath := fs.String("store", "", "")
	httpListen := fs.String("http", "", "")
	bucket := fs.Duration("bucket", 0, "")
	win := fs.Duration("window", 0, "")
	evalEvery := fs.Duration("evaluate-every", 0, "")
	logLevel := fs.String("log-level", "", "")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return nil, err
	}
	if len(pos) > 0 {
		return nil, fmt.Errorf("%w: unexpected argument %q", errUsage, pos[0])
	}
	cfg := DefaultConfig()
	if *configPath != "" {
		if err := LoadConfig(*configPath, cfg); err != nil {
			return nil, err
		}
	}
	getenv := c.Getenv
	if getenv == nil {
		getenv = os.Getenv
	}
	applyEnv(cfg, getenv)
	fs.Visit(func(f *flag.Flag) {
		switch f.Name {
		case "nats":
			cfg.NATS.URL = *natsURL
		case "nats-listen":
			cfg.NATS.Listen = *natsListen
		case "nats-data":
			cfg.NATS.Data = *natsData
		case "source":
			cfg.NATS.Source = *source
		case "stream":
			cfg.NATS.Stream = *stream
		case "consumer":
			cfg.NATS.Consumer = *consumer
		case "create-stream":
			cfg.NATS.CreateStream = *createStream
		case "subjects":
			cfg.NATS.Subjects = *subjects
		case "store":
			cfg.Store.Path = *storePath
		case "http":
			cfg.HTTP.Listen = *httpListen
		case "bucket":
			cfg.Defaults.Bucket = setDuration(*bucket)
		case "window":
			cfg.Defaults.Window = setDuration(*win)
		case "evaluate-every":
			cfg.Defaults.EvaluateEvery = setDuration(*evalEvery)
		case "log-level":
			cfg.Log.Level = *logLevel
		}
	})
	if cfg.NATS.URL == "" {
		cfg.NATS.URL = natsEmbedded
	}
	if err := cfg.Validate(); err != nil {
		return nil, fmt.Errorf("check config: %w", err)
	}
	if err := checkHTTPToken(cfg); err != nil {
		return nil, err
	}
	return cfg, nil
}

// services are the long-lived parts of a running daemon, closed in reverse
// order of need.
type services struct {
	http     *http.Server
	embedded *server.Server
	nc       *nats.Conn
	src      ingest.Source
	dead     *ingest.DeadLetters
	st       *store.Store
	alerts   *alerting
}

// serve starts everything, runs the loop and shuts down.
func (c *RunCommand) serve(ctx context.Context, cfg *Config, log zerolog.Logger) (err error) {
	var sv services
	defer func() {
		if cerr := sv.close(); cerr != nil {
			err = errors.Join(err, cerr)
		}
		log.Info().Err(err).Msg("lockstep stopped")
	}()
	dlog := component(log, "daemon")

	st, err := store.Open(cfg.Store.Path, store.Options{NoSync: cfg.Store.NoSync})
	if err != nil {
		return err
	}
	sv.st = st
	d := newDaemon(cfg, st, dlog)
	met, book := d.met, d.book
	if c.clock != nil {
		d.now, d.alerts.now = c.clock, c.clock
	}
	// The dashboard's server-sent events (sse.go): every report put and
	// every alert event.
	hub := newStreamHub(streamOptions{}, met.reg)
	book.onPut, d.alerts.alertHook = hub.summary, hub.alert

	ln, err := net.Listen("tcp", cfg.HTTP.Listen)
	if err != nil {
		return fmt.Errorf("listen for HTTP on %s: %w", cfg.HTTP.Listen, err)
	}
	hlog := component(log, "http")
	host, _, _ := net.SplitHostPort(cfg.HTTP.Listen)
	sv.http = newHTTPServer(newAPIHandler(apiState{book: book, reg: met.reg, ready: d.ready.Load, log: hlog, store: st,
		alerts: d.alerts, token: cfg.HTTP.Token, remote: !isLoopback(host), stream: hub}), hlog)
	sv.http.RegisterOnShutdown(hub.close) // Shutdown waits for idle connections; a stream never is
	go func() {
		if err := sv.http.Serve(ln); err != nil && !errors.Is(err, http.ErrServerClosed) {
			hlog.Error().Err(err).Msg("HTTP server stopped")
		}
	}()
	if !isLoopback(host) {
		hlog.Warn().Str("listen", cfg.HTTP.Listen).Msg("the API listens beyond loopback: every request needs the bearer token")
	}

	if d.val, err = ingest.NewValidator(validatorConfig(cfg)); err != nil {
		return fmt.Errorf("configure validation: %w", err)
	}
	if err := d.restore(d.now()); err != nil {
		return err
	}

	urls := strings.Split(cfg.NATS.URL, ",")
	if cfg.NATS.URL == natsEmbedded {
		if sv.embedded, err = startEmbedded(cfg, log); err != nil {
			return err
		}
		urls = []string{sv.embedded.ClientURL()}
	}
	n := &cfg.NATS
	sv.nc, err = ingest.Connect(ingest.ConnOptions{
		URLs: urls, CredsFile: n.CredsFile, User: n.User, Password: n.Password, Token: n.Token, NKeyFile: n.NKeyFile,
		TLSCA: n.TLSCA, TLSCert: n.TLSCert, TLSKey: n.TLSKey, Logger: log,
	})
	if err != nil {
		return err
	}
	if sv.src, err = openSource(ctx, cfg, sv.nc, sv.embedded != nil, d.now, log); err != nil {
		return err
	}
	d.src = sv.src
	if d.consumer != "" {
		if err := checkStream(ctx, sv.nc, cfg.NATS.Stream, d.cursor, st.Path(), dlog); err != nil {
			return err
		}
	}
	if sv.dead, err = ingest.NewDeadLetters(sv.nc, ingest.DeadLetterOptions{Logger: log}); err != nil {
		return err
	}
	d.dead = sv.dead
	if err := d.alerts.startSinks(sv.nc); err != nil {
		return err
	}
	sv.alerts = d.alerts
	met.watch(d.val.Counters(), sv.src, sv.dead)

	log.Info().Str("http", ln.Addr().String()).Str("nats", sv.nc.ConnectedUrlRedacted()).Str("source", cfg.NATS.Source).
		Str("subjects", cfg.NATS.Subjects).Str("store", st.Path()).Msg("lockstep running")
	if c.started != nil {
		c.started(runInfo{HTTP: ln.Addr().String(), NATS: urls[0]})
	}
	return d.run(ctx)
}

// startEmbedded starts the in-process NATS server.
func startEmbedded(cfg *Config, log zerolog.Logger) (*server.Server, error) {
	host, port, _ := splitHostPort(cfg.NATS.Listen) // validated
	if port == 0 {
		port = -1
	}
	dir := cfg.NATS.Data
	if dir == "" {
		dir = defaultNATSData(cfg.Store.Path)
	}
	if log.GetLevel() > zerolog.DebugLevel {
		log = log.Level(zerolog.WarnLevel) // the server's notices (a banner) only when debugging
	}
	return ingest.StartEmbedded(ingest.EmbeddedOptions{Host: host, Port: port, StoreDir: dir, Logger: log})
}

// defaultNATSData is the embedded server's JetStream directory beside the
// store: /var/lib/lockstep/lockstep.db gives /var/lib/lockstep/lockstep-jetstream.
func defaultNATSData(storePath string) string {
	base := filepath.Base(storePath)
	base = strings.TrimSuffix(base, filepath.Ext(base))
	return filepath.Join(filepath.Dir(storePath), base+"-jetstream")
}

// openSource subscribes: a durable JetStream consumer or a core
// subscription.
// now stamps arrivals.
func openSource(ctx context.Context, cfg *Config, nc *nats.Conn, embedded bool, now func() time.Time, log zerolog.Logger) (ingest.Source, error) {
	n := &cfg.NATS
	// A failed constructor returns a nil pointer; returning it as the
	// interface would make a non-nil Source whose Close panics.
	if n.Source == "core" {
		src, err := ingest.NewCoreSource(nc, n.Subjects, ingest.CoreOptions{PendingMsgs: n.PendingMsgs, PendingBytes: n.PendingBytes, Logger: log, Now: now})
		if err != nil {
			return nil, err
		}
		return src, nil
	}
	batch := n.Batch
	if batch == 0 {
		batch = ingest.DefaultJetStreamBatch
	}
	src, err := ingest.NewJetStreamSource(ctx, nc, ingest.JetStreamOptions{
		Stream: n.Stream, Durable: n.Consumer, FilterSubjects: []string{n.Subjects},
		CreateStream: embedded || n.CreateStream,
		Batch:        batch,
		// Room for everything the daemon holds unacknowledged (commit.go).
		MaxAckPending: jsMaxAckPending(batch, cfg.Store.CommitValues),
		AckWait:       n.AckWait.D,
		Logger:        log,
		Now:           now,
	})
	if err != nil {
		return nil, err
	}
	return src, nil
}

// checkStream refuses a stream that ends before the cursor the store
// applied: it was deleted and made anew, and every message up to the old
// cursor would be skipped. It warns when the stream's limits removed
// messages the store had not applied yet.
func checkStream(ctx context.Context, nc *nats.Conn, name string, cursor uint64, storePath string, log zerolog.Logger) error {
	js, err := jetstream.New(nc)
	if err != nil {
		return fmt.Errorf("check stream %q: %w", name, err)
	}
	s, err := js.Stream(ctx, name)
	if err != nil {
		return fmt.Errorf("check stream %q: %w", name, err)
	}
	info, err := s.Info(ctx)
	if err != nil {
		return fmt.Errorf("check stream %q: %w", name, err)
	}
	if cursor > info.State.LastSeq {
		return fmt.Errorf("check stream %q: it ends at sequence %d, but %s has applied messages up to %d: the stream was made anew; use another --consumer or a new --store, or every message up to %d would be skipped",
			name, info.State.LastSeq, storePath, cursor, cursor)
	}
	if first := info.State.FirstSeq; first > cursor+1 && info.State.Msgs > 0 {
		log.Warn().Uint64("cursor", cursor).Uint64("first_seq", first).
			Msg("the stream no longer holds the messages after the cursor up to its first one: its limits removed them before lockstep applied them")
	}
	return nil
}

// validatorConfig maps the configuration to ingest's.
func validatorConfig(cfg *Config) ingest.ValidatorConfig {
	tmpl, _ := ingest.ParseSubjectTemplate(cfg.Ingest.Template) // validated
	unknown, _ := ingest.ParseUnknownPolicy(cfg.Ingest.Unknown)
	chars := make(map[string]ingest.CharacteristicRules, len(cfg.Characteristics))
	for name := range cfg.Characteristics {
		chars[name] = cfg.settingsFor(name).rules()
	}
	off := func(d Duration) time.Duration { // 0 switches the check off
		if d.Set && d.D == 0 {
			return -1
		}
		return d.D
	}
	vc := ingest.ValidatorConfig{
		Template: tmpl, Characteristics: chars, Unknown: unknown,
		MaxFuture: off(cfg.Ingest.MaxFuture), MaxAge: off(cfg.Ingest.MaxAge),
		MaxCharacteristics: cfg.Ingest.MaxCharacteristics,
	}
	if m := cfg.Ingest.IDMemory; m != nil {
		vc.IDMemory = *m
		if *m == 0 {
			vc.IDMemory = -1
		}
	}
	return vc
}

func isLoopback(host string) bool {
	if host == "localhost" {
		return true
	}
	ip := net.ParseIP(host)
	return ip != nil && ip.IsLoopback()
}

// close stops everything that was started, within shutdownTimeout, and
// joins what failed.
func (s *services) close() error {
	ctx, cancel := context.WithTimeout(context.Background(), shutdownTimeout)
	defer cancel()
	var errs []error
	add := func(what string, err error) {
		if err != nil {
			errs = append(errs, fmt.Errorf("%s: %w", what, err))
		}
	}
	if s.http != nil {
		add("stop HTTP server", s.http.Shutdown(ctx))
	}
	if s.src != nil {
		add("close source", s.src.Close())
	}
	if s.alerts != nil {
		add("deliver alert events to the webhook", s.alerts.close(ctx))
	}
	if s.dead != nil {
		add("flush dead letters", s.dead.Close(ctx))
	}
	if s.nc != nil {
		if !s.nc.IsClosed() {
			// The last acknowledgement may still be in the client's buffer.
			add("flush NATS connection", s.nc.FlushWithContext(ctx))
		}
		s.nc.Close()
	}
	if s.embedded != nil {
		s.embedded.Shutdown()
		done := make(chan struct{})
		go func() { s.embedded.WaitForShutdown(); close(done) }()
		select {
		case <-done:
		case <-ctx.Done():
			add("stop embedded NATS server", ctx.Err())
		}
	}
	if s.st != nil {
		add("close store", s.st.Close())
	}
	return errors.Join(errs...)
}
