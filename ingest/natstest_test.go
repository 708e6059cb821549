package ingest

import (
	"bytes"
	"context"
	"net"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	natstest "github.com/nats-io/nats-server/v2/test"
	"github.com/nats-io/nats.go"
	"github.com/rs/zerolog"
)

// testServer is an in-process NATS server with JetStream, on loopback, that
// can be stopped and started again on the same port and store directory.
type testServer struct {
	t    testing.TB
	opts server.Options
	srv  *server.Server
}

// runTestServer starts a server for the test and shuts it down at cleanup.
func runTestServer(t testing.TB) *testServer {
	t.Helper()
	opts := natstest.DefaultTestOptions
	opts.Host = "127.0.0.1"
	opts.Port = -1
	opts.JetStream = true
	opts.StoreDir = t.TempDir()
	ts := &testServer{t: t, opts: opts}
	ts.start()
	// The first start picked a port: keep it for restarts.
	ts.opts.Port = ts.srv.Addr().(*net.TCPAddr).Port
	t.Cleanup(ts.stop)
	return ts
}

func (ts *testServer) start() {
	ts.t.Helper()
	opts := ts.opts
	ts.srv = natstest.RunServer(&opts)
}

// stop shuts the server down and waits for it; a second stop does nothing.
func (ts *testServer) stop() {
	if ts.srv == nil {
		return
	}
	ts.srv.Shutdown()
	ts.srv.WaitForShutdown()
	ts.srv = nil
}

// restart stops the server and starts it on the same port and store.
func (ts *testServer) restart() {
	ts.t.Helper()
	ts.stop()
	ts.start()
}

func (ts *testServer) url() string {
	return "nats://" + net.JoinHostPort(ts.opts.Host, strconv.Itoa(ts.opts.Port))
}

// connect opens a connection through Connect that reconnects quickly, and
// closes it at cleanup.
func (ts *testServer) connect(t testing.TB, log zerolog.Logger) *nats.Conn {
	t.Helper()
	nc, err := Connect(ConnOptions{
		URLs:             []string{ts.url()},
		Name:             t.Name(),
		ReconnectWait:    20 * time.Millisecond,
		MaxReconnectWait: 100 * time.Millisecond,
		Logger:           log,
	})
	if err != nil {
		t.Fatalf("Connect: %v", err)
	}
	t.Cleanup(nc.Close)
	return nc
}

// logBuffer is a concurrency-safe sink for a test logger.
type logBuffer struct {
	mu  sync.Mutex
	buf bytes.Buffer
}

func (b *logBuffer) Write(p []byte) (int, error) {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.buf.Write(p)
}

func (b *logBuffer) String() string {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.buf.String()
}

// count returns the number of log lines that contain s.
func (b *logBuffer) count(s string) int {
	n := 0
	for _, line := range strings.Split(b.String(), "\n") {
		if strings.Contains(line, s) {
			n++
		}
	}
	return n
}

func (b *logBuffer) logger() zerolog.Logger { return zerolog.New(b) }

// waitFor polls cond every few milliseconds until it holds or d passes.
func waitFor(t testing.TB, d time.Duration, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(d)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("timed out after %v waiting for %s", d, what)
		}
		time.Sleep(5 * time.Millisecond)
	}
}

// testCtx is a context that ends with the test, bounded by d.
func testCtx(t testing.TB, d time.Duration) context.Context {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), d)
	t.Cleanup(cancel)
	return ctx
}
