package main

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	natstest "github.com/nats-io/nats-server/v2/test"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"github.com/lockstep-project/lockstep/cmd/lockstep/internal/plant"
)

const simStart = "2026-12-01T06:00:00Z"

// runSimulate runs "lockstep simulate args..." in-process.
func runSimulate(ctx context.Context, args ...string) (string, string, error) {
	var out, errb bytes.Buffer
	c := &SimulateCommand{Stdout: &out, Stderr: &errb}
	err := c.Run(ctx, args)
	return out.String(), errb.String(), err
}

// expected returns the messages that the plant generates for sc from
// simStart over d.
func expected(t *testing.T, sc plant.Scenario, d time.Duration) []plant.Message {
	t.Helper()
	sc.Start, _ = time.Parse(time.RFC3339, simStart)
	sc.Duration = d
	g, err := plant.New(sc)
	if err != nil {
		t.Fatal(err)
	}
	var ms []plant.Message
	for m := range g.All() {
		ms = append(ms, m)
	}
	return ms
}

func dryRunLines(ms []plant.Message) string {
	var b strings.Builder
	for _, m := range ms {
		fmt.Fprintf(&b, "%s\t%s\n", m.Subject, m.Payload)
	}
	return b.String()
}

// writeScenario writes the example coffee scenario with its bad rate
// changed to rate, and returns the file's path.
func writeScenario(t *testing.T, rate string) string {
	t.Helper()
	data, err := os.ReadFile("../../testdata/plant/coffee.toml")
	if err != nil {
		t.Fatal(err)
	}
	text := strings.Replace(string(data), "rate = 0.001", "rate = "+rate, 1)
	path := filepath.Join(t.TempDir(), "plant.toml")
	if err := os.WriteFile(path, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// TestSimulateDryRun reads "simulate --dry-run --duration 10s" line by
// line: each line is a subject and a payload that is JSON with the
// documented fields, except the bad ones, which are exactly those the plant
// marks (with 5 % bad messages, so that there are some).
func TestSimulateDryRun(t *testing.T) {
	subjectRE := regexp.MustCompile(`^meas\.([a-z-]+)\.([A-Z][0-9])$`)
	idRE := regexp.MustCompile(`^([A-Z][0-9])-([0-9]{6})$`)
	valueRE := regexp.MustCompile(`^-?[0-9]+(\.[0-9]+)?$`)
	path := writeScenario(t, "0.05")
	out, stderr, err := runSimulate(context.Background(), "--dry-run", "--duration", "10s", "--start", simStart, "--scenario", path)
	if err != nil {
		t.Fatalf("%v\n%s", err, stderr)
	}
	sc, err := plant.LoadScenario(path)
	if err != nil {
		t.Fatal(err)
	}
	want := expected(t, sc, 10*time.Second)
	if out != dryRunLines(want) {
		t.Fatal("dry-run output differs from the plant's messages")
	}
	units := map[string]string{"fill-weight": "g", "seal-temperature": "°C", "cap-torque": "N·m"}
	start, _ := time.Parse(time.RFC3339, simStart)
	lines := strings.Split(strings.TrimSuffix(out, "\n"), "\n")
	bad := 0
	for i, line := range lines {
		subject, payload, ok := strings.Cut(line, "\t")
		if !ok {
			t.Fatalf("line %d: no tab: %q", i+1, line)
		}
		sm := subjectRE.FindStringSubmatch(subject)
		if sm == nil {
			t.Fatalf("line %d: subject %q", i+1, subject)
		}
		if want[i].Bad != "" {
			bad++
			continue
		}
		var p struct {
			Value string    `json:"value"`
			Time  time.Time `json:"time"`
			ID    string    `json:"id"`
			Unit  string    `json:"unit"`
		}
		dec := json.NewDecoder(strings.NewReader(payload))
		dec.DisallowUnknownFields()
		if err := dec.Decode(&p); err != nil {
			t.Fatalf("line %d: %v: %s", i+1, err, payload)
		}
		im := idRE.FindStringSubmatch(p.ID)
		switch {
		case !valueRE.MatchString(p.Value):
			t.Errorf("line %d: value %q", i+1, p.Value)
		case p.Time.Before(start) || !p.Time.Before(start.Add(10*time.Second)):
			t.Errorf("line %d: time %v", i+1, p.Time)
		case im == nil || im[1] != sm[2]:
			t.Errorf("line %d: id %q for group %s", i+1, p.ID, sm[2])
		case p.Unit != units[sm[1]]:
			t.Errorf("line %d: unit %q", i+1, p.Unit)
		}
	}
	if bad == 0 {
		t.Error("no bad message in 10 s at 5 %")
	}
	for _, w := range []string{
		fmt.Sprintf("%d messages written to standard output", len(lines)),
		"simulated from 2026-12-01T06:00:00Z for 10s as fast as possible",
		fmt.Sprintf("bad messages: %d (not_json ", bad),
		"fill-weight       L1",
		"cap-torque        H8",
	} {
		if !strings.Contains(stderr, w) {
			t.Errorf("summary lacks %q:\n%s", w, stderr)
		}
	}
}

func TestSimulateDeterministic(t *testing.T) {
	args := []string{"--dry-run", "--duration", "1m", "--start", simStart}
	a, _, _ := runSimulate(context.Background(), args...)
	b, _, _ := runSimulate(context.Background(), args...)
	c, _, _ := runSimulate(context.Background(), append(args, "--seed", "2")...)
	if a == "" || a != b {
		t.Error("the same seed gave different output")
	}
	if a == c {
		t.Error("seeds 1 and 2 gave the same output")
	}
	// The built-in scenario is the example file's.
	d, _, _ := runSimulate(context.Background(), append(args, "--scenario", "../../testdata/plant/coffee.toml")...)
	if a != d {
		t.Error("the built-in scenario and coffee.toml differ")
	}
	e, _, _ := runSimulate(context.Background(), append(args, "--rate-scale", "3")...)
	if n, m := strings.Count(a, "\n"), strings.Count(e, "\n"); m < 2*n || m > 4*n {
		t.Errorf("--rate-scale 3: %d lines against %d", m, n)
	}
}

func TestSimulateUsageErrors(t *testing.T) {
	for _, args := range [][]string{
		{"extra"},
		{"--speed", "-1"},
		{"--speed", "NaN"},
		{"--rate-scale", "0"},
		{"--duration", "-1s"},
		{"--in-flight", "0"},
		{"--jetstream", "--dry-run"},
		{"--start", "yesterday"},
		{"--no-such-flag"},
		{"--seed", "-3"},
	} {
		_, _, err := runSimulate(context.Background(), args...)
		if !errors.Is(err, errUsage) {
			t.Errorf("%v: err = %v, want a usage error", args, err)
		}
	}
}

func TestSimulateHelp(t *testing.T) {
	_, _, err := runSimulate(context.Background(), "--help")
	if !errors.Is(err, errHelp) {
		t.Fatalf("--help: %v", err)
	}
	usage := (&SimulateCommand{}).Usage()
	for _, f := range []string{"--nats URL", "--jetstream", "--in-flight N", "--scenario FILE", "--seed N", "--speed X",
		"--duration D", "--rate-scale X", "--start T", "--dry-run", "default " + simDefaultNATS} {
		if !strings.Contains(usage, f) {
			t.Errorf("usage lacks %q", f)
		}
	}
}

func TestSimulateScenarioError(t *testing.T) {
	path := filepath.Join(t.TempDir(), "bad.toml")
	os.WriteFile(path, []byte("name = \"x\"\n[[characteristic]]\nname = \"a\"\nsd = \"big\"\n"), 0o644)
	_, _, err := runSimulate(context.Background(), "--dry-run", "--scenario", path)
	if err == nil || !strings.Contains(err.Error(), path+":4: characteristic.sd: want a number") {
		t.Errorf("err = %v", err)
	}
}

func TestParseStart(t *testing.T) {
	now := time.Date(2026, 12, 1, 12, 0, 0, 0, time.UTC)
	for in, want := range map[string]time.Time{
		"now":                       now,
		"-1h":                       now.Add(-time.Hour),
		"+90s":                      now.Add(90 * time.Second),
		"2026-12-01T07:00:00+01:00": time.Date(2026, 12, 1, 6, 0, 0, 0, time.UTC),
	} {
		got, err := parseStart(in, now)
		if err != nil || !got.Equal(want) {
			t.Errorf("%q: %v, %v; want %v", in, got, err, want)
		}
	}
}

// Without --start, a run as fast as possible ends at about now: no time lies
// in the future.
func TestSimulateDefaultStart(t *testing.T) {
	before := time.Now()
	out, _, err := runSimulate(context.Background(), "--dry-run", "--duration", "1m")
	if err != nil {
		t.Fatal(err)
	}
	last := strings.Split(strings.TrimSuffix(out, "\n"), "\n")
	var p struct {
		Time time.Time `json:"time"`
	}
	for i := len(last) - 1; i >= 0; i-- {
		if json.Unmarshal([]byte(strings.SplitN(last[i], "\t", 2)[1]), &p) == nil && !p.Time.IsZero() {
			break
		}
	}
	if p.Time.After(time.Now()) || p.Time.Before(before.Add(-2*time.Second)) {
		t.Errorf("last time %v, want just before %v", p.Time, before)
	}
}

// TestSimulateInterrupt cancels a live-speed run: it stops at once, without
// an error, and says so in the summary.
func TestSimulateInterrupt(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	time.AfterFunc(300*time.Millisecond, cancel)
	t0 := time.Now()
	out, stderr, err := runSimulate(ctx, "--dry-run", "--speed", "1", "--duration", "1h", "--start", simStart)
	if err != nil {
		t.Fatal(err)
	}
	if d := time.Since(t0); d > 5*time.Second {
		t.Errorf("took %v to stop", d)
	}
	if !strings.Contains(stderr, "interrupted after") {
		t.Errorf("summary:\n%s", stderr)
	}
	// At real time, 18 messages a second: a few in 0.3 s.
	if n := strings.Count(out, "\n"); n > 100 {
		t.Errorf("%d messages in 0.3 s at speed 1", n)
	}
}

// At speed 50, 20 simulated seconds take 0.4 s.
func TestSimulatePaced(t *testing.T) {
	t0 := time.Now()
	out, _, err := runSimulate(context.Background(), "--dry-run", "--speed", "50", "--duration", "20s", "--start", simStart)
	if err != nil {
		t.Fatal(err)
	}
	if d := time.Since(t0); d < 300*time.Millisecond || d > 10*time.Second {
		t.Errorf("took %v, want about 0.4 s", d)
	}
	if want := dryRunLines(expected(t, plant.Coffee(), 20*time.Second)); out != want {
		t.Error("paced output differs")
	}
}

// runNATS starts an in-process NATS server on loopback, with JetStream
// when js is true, and stops it at cleanup.
func runNATS(t *testing.T, js bool) *server.Server {
	t.Helper()
	opts := natstest.DefaultTestOptions
	opts.Host = "127.0.0.1"
	opts.Port = -1
	if js {
		opts.JetStream = true
		opts.StoreDir = t.TempDir()
	}
	srv := natstest.RunServer(&opts)
	t.Cleanup(func() {
		srv.Shutdown()
		srv.WaitForShutdown()
	})
	return srv
}

// TestSimulateNATS publishes two simulated minutes to a server and checks
// that a subscriber receives every message, in order, byte for byte.
func TestSimulateNATS(t *testing.T) {
	srv := runNATS(t, false)
	nc, err := nats.Connect(srv.ClientURL())
	if err != nil {
		t.Fatal(err)
	}
	defer nc.Close()
	var mu sync.Mutex
	var got strings.Builder
	n := 0
	sub, err := nc.Subscribe("meas.>", func(m *nats.Msg) {
		mu.Lock()
		defer mu.Unlock()
		fmt.Fprintf(&got, "%s\t%s\n", m.Subject, m.Data)
		n++
	})
	if err != nil {
		t.Fatal(err)
	}
	sub.SetPendingLimits(-1, -1)
	if err := nc.Flush(); err != nil {
		t.Fatal(err)
	}
	_, stderr, err := runSimulate(context.Background(), "--nats", srv.ClientURL(), "--speed", "0", "--duration", "2m", "--start", simStart, "--rate-scale", "5")
	if err != nil {
		t.Fatalf("%v\n%s", err, stderr)
	}
	want := expected(t, plant.Coffee().WithRateScale(5), 2*time.Minute)
	deadline := time.Now().Add(10 * time.Second)
	for {
		mu.Lock()
		done := n >= len(want)
		mu.Unlock()
		if done || time.Now().After(deadline) {
			break
		}
		time.Sleep(10 * time.Millisecond)
	}
	mu.Lock()
	defer mu.Unlock()
	if n != len(want) {
		t.Fatalf("subscriber received %d messages, want %d", n, len(want))
	}
	if got.String() != dryRunLines(want) {
		t.Error("received messages differ from the plant's")
	}
	if w := fmt.Sprintf("%d messages published to %s", len(want), srv.ClientURL()); !strings.Contains(stderr, w) {
		t.Errorf("summary lacks %q:\n%s", w, stderr)
	}
}

func TestSimulateJetStream(t *testing.T) {
	srv := runNATS(t, true)
	nc, err := nats.Connect(srv.ClientURL())
	if err != nil {
		t.Fatal(err)
	}
	defer nc.Close()
	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	stream, err := js.CreateStream(ctx, jetstream.StreamConfig{Name: "MEAS", Subjects: []string{"meas.>"}, Storage: jetstream.MemoryStorage})
	if err != nil {
		t.Fatal(err)
	}
	_, stderr, err := runSimulate(ctx, "--nats", srv.ClientURL(), "--jetstream", "--in-flight", "64", "--speed", "0", "--duration", "1m", "--start", simStart)
	if err != nil {
		t.Fatalf("%v\n%s", err, stderr)
	}
	want := len(expected(t, plant.Coffee(), time.Minute))
	info, err := stream.Info(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if info.State.Msgs != uint64(want) {
		t.Errorf("stream holds %d messages, want %d", info.State.Msgs, want)
	}
	if w := "JetStream: " + strconv.Itoa(want) + " acknowledged, 0 failed"; !strings.Contains(stderr, w) {
		t.Errorf("summary lacks %q:\n%s", w, stderr)
	}
}

func TestSimulateJetStreamNoStream(t *testing.T) {
	srv := runNATS(t, true)
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	// More messages than --in-flight, and fewer.
	for _, d := range []string{"1m", "1s"} {
		_, stderr, err := runSimulate(ctx, "--nats", srv.ClientURL(), "--jetstream", "--speed", "0", "--duration", d, "--start", simStart)
		if err == nil || strings.Count(err.Error(), "no stream captures the subject") != 1 {
			t.Errorf("--duration %s: err = %v\n%s", d, err, stderr)
		}
	}
}

func TestSimulateNoServer(t *testing.T) {
	_, _, err := runSimulate(context.Background(), "--nats", "nats://127.0.0.1:1", "--duration", "1s")
	if err == nil || !strings.Contains(err.Error(), "connect to NATS at nats://127.0.0.1:1") {
		t.Errorf("err = %v", err)
	}
}
