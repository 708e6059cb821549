package ingest

import (
	"errors"
	"fmt"
	"net"
	"os"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/rs/zerolog"
)

// Defaults of EmbeddedOptions.
const (
	DefaultEmbeddedHost  = "127.0.0.1"
	DefaultEmbeddedPort  = 4222
	DefaultEmbeddedName  = "lockstep"
	DefaultEmbeddedReady = 10 * time.Second
)

// ErrAddrInUse: the embedded server's host:port is taken by another process.
var ErrAddrInUse = errors.New("address already in use")

// EmbeddedOptions are the options of StartEmbedded.
type EmbeddedOptions struct {
	// Host and Port are where clients connect. Defaults:
	// DefaultEmbeddedHost (loopback only), DefaultEmbeddedPort; Port -1
	// picks a free port (see Server.ClientURL).
	Host string
	Port int
	// StoreDir holds the JetStream streams; created if missing. Required:
	// it is what survives a restart.
	StoreDir string
	// Name is the server name. Default: DefaultEmbeddedName.
	Name string
	// MaxStore and MaxMemory limit JetStream's file and memory storage in
	// bytes. Default (0): the server's own, a share of the disk and memory.
	MaxStore, MaxMemory int64
	// ReadyTimeout bounds the wait for the server to accept connections,
	// which includes recovering the streams in StoreDir. Default:
	// DefaultEmbeddedReady.
	ReadyTimeout time.Duration
	// Logger receives the server's log. Default: silent.
	Logger zerolog.Logger
}

// StartEmbedded starts an in-process NATS server with JetStream on and
// waits until it accepts connections. The caller shuts it down
// (Shutdown, then WaitForShutdown). A port that is taken is reported at
// once, in an error wrapping ErrAddrInUse that names host:port.
func StartEmbedded(opt EmbeddedOptions) (*server.Server, error) {
	if opt.Host == "" {
		opt.Host = DefaultEmbeddedHost
	}
	if opt.Port == 0 {
		opt.Port = DefaultEmbeddedPort
	}
	if opt.Name == "" {
		opt.Name = DefaultEmbeddedName
	}
	if opt.ReadyTimeout == 0 {
		opt.ReadyTimeout = DefaultEmbeddedReady
	}
	hp := net.JoinHostPort(opt.Host, strconv.Itoa(opt.Port))
	switch {
	case opt.StoreDir == "":
		return nil, fmt.Errorf("start embedded NATS server: %w", optionError("no JetStream store directory is given"))
	case opt.Port < -1 || opt.Port > 65535:
		return nil, fmt.Errorf("start embedded NATS server: %w", optionError("port %d: use 1–65535, or -1 for any free port", opt.Port))
	case opt.ReadyTimeout < 0:
		return nil, fmt.Errorf("start embedded NATS server: %w", optionError("ready timeout %v is negative", opt.ReadyTimeout))
	}
	if err := os.MkdirAll(opt.StoreDir, 0o750); err != nil {
		return nil, fmt.Errorf("create JetStream store directory %q: %w", opt.StoreDir, err)
	}
	if opt.Port > 0 {
		// The server only logs a port it cannot bind; find out first.
		ln, err := net.Listen("tcp", hp)
		if err != nil {
			return nil, listenError(hp, err)
		}
		_ = ln.Close()
	}
	s, err := server.NewServer(&server.Options{
		ServerName:         opt.Name,
		Host:               opt.Host,
		Port:               opt.Port,
		JetStream:          true,
		StoreDir:           opt.StoreDir,
		JetStreamMaxStore:  opt.MaxStore,
		JetStreamMaxMemory: opt.MaxMemory,
		NoSigs:             true,
	})
	if err != nil {
		return nil, fmt.Errorf("configure embedded NATS server on %s: %w", hp, err)
	}
	sl := &serverLog{log: opt.Logger.With().Str("component", "nats-server").Logger()}
	s.SetLoggerV2(sl, false, false, false)
	go s.Start()
	if !s.ReadyForConnections(opt.ReadyTimeout) {
		s.Shutdown()
		s.WaitForShutdown()
		if msg := sl.fatal(); msg != "" {
			if isAddrInUse(msg) {
				return nil, fmt.Errorf("start embedded NATS server: %w: %s is taken by another process: stop it or choose another port (%s)", ErrAddrInUse, hp, msg)
			}
			return nil, fmt.Errorf("start embedded NATS server on %s: %s", hp, msg)
		}
		return nil, fmt.Errorf("start embedded NATS server on %s: not ready after %v", hp, opt.ReadyTimeout)
	}
	if !s.JetStreamEnabled() {
		msg := sl.fatal()
		s.Shutdown()
		s.WaitForShutdown()
		return nil, fmt.Errorf("start JetStream of the embedded NATS server with store %q: %s", opt.StoreDir, msg)
	}
	return s, nil
}

func listenError(hp string, err error) error {
	if errors.Is(err, syscall.EADDRINUSE) {
		return fmt.Errorf("start embedded NATS server: %w: %s is taken by another process: stop it or choose another port", ErrAddrInUse, hp)
	}
	return fmt.Errorf("start embedded NATS server: listen on %s: %w", hp, err)
}

func isAddrInUse(msg string) bool {
	msg = strings.ToLower(msg)
	return strings.Contains(msg, "address already in use") || strings.Contains(msg, "only one usage of each socket address")
}

// serverLog passes the server's log to zerolog and keeps its fatal errors,
// which the server reports only there (it does not exit: this logger does
// not).
type serverLog struct {
	log  zerolog.Logger
	mu   sync.Mutex
	last string
}

func (l *serverLog) fatal() string {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.last
}

func (l *serverLog) Noticef(format string, v ...any) { l.log.Info().Msg(fmt.Sprintf(format, v...)) }
func (l *serverLog) Warnf(format string, v ...any)   { l.log.Warn().Msg(fmt.Sprintf(format, v...)) }
func (l *serverLog) Errorf(format string, v ...any)  { l.log.Error().Msg(fmt.Sprintf(format, v...)) }
func (l *serverLog) Debugf(format string, v ...any)  { l.log.Debug().Msg(fmt.Sprintf(format, v...)) }
func (l *serverLog) Tracef(format string, v ...any)  { l.log.Trace().Msg(fmt.Sprintf(format, v...)) }
func (l *serverLog) Fatalf(format string, v ...any) {
	msg := fmt.Sprintf(format, v...)
	l.mu.Lock()
	l.last = msg
	l.mu.Unlock()
	l.log.Error().Bool("fatal", true).Msg(msg)
}
