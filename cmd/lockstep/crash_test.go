package main

import (
	"math/rand/v2"
	"path/filepath"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
)

// The crash tests run lockstep as a subprocess against an in-process
// JetStream server, crash it (SIGKILL) or the broker at random points while it
// consumes, and check the durability promise of DESIGN.md: every measurement
// counts exactly once in the stored sums. The comparison is with an
// uninterrupted computation of the same measurements: per group and per
// bucket the counts exactly, means and M2 to rounding (see tolMeanSD), and the
// raw values by id, each stored once with its text.

const (
	crashMessages = 200_000
	crashStream   = "MEAS"
	crashConsumer = "lockstep"
	crashBucket   = time.Minute
)

// crashDaemonArgs are the daemon's arguments in the crash tests: JetStream
// from the test's server, a window long enough to hold every published
// value, so that the counts over HTTP are the totals.
func crashDaemonArgs(url, storePath string) []string {
	return []string{
		"--nats", url,
		"--source", "jetstream",
		"--stream", crashStream,
		"--consumer", crashConsumer,
		"--store", storePath,
		"--bucket", crashBucket.String(),
		"--window", "2h",
		"--evaluate-every", "200ms",
		"--log-level", "info",
	}
}

// crashPlant returns the measurements of a crash test: event times from 15
// to 3 minutes ago, so that the validator's limits (7 days old, 5 minutes
// ahead) accept them all and a two-hour window holds them all.
func crashPlant(seed uint64, n int) []e2eMeasurement {
	now := time.Now()
	return e2eGenerate(e2ePlant(), n, seed, now.Add(-15*time.Minute), 12*time.Minute)
}

// e2eWaitAckFloor polls the consumer until its ack floor reaches target, and
// returns it. The daemon acks only after the commit that holds a message,
// so the floor is a lower bound of what is committed.
func e2eWaitAckFloor(t *testing.T, nc *nats.Conn, d *daemonProc, target uint64, limit time.Duration) e2eProgress {
	t.Helper()
	deadline := time.Now().Add(limit)
	for {
		d.requireRunning()
		p, err := e2eProgressOf(nc, crashStream, crashConsumer)
		if err == nil && p.AckFloor >= target {
			return p
		}
		if time.Now().After(deadline) {
			t.Fatalf("ack floor did not reach %d within %v: %+v, %v", target, limit, p, err)
		}
		time.Sleep(2 * time.Millisecond)
	}
}

// e2eCheckFinal stops the caught-up daemon cleanly and compares its store with
// the uninterrupted computation of ms.
func e2eCheckFinal(t *testing.T, nc *nats.Conn, d *daemonProc, storePath string, ms []e2eMeasurement) {
	t.Helper()
	p := e2eWaitDone(t, nc, crashStream, crashConsumer, d, 90*time.Second)
	if p.AckFloor != uint64(len(ms)) {
		t.Errorf("ack floor %d after catching up, want %d", p.AckFloor, len(ms))
	}
	d.waitWindowCounts(e2ePublishedCounts(ms), 30*time.Second)
	took, code := d.stop(10 * time.Second)
	t.Logf("clean stop in %v, exit status %d", took.Round(time.Millisecond), code)
	if code != 0 {
		t.Errorf("exit status %d after SIGTERM, want 0", code)
	}
	if took > 5*time.Second {
		t.Errorf("stop took %v after SIGTERM, the daemon promises 5 s", took)
	}

	sent := make(map[string]string, len(ms))
	for _, m := range ms {
		sent[m.ID] = m.Text
	}
	c := e2eReadStore(t, storePath, crashConsumer, sent)
	if c.Cursor != uint64(len(ms)) {
		t.Errorf("stored cursor %d, want %d", c.Cursor, len(ms))
	}
	for _, ch := range e2ePlant() {
		if _, ok := c.Refs[ch.Name]; !ok {
			t.Fatalf("characteristic %s not in the store", ch.Name)
		}
	}
	want := e2eExpectedSums(t, ms, c.Refs, crashBucket)
	maxMean, maxM2 := e2eCompareSums(t, c.Sums, want)
	t.Logf("means within %.3g SD and M2 within %.3g relative of the uninterrupted computation", maxMean, maxM2)
	e2eCompareRaw(t, c, ms)
}

// TestCrashKill kills the daemon with SIGKILL five times while it consumes
// 200 000 measurements, restarting it each time: once during start-up, and
// four times at seeded points of the stream (when the ack floor passes a
// random fraction of what is left, plus a random few milliseconds).
func TestCrashKill(t *testing.T) {
	if testing.Short() {
		t.Skip("crash test: 200 000 messages through a daemon subprocess killed and restarted")
	}
	t0 := time.Now()
	const seed = 20261202
	rng := rand.New(rand.NewPCG(seed, 1))

	ns := startE2ENATS(t, "")
	nc := ns.connect(t)
	e2eCreateStream(t, nc, crashStream, "meas.>")
	ms := crashPlant(seed, crashMessages)
	e2ePublish(t, nc, "meas", ms, 4096)
	t.Logf("published %d measurements in %v", len(ms), time.Since(t0).Round(time.Millisecond))

	storePath := filepath.Join(t.TempDir(), "lockstep.db")
	d := newDaemonProc(t, "daemon", crashDaemonArgs(ns.url(), storePath))

	// A kill during start-up: store open, windows restored or not yet,
	// consumer created or not yet.
	d.start()
	time.Sleep(time.Duration(rng.IntN(300)) * time.Millisecond)
	d.requireRunning()
	d.kill()
	p, _ := e2eProgressOf(nc, crashStream, crashConsumer)
	t.Logf("kill 1 during start-up: ack floor %d", p.AckFloor)

	n := uint64(len(ms))
	for i := 2; i <= 5; i++ {
		d.start()
		p, err := e2eProgressOf(nc, crashStream, crashConsumer)
		if err != nil {
			t.Fatalf("consumer info: %v", err)
		}
		target := p.AckFloor + uint64(float64(n-p.AckFloor)*(0.1+0.25*rng.Float64()))
		e2eWaitAckFloor(t, nc, d, target, 60*time.Second)
		time.Sleep(time.Duration(rng.IntN(10_000)) * time.Microsecond)
		d.kill()
		p, _ = e2eProgressOf(nc, crashStream, crashConsumer)
		t.Logf("kill %d at ack floor target %d: ack floor %d, %d delivered and not acked", i, target, p.AckFloor, p.NumAckPending)
		if p.AckFloor >= n {
			t.Logf("kill %d came after the daemon had caught up", i)
		}
	}

	d.start()
	e2eCheckFinal(t, nc, d, storePath, ms)
	t.Logf("TestCrashKill took %v", time.Since(t0).Round(time.Millisecond))
}

// TestCrashBrokerRestart stops and restarts the NATS server (same port, same
// JetStream store directory) twice while the daemon consumes, and kills the
// daemon once in between. 60 % of the measurements are in the stream when the
// daemon starts; the rest are published after the first broker restart,
// while it catches up.
func TestCrashBrokerRestart(t *testing.T) {
	if testing.Short() {
		t.Skip("crash test: 200 000 messages through a daemon subprocess while the NATS server restarts")
	}
	t0 := time.Now()
	const seed = 20261203
	rng := rand.New(rand.NewPCG(seed, 2))

	ns := startE2ENATS(t, "")
	nc := ns.connect(t)
	e2eCreateStream(t, nc, crashStream, "meas.>")
	ms := crashPlant(seed, crashMessages)
	first := len(ms) * 6 / 10
	e2ePublish(t, nc, "meas", ms[:first], 4096)

	storePath := filepath.Join(t.TempDir(), "lockstep.db")
	d := newDaemonProc(t, "daemon", crashDaemonArgs(ns.url(), storePath))
	d.start()

	restart := func(k int, down time.Duration) {
		t.Helper()
		p, _ := e2eProgressOf(nc, crashStream, crashConsumer)
		ns.stop()
		time.Sleep(down)
		d.requireRunning()
		ns.start()
		if !nc.IsConnected() {
			deadline := time.Now().Add(10 * time.Second)
			for !nc.IsConnected() && time.Now().Before(deadline) {
				time.Sleep(10 * time.Millisecond)
			}
		}
		t.Logf("broker restart %d at ack floor %d, down %v", k, p.AckFloor, down.Round(time.Millisecond))
	}

	target := uint64(float64(first) * (0.2 + 0.2*rng.Float64()))
	e2eWaitAckFloor(t, nc, d, target, 60*time.Second)
	restart(1, 500*time.Millisecond+time.Duration(rng.IntN(1000))*time.Millisecond)

	e2ePublish(t, nc, "meas", ms[first:], 4096)
	p, _ := e2eProgressOf(nc, crashStream, crashConsumer)
	t.Logf("published the remaining %d measurements; ack floor %d", len(ms)-first, p.AckFloor)

	n := uint64(len(ms))
	target = p.AckFloor + uint64(float64(n-p.AckFloor)*(0.1+0.2*rng.Float64()))
	e2eWaitAckFloor(t, nc, d, target, 60*time.Second)
	d.kill()
	p, _ = e2eProgressOf(nc, crashStream, crashConsumer)
	t.Logf("kill at ack floor %d", p.AckFloor)
	d.start()

	p, _ = e2eProgressOf(nc, crashStream, crashConsumer)
	target = p.AckFloor + uint64(float64(n-p.AckFloor)*(0.2+0.3*rng.Float64()))
	e2eWaitAckFloor(t, nc, d, target, 60*time.Second)
	restart(2, 500*time.Millisecond+time.Duration(rng.IntN(1000))*time.Millisecond)

	e2eCheckFinal(t, nc, d, storePath, ms)
	t.Logf("TestCrashBrokerRestart took %v", time.Since(t0).Round(time.Millisecond))
}
