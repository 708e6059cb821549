package main

import (
	"bytes"
	"context"
	"encoding/json"
	"io"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	natstest "github.com/nats-io/nats-server/v2/test"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
)

// testNATS is an in-process NATS server with JetStream on loopback.
type testNATS struct {
	srv *server.Server
	url string
}

func startNATS(t *testing.T) *testNATS {
	t.Helper()
	opts := natstest.DefaultTestOptions
	opts.Host = "127.0.0.1"
	opts.Port = -1
	opts.JetStream = true
	opts.StoreDir = t.TempDir()
	srv := natstest.RunServer(&opts)
	t.Cleanup(func() { srv.Shutdown(); srv.WaitForShutdown() })
	port := srv.Addr().(*net.TCPAddr).Port
	return &testNATS{srv: srv, url: "nats://127.0.0.1:" + strconv.Itoa(port)}
}

// connect opens a client connection, closed at cleanup.
func connectNATS(t *testing.T, url string) *nats.Conn {
	t.Helper()
	nc, err := nats.Connect(url, nats.Name(t.Name()))
	if err != nil {
		t.Fatalf("connect to %s: %v", url, err)
	}
	t.Cleanup(nc.Close)
	return nc
}

// message is one message to publish.
type message struct {
	subject string
	data    string
}

// publishJS publishes msgs to JetStream in order and waits for every ack,
// creating the stream LOCKSTEP on meas.> first if it is missing.
func publishJS(t *testing.T, nc *nats.Conn, msgs []message) {
	t.Helper()
	js, err := jetstream.New(nc, jetstream.WithPublishAsyncMaxPending(4096))
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	if _, err := js.CreateOrUpdateStream(ctx, jetstream.StreamConfig{Name: defaultStream, Subjects: []string{"meas.>"}, Storage: jetstream.FileStorage}); err != nil {
		t.Fatalf("create stream: %v", err)
	}
	for _, m := range msgs {
		if _, err := js.PublishAsync(m.subject, []byte(m.data), jetstream.WithStallWait(10*time.Second)); err != nil {
			t.Fatalf("publish %s: %v", m.subject, err)
		}
	}
	select {
	case <-js.PublishAsyncComplete():
	case <-ctx.Done():
		t.Fatalf("publishing %d messages: %v", len(msgs), ctx.Err())
	}
}

// syncBuffer collects a daemon's log.
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// testDaemon is lockstep run in this process.
type testDaemon struct {
	t      *testing.T
	info   runInfo
	cancel context.CancelFunc
	done   chan error
	log    *syncBuffer
	once   sync.Once
	err    error
}

// startDaemon runs "lockstep run args..." until stop or the end of the
// test, and returns once it serves HTTP.
func startDaemon(t *testing.T, args ...string) *testDaemon {
	t.Helper()
	ctx, cancel := context.WithCancel(context.Background())
	d := &testDaemon{t: t, cancel: cancel, done: make(chan error, 1), log: &syncBuffer{}}
	started := make(chan runInfo, 1)
	cmd := &RunCommand{
		Stdout: io.Discard, Stderr: d.log,
		Getenv:  func(string) string { return "" },
		started: func(i runInfo) { started <- i },
	}
	go func() { d.done <- cmd.Run(ctx, args) }()
	select {
	case d.info = <-started:
	case err := <-d.done:
		cancel()
		t.Fatalf("lockstep run %s: %v\nlog:\n%s", strings.Join(args, " "), err, d.log)
	case <-time.After(15 * time.Second):
		cancel()
		t.Fatalf("lockstep run did not start in 15 s\nlog:\n%s", d.log)
	}
	t.Cleanup(func() { _ = d.stop() })
	return d
}

// stop cancels the daemon, as SIGINT does, and returns Run's error. It
// fails the test when the daemon takes longer than the promised 5 s and a
// little more.
func (d *testDaemon) stop() error {
	d.once.Do(func() {
		d.cancel()
		select {
		case d.err = <-d.done:
		case <-time.After(7 * time.Second):
			d.t.Errorf("lockstep run did not stop within 7 s\nlog:\n%s", d.log)
		}
	})
	return d.err
}

func (d *testDaemon) url(path string) string { return "http://" + d.info.HTTP + path }

// get fetches path and decodes the JSON response into v (if not nil),
// returning the status.
func (d *testDaemon) get(path string, v any) int {
	d.t.Helper()
	resp, err := http.Get(d.url(path))
	if err != nil {
		d.t.Fatalf("GET %s: %v", path, err)
	}
	defer resp.Body.Close()
	body, err := io.ReadAll(resp.Body)
	if err != nil {
		d.t.Fatalf("GET %s: %v", path, err)
	}
	if v != nil {
		if err := json.Unmarshal(body, v); err != nil {
			d.t.Fatalf("GET %s: %v in %s", path, err, body)
		}
	}
	return resp.StatusCode
}

// metric returns the value of the sample named exactly as given (with its
// labels, e.g. `lockstep_rejects_total{reason="not_finite"}`) in /metrics,
// and false when there is none.
func (d *testDaemon) metric(sample string) (float64, bool) {
	d.t.Helper()
	resp, err := http.Get(d.url("/metrics"))
	if err != nil {
		d.t.Fatalf("GET /metrics: %v", err)
	}
	defer resp.Body.Close()
	body, _ := io.ReadAll(resp.Body)
	for _, line := range strings.Split(string(body), "\n") {
		if rest, ok := strings.CutPrefix(line, sample+" "); ok {
			v, err := strconv.ParseFloat(strings.TrimSpace(rest), 64)
			if err != nil {
				d.t.Fatalf("metric %s: %q", sample, rest)
			}
			return v, true
		}
	}
	return 0, false
}

// liveReportJSON is what the tests read of /api/v1/characteristics/{name}.
type liveReportJSON struct {
	Characteristic string              `json:"characteristic"`
	Evaluated      time.Time           `json:"evaluated"`
	Reference      string              `json:"reference"`
	Rows           int64               `json:"rows"`
	Groups         []jsonGroup         `json:"groups"`
	Anova          map[string]*float64 `json:"anova"`
	Window         jsonWindow          `json:"window"`
	Counts         []jsonCount         `json:"counts"`
	Silent         []string            `json:"silent"`
	Incomplete     bool                `json:"incomplete"`
	Notes          []string            `json:"notes"`
	Verdict        struct {
		Text string `json:"text"`
	} `json:"verdict"`
}

// total is the number of values the report counts, silent groups included.
func (r *liveReportJSON) total() int64 {
	var n int64
	for _, c := range r.Counts {
		n += c.N
	}
	return n
}

// waitReport polls the report of name until its counts reach want values,
// and returns it.
func (d *testDaemon) waitReport(name string, want int64, within time.Duration) *liveReportJSON {
	d.t.Helper()
	deadline := time.Now().Add(within)
	var rep liveReportJSON
	for {
		rep = liveReportJSON{}
		status := d.get("/api/v1/characteristics/"+name, &rep)
		if status == http.StatusOK && rep.total() >= want {
			return &rep
		}
		if time.Now().After(deadline) {
			d.t.Fatalf("characteristic %s: status %d, %d of %d values after %v\nlog:\n%s", name, status, rep.total(), want, within, d.log)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// writeConfig writes a config file into dir and returns its path.
func writeConfig(t *testing.T, dir, text string) string {
	t.Helper()
	path := filepath.Join(dir, "lockstep.toml")
	if err := os.WriteFile(path, []byte(text), 0o600); err != nil {
		t.Fatal(err)
	}
	return path
}

// daemonArgs are the arguments of a test daemon on an external server.
func daemonArgs(natsURL, dir string, extra ...string) []string {
	return append([]string{
		"--nats", natsURL, "--create-stream", "--store", filepath.Join(dir, "lockstep.db"),
		"--http", "127.0.0.1:0", "--evaluate-every", "50ms", "--log-level", "warn",
	}, extra...)
}

// relErr is |got − want| / |want|, or |got| when want is 0.
func relErr(got, want float64) float64 {
	d := got - want
	if d < 0 {
		d = -d
	}
	if want != 0 {
		if want < 0 {
			want = -want
		}
		return d / want
	}
	return d
}

// waitMetric polls /metrics until the sample reaches want.
func (d *testDaemon) waitMetric(sample string, want float64, within time.Duration) {
	d.t.Helper()
	deadline := time.Now().Add(within)
	for {
		v, _ := d.metric(sample)
		if v >= want {
			return
		}
		if time.Now().After(deadline) {
			d.t.Fatalf("%s = %v after %v; want %v\nlog:\n%s", sample, v, within, want, d.log)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// freshReport returns the first report of name evaluated after now: one
// that reflects everything applied so far.
func (d *testDaemon) freshReport(name string, within time.Duration) *liveReportJSON {
	d.t.Helper()
	after := time.Now()
	deadline := after.Add(within)
	for {
		var rep liveReportJSON
		if d.get("/api/v1/characteristics/"+name, &rep) == http.StatusOK && rep.Evaluated.After(after) {
			return &rep
		}
		if time.Now().After(deadline) {
			d.t.Fatalf("characteristic %s: no evaluation within %v\nlog:\n%s", name, within, d.log)
		}
		time.Sleep(10 * time.Millisecond)
	}
}
