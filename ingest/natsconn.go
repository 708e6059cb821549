package ingest

import (
	"crypto/tls"
	"crypto/x509"
	"errors"
	"fmt"
	"math/rand/v2"
	"net/url"
	"os"
	"strings"
	"sync"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/rs/zerolog"
)

// Defaults of ConnOptions.
const (
	DefaultNATSURL          = "nats://127.0.0.1:4222"
	DefaultConnName         = "lockstep"
	DefaultReconnectWait    = 250 * time.Millisecond
	DefaultMaxReconnectWait = 8 * time.Second
	DefaultConnLogInterval  = 10 * time.Second
)

// ConnOptions are the options of Connect. The zero value connects to
// DefaultNATSURL without authentication and reconnects forever.
type ConnOptions struct {
	// URLs are the servers to connect to ("nats://host:4222",
	// "tls://host:4222", "ws://…"); a member of a cluster is enough, the
	// others are discovered. Default: DefaultNATSURL.
	URLs []string
	// Name is the connection name shown by the server's monitoring.
	// Default: DefaultConnName.
	Name string

	// Authentication: at most one of CredsFile (a JWT and its seed, as
	// written by nsc), NKeyFile (an nkey seed), Token, or User with
	// Password.
	CredsFile, User, Password, Token, NKeyFile string

	// TLSCA is a PEM file of the certificate authorities that sign the
	// server's certificate (default: the system pool). TLSCert and TLSKey
	// are the client certificate and its key, both or neither. Any of them
	// turns TLS on.
	TLSCA, TLSCert, TLSKey string

	// ReconnectWait is the first delay before reconnecting once every
	// server has been tried; each further round doubles it up to
	// MaxReconnectWait, and every delay is drawn at random between half and
	// all of it so that many clients do not come back at once. Reconnection
	// goes on forever: the daemon must outlive a broker restart. Defaults:
	// DefaultReconnectWait, DefaultMaxReconnectWait.
	ReconnectWait, MaxReconnectWait time.Duration

	// Logger receives every connection event: connect, disconnect (with
	// its error), failed reconnect attempts, reconnect, closed, discovered
	// servers, lame duck mode, slow consumers and other asynchronous
	// server errors. Default: silent (zerolog.Nop()).
	Logger zerolog.Logger
	// LogInterval is the least time between two log lines about slow
	// consumers of one subscription: a subscriber that is overrun keeps
	// flipping in and out of the slow state, and each flip is an event.
	// The counts are in the Source's Stats regardless. Default:
	// DefaultConnLogInterval.
	LogInterval time.Duration
}

// Connect validates opt and connects. Options that contradict each other,
// files that are missing or unreadable and URLs that do not parse are
// reported before any network traffic, in an error that names the option
// and wraps ErrSourceOption. Once connected, the connection reconnects
// forever and logs its events to opt.Logger.
func Connect(opt ConnOptions) (*nats.Conn, error) {
	opts, urls, err := opt.natsOptions()
	if err != nil {
		return nil, fmt.Errorf("connect to NATS: %w", err)
	}
	nc, err := nats.Connect(strings.Join(urls, ","), opts...)
	if err != nil {
		return nil, fmt.Errorf("connect to NATS at %s: %w", strings.Join(redactURLs(urls), ", "), err)
	}
	log := opt.logger()
	log.Info().Str("url", nc.ConnectedUrlRedacted()).
		Str("server_id", nc.ConnectedServerId()).
		Str("server_name", nc.ConnectedServerName()).
		Msg("nats connected")
	return nc, nil
}

func (opt ConnOptions) logger() zerolog.Logger {
	return opt.Logger.With().Str("component", "nats").Logger()
}

// optionError names an invalid option.
func optionError(format string, args ...any) error {
	return fmt.Errorf("%w: %s", ErrSourceOption, fmt.Sprintf(format, args...))
}

// withDefaults fills in defaults and checks the options, without network.
func (opt ConnOptions) withDefaults() (ConnOptions, error) {
	if len(opt.URLs) == 0 {
		opt.URLs = []string{DefaultNATSURL}
	}
	for _, u := range opt.URLs {
		if err := checkNATSURL(u); err != nil {
			return opt, err
		}
	}
	if opt.Name == "" {
		opt.Name = DefaultConnName
	}
	if opt.ReconnectWait == 0 {
		opt.ReconnectWait = DefaultReconnectWait
	}
	if opt.MaxReconnectWait == 0 {
		opt.MaxReconnectWait = max(DefaultMaxReconnectWait, opt.ReconnectWait)
	}
	if opt.LogInterval == 0 {
		opt.LogInterval = DefaultConnLogInterval
	}
	switch {
	case opt.ReconnectWait < 0:
		return opt, optionError("reconnect wait %v is negative", opt.ReconnectWait)
	case opt.MaxReconnectWait < opt.ReconnectWait:
		return opt, optionError("max reconnect wait %v is below reconnect wait %v", opt.MaxReconnectWait, opt.ReconnectWait)
	case opt.LogInterval < 0:
		return opt, optionError("log interval %v is negative", opt.LogInterval)
	}

	var auth []string
	if opt.CredsFile != "" {
		auth = append(auth, "creds file")
	}
	if opt.NKeyFile != "" {
		auth = append(auth, "nkey file")
	}
	if opt.Token != "" {
		auth = append(auth, "token")
	}
	if opt.User != "" || opt.Password != "" {
		auth = append(auth, "user/password")
	}
	if len(auth) > 1 {
		return opt, optionError("%s are given: use one way of authenticating", strings.Join(auth, " and "))
	}
	if opt.User != "" && opt.Password == "" {
		return opt, optionError("user %q is given without a password", opt.User)
	}
	if opt.Password != "" && opt.User == "" {
		return opt, optionError("a password is given without a user")
	}
	for _, f := range []struct{ name, path string }{
		{"creds file", opt.CredsFile},
		{"nkey file", opt.NKeyFile},
		{"TLS CA", opt.TLSCA},
		{"TLS cert", opt.TLSCert},
		{"TLS key", opt.TLSKey},
	} {
		if err := checkReadable(f.name, f.path); err != nil {
			return opt, err
		}
	}
	if (opt.TLSCert == "") != (opt.TLSKey == "") {
		if opt.TLSCert != "" {
			return opt, optionError("TLS cert %q is given without a TLS key", opt.TLSCert)
		}
		return opt, optionError("TLS key %q is given without a TLS cert", opt.TLSKey)
	}
	if opt.TLSCert != "" {
		if _, err := tls.LoadX509KeyPair(opt.TLSCert, opt.TLSKey); err != nil {
			return opt, optionError("TLS cert %q with TLS key %q: %v", opt.TLSCert, opt.TLSKey, err)
		}
	}
	if opt.TLSCA != "" {
		pem, _ := os.ReadFile(opt.TLSCA) // readable: checked above
		if !x509.NewCertPool().AppendCertsFromPEM(pem) {
			return opt, optionError("TLS CA %q holds no PEM certificate", opt.TLSCA)
		}
	}
	return opt, nil
}

// checkNATSURL accepts the URL forms nats.go understands: a scheme of
// nats, tls, ws or wss and a host, or a bare host:port.
func checkNATSURL(s string) error {
	if strings.TrimSpace(s) == "" {
		return optionError("URL is empty")
	}
	raw := s
	if !strings.Contains(s, "://") {
		raw = "nats://" + s
	}
	u, err := url.Parse(raw)
	if err != nil {
		return optionError("URL %q does not parse: %v", redactURL(s), err)
	}
	switch u.Scheme {
	case "nats", "tls", "ws", "wss":
	default:
		return optionError("URL %q has scheme %q: use nats://, tls://, ws:// or wss://", redactURL(s), u.Scheme)
	}
	if u.Hostname() == "" {
		return optionError("URL %q names no host", redactURL(s))
	}
	return nil
}

// checkReadable reports a file option whose file cannot be opened.
func checkReadable(name, path string) error {
	if path == "" {
		return nil
	}
	st, err := os.Stat(path)
	if err != nil {
		if errors.Is(err, os.ErrNotExist) {
			return optionError("%s %q does not exist", name, path)
		}
		return optionError("%s %q: %v", name, path, err)
	}
	if st.IsDir() {
		return optionError("%s %q is a directory, not a file", name, path)
	}
	f, err := os.Open(path)
	if err != nil {
		return optionError("%s %q cannot be read: %v", name, path, err)
	}
	return f.Close()
}

// natsOptions turns opt into nats.go options.
func (opt ConnOptions) natsOptions() ([]nats.Option, []string, error) {
	opt, err := opt.withDefaults()
	if err != nil {
		return nil, nil, err
	}
	log := opt.logger()
	opts := []nats.Option{
		nats.Name(opt.Name),
		nats.MaxReconnects(-1),
		nats.CustomReconnectDelay(func(attempts int) time.Duration {
			return reconnectDelay(attempts, opt.ReconnectWait, opt.MaxReconnectWait, rand.Float64())
		}),
	}
	switch {
	case opt.CredsFile != "":
		opts = append(opts, nats.UserCredentials(opt.CredsFile))
	case opt.NKeyFile != "":
		o, err := nats.NkeyOptionFromSeed(opt.NKeyFile)
		if err != nil {
			return nil, nil, optionError("nkey file %q: %v", opt.NKeyFile, err)
		}
		opts = append(opts, o)
	case opt.Token != "":
		opts = append(opts, nats.Token(opt.Token))
	case opt.User != "":
		opts = append(opts, nats.UserInfo(opt.User, opt.Password))
	}
	if opt.TLSCA != "" {
		opts = append(opts, nats.RootCAs(opt.TLSCA))
	}
	if opt.TLSCert != "" {
		opts = append(opts, nats.ClientCert(opt.TLSCert, opt.TLSKey))
	}
	opts = append(opts, connEventHandlers(log, opt.LogInterval, time.Now)...)
	return opts, opt.URLs, nil
}

// reconnectDelay is the wait before reconnect round attempts (1, 2, …):
// base doubled per round up to limit, then scaled into [½, 1] of itself by
// u, a uniform draw from [0, 1).
func reconnectDelay(attempts int, base, limit time.Duration, u float64) time.Duration {
	d := base
	for i := 1; i < attempts && d < limit; i++ {
		d *= 2
	}
	d = min(d, limit)
	return d/2 + time.Duration(u*float64(d/2))
}

// connEventHandlers logs every connection event.
func connEventHandlers(log zerolog.Logger, interval time.Duration, now func() time.Time) []nats.Option {
	slow := &slowLog{interval: interval, now: now, last: make(map[*nats.Subscription]time.Time)}
	return []nats.Option{
		nats.DisconnectErrHandler(func(nc *nats.Conn, err error) {
			log.Warn().Err(err).Str("url", nc.ConnectedUrlRedacted()).Msg("nats disconnected")
		}),
		nats.ReconnectErrHandler(func(_ *nats.Conn, err error) {
			log.Warn().Err(err).Msg("nats reconnect attempt failed")
		}),
		nats.ReconnectHandler(func(nc *nats.Conn) {
			log.Info().Str("url", nc.ConnectedUrlRedacted()).
				Str("server_id", nc.ConnectedServerId()).
				Uint64("reconnects", nc.Stats().Reconnects).
				Msg("nats reconnected")
		}),
		nats.ClosedHandler(func(nc *nats.Conn) {
			ev := log.Info()
			if err := nc.LastError(); err != nil {
				ev = log.Warn().Err(err)
			}
			ev.Msg("nats connection closed")
		}),
		nats.DiscoveredServersHandler(func(nc *nats.Conn) {
			log.Info().Strs("servers", redactURLs(nc.DiscoveredServers())).Msg("nats servers discovered")
		}),
		nats.LameDuckModeHandler(func(nc *nats.Conn) {
			log.Warn().Str("url", nc.ConnectedUrlRedacted()).Msg("nats server entering lame duck mode")
		}),
		nats.ErrorHandler(func(_ *nats.Conn, sub *nats.Subscription, err error) {
			if errors.Is(err, nats.ErrSlowConsumer) && sub != nil {
				if !slow.due(sub) {
					return
				}
				dropped, _ := sub.Dropped()
				pending, _, _ := sub.Pending()
				log.Warn().Str("subject", sub.Subject).Int("dropped", dropped).
					Int("pending", pending).
					Msg("nats slow consumer: messages dropped")
				return
			}
			ev := log.Error().Err(err)
			if sub != nil {
				ev = ev.Str("subject", sub.Subject)
			}
			ev.Msg("nats asynchronous error")
		}),
	}
}

// slowLog limits slow-consumer log lines to one per interval and
// subscription.
type slowLog struct {
	mu       sync.Mutex
	interval time.Duration
	now      func() time.Time
	last     map[*nats.Subscription]time.Time
}

func (l *slowLog) due(sub *nats.Subscription) bool {
	l.mu.Lock()
	defer l.mu.Unlock()
	t := l.now()
	if last, ok := l.last[sub]; ok && t.Sub(last) < l.interval {
		return false
	}
	if len(l.last) > 1000 { // subscriptions come and go: forget old ones
		clear(l.last)
	}
	l.last[sub] = t
	return true
}

// redactURL hides a password in a URL.
func redactURL(s string) string {
	u, err := url.Parse(s)
	if err != nil || u.User == nil {
		if i := strings.LastIndex(s, "@"); i >= 0 {
			return "***@" + s[i+1:]
		}
		return s
	}
	if _, ok := u.User.Password(); ok {
		u.User = url.UserPassword(u.User.Username(), "xxxxx")
	} else {
		u.User = url.User("xxxxx") // a token in the user part
	}
	return u.String()
}

func redactURLs(us []string) []string {
	out := make([]string, len(us))
	for i, u := range us {
		out[i] = redactURL(u)
	}
	return out
}
