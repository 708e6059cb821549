package main

import (
	"context"
	"fmt"
	"hash/fnv"
	"net/http"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/nats-io/nats.go/jetstream"
)

// The partition set-up of the README, "Scale past one machine": the NATS
// server maps every measurement subject meas.<characteristic>.<group> to
// meas.<partition>.<characteristic>.<group>, where the partition is a hash of
// the characteristic token; one stream holds them all, and each lockstep
// instance reads its own partition through its own durable consumer into its
// own store.

// partitionMapping is the server configuration: partition(2,1) hashes the
// first wildcard token (the characteristic) into partition 0 or 1, so that
// every value of a characteristic goes to the same partition.
const partitionMapping = `mappings {
  "meas.*.*": "meas.{{partition(2,1)}}.{{wildcard(1)}}.{{wildcard(2)}}"
}
`

// partitionConfig is the lockstep configuration of the instance reading
// partition p.
func partitionConfig(p int) string {
	return fmt.Sprintf(`[nats]
stream = "MEAS"
consumer = "lockstep-%d"
subjects = "meas.%d.>"

[ingest]
template = "meas.<partition>.<characteristic>.<group>"
`, p, p)
}

// partitionOf is the server's partition(n, …) function: FNV-1a (32 bit) of
// the token, modulo n (nats-server, server/subject_transform.go,
// getHashPartition).
func partitionOf(token string, n int) int {
	h := fnv.New32a()
	h.Write([]byte(token))
	return int(h.Sum32() % uint32(n))
}

// TestPartitionTwoDaemons runs two daemons on one stream split by the
// server's partition mapping, publishes 40 000 measurements of four
// characteristics through the mapping while both run, and checks that each
// characteristic is in exactly one daemon's store and API, with every one of
// its measurements counted once.
func TestPartitionTwoDaemons(t *testing.T) {
	if testing.Short() {
		t.Skip("end-to-end test with two daemon subprocesses")
	}
	t0 := time.Now()
	dir := t.TempDir()
	natsConf := filepath.Join(dir, "nats.conf")
	if err := os.WriteFile(natsConf, []byte(partitionMapping), 0o644); err != nil {
		t.Fatal(err)
	}
	ns := startE2ENATS(t, natsConf)
	nc := ns.connect(t)
	e2eCreateStream(t, nc, "MEAS", "meas.*.*.*")

	plant := e2ePlant()
	mine := [2]map[string]bool{{}, {}}
	for _, c := range plant {
		mine[partitionOf(c.Name, 2)][c.Name] = true
	}
	if len(mine[0]) == 0 || len(mine[1]) == 0 {
		t.Fatalf("the test plant's characteristics all hash to one partition: %v", mine)
	}

	var ds [2]*daemonProc
	var stores [2]string
	for p := range 2 {
		cfg := filepath.Join(dir, fmt.Sprintf("lockstep-%d.toml", p))
		if err := os.WriteFile(cfg, []byte(partitionConfig(p)), 0o644); err != nil {
			t.Fatal(err)
		}
		stores[p] = filepath.Join(dir, fmt.Sprintf("lockstep-%d.db", p))
		ds[p] = newDaemonProc(t, fmt.Sprintf("daemon-%d", p), []string{
			"--config", cfg,
			"--nats", ns.url(),
			"--store", stores[p],
			"--bucket", crashBucket.String(),
			"--window", "2h",
			"--evaluate-every", "200ms",
		})
		ds[p].start()
	}
	for p := range 2 {
		ds[p].waitReady(30 * time.Second)
	}

	ms := e2eGenerate(plant, 40_000, 20261204, time.Now().Add(-15*time.Minute), 12*time.Minute)
	e2ePublish(t, nc, "meas", ms, 4096)

	// The server mapped each subject as partitionOf says.
	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	st, err := js.Stream(ctx, "MEAS")
	if err != nil {
		t.Fatal(err)
	}
	info, err := st.Info(ctx, jetstream.WithSubjectFilter(">"))
	if err != nil {
		t.Fatal(err)
	}
	if info.State.Msgs != uint64(len(ms)) {
		t.Fatalf("stream holds %d messages, %d published", info.State.Msgs, len(ms))
	}
	for subj := range info.State.Subjects {
		tok := strings.Split(subj, ".")
		if len(tok) != 4 || tok[1] != strconv.Itoa(partitionOf(tok[2], 2)) {
			t.Errorf("stream subject %s: want meas.%d.%s.<group>", subj, partitionOf(tok[2], 2), tok[2])
		}
	}

	var part [2][]e2eMeasurement
	for _, m := range ms {
		p := partitionOf(m.Char, 2)
		part[p] = append(part[p], m)
	}
	for p := range 2 {
		e2eWaitDone(t, nc, "MEAS", fmt.Sprintf("lockstep-%d", p), ds[p], 60*time.Second)
		ds[p].waitWindowCounts(e2ePublishedCounts(part[p]), 30*time.Second)
		for _, c := range plant {
			if mine[p][c.Name] {
				continue
			}
			code, body, err := e2eGet(ds[p].http, "/api/v1/characteristics/"+c.Name)
			if err != nil {
				t.Fatal(err)
			}
			if code != http.StatusNotFound {
				t.Errorf("daemon %d: GET %s of the other partition: %d %s, want 404", p, c.Name, code, body)
			}
		}
	}
	for p := range 2 {
		if took, code := ds[p].stop(10 * time.Second); code != 0 {
			t.Errorf("daemon %d: exit status %d after SIGTERM (%v)", p, code, took)
		}
	}

	for p := range 2 {
		sent := make(map[string]string, len(part[p]))
		for _, m := range part[p] {
			sent[m.ID] = m.Text
		}
		c := e2eReadStore(t, stores[p], fmt.Sprintf("lockstep-%d", p), sent)
		for name := range c.Refs {
			if !mine[p][name] {
				t.Errorf("daemon %d stored %s, which belongs to partition %d", p, name, partitionOf(name, 2))
			}
		}
		for name := range mine[p] {
			if _, ok := c.Refs[name]; !ok {
				t.Errorf("daemon %d did not store %s", p, name)
			}
		}
		e2eCompareSums(t, c.Sums, e2eExpectedSums(t, part[p], c.Refs, crashBucket))
		e2eCompareRaw(t, c, part[p])
		t.Logf("daemon %d: %d measurements of %d characteristics", p, len(part[p]), len(mine[p]))
	}
	t.Logf("TestPartitionTwoDaemons took %v", time.Since(t0).Round(time.Millisecond))
}
