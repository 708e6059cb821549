package ingest

import (
	"errors"
	"net"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/rs/zerolog"
)

func TestStartEmbedded(t *testing.T) {
	store := filepath.Join(t.TempDir(), "nats")
	var logs logBuffer
	s, err := StartEmbedded(EmbeddedOptions{Port: -1, StoreDir: store, Logger: logs.logger()})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { s.Shutdown(); s.WaitForShutdown() })
	if !s.JetStreamEnabled() {
		t.Fatal("JetStream is off")
	}
	if !strings.HasPrefix(s.ClientURL(), "nats://127.0.0.1:") {
		t.Errorf("client URL %s; want loopback", s.ClientURL())
	}
	nc, err := Connect(ConnOptions{URLs: []string{s.ClientURL()}})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(nc.Close)
	src, err := NewJetStreamSource(testCtx(t, 10*time.Second), nc, JetStreamOptions{
		Stream: "MEASUREMENTS", Durable: "lockstep", FilterSubjects: []string{"m.>"}, CreateStream: true,
	})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = src.Close() })
	if logs.count(`"component":"nats-server"`) == 0 {
		t.Errorf("the server log did not reach the logger")
	}
}

func TestStartEmbeddedPortTaken(t *testing.T) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer ln.Close()
	port := ln.Addr().(*net.TCPAddr).Port
	_, err = StartEmbedded(EmbeddedOptions{Port: port, StoreDir: t.TempDir(), Logger: zerolog.Nop()})
	if !errors.Is(err, ErrAddrInUse) {
		t.Fatalf("StartEmbedded on a taken port = %v; want ErrAddrInUse", err)
	}
	if hp := "127.0.0.1:" + strconv.Itoa(port); !strings.Contains(err.Error(), hp) {
		t.Errorf("error %q does not name %s", err, hp)
	}
}

func TestStartEmbeddedOptions(t *testing.T) {
	for _, opt := range []EmbeddedOptions{
		{Port: -1},
		{Port: 70000, StoreDir: t.TempDir()},
		{Port: -1, StoreDir: t.TempDir(), ReadyTimeout: -time.Second},
	} {
		if _, err := StartEmbedded(opt); !errors.Is(err, ErrSourceOption) {
			t.Errorf("StartEmbedded(%+v) = %v; want ErrSourceOption", opt, err)
		}
	}
}
