package store

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"
)

func TestOpenInitialisesNewFile(t *testing.T) {
	s, path := openTest(t)
	err := s.db.View(func(tx *bolt.Tx) error {
		meta := tx.Bucket([]byte(bucketMeta))
		if v := meta.Get([]byte(keySchema)); binary.BigEndian.Uint32(v) != SchemaVersion {
			t.Errorf("schema %x, want %d", v, SchemaVersion)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	data, err := os.ReadFile(pidPath(path))
	if err != nil {
		t.Fatalf("sidecar: %v", err)
	}
	if want := strconv.Itoa(os.Getpid()) + "\n"; !strings.HasPrefix(string(data), want) {
		t.Errorf("sidecar %q, want it to start with %q", data, want)
	}
}

// TestOpenAdoptsEmptyBboltFile: a bbolt file without buckets (as a crash
// before the first commit leaves it) is initialised.
func TestOpenAdoptsEmptyBboltFile(t *testing.T) {
	path := filepath.Join(t.TempDir(), "lockstep.db")
	db, err := bolt.Open(path, 0o600, nil)
	if err != nil {
		t.Fatal(err)
	}
	if err := db.Close(); err != nil {
		t.Fatal(err)
	}
	s, err := Open(path, Options{NoSync: true})
	if err != nil {
		t.Fatal(err)
	}
	closeAndVerify(t, s, path)
}

// refused opens path with Open and OpenReadOnly, wants ErrSchema with the
// message, and checks that the file is unchanged byte for byte and that no
// sidecar was left.
func refused(t *testing.T, path, want string) {
	t.Helper()
	before, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	for name, open := range map[string]func(string, Options) (*Store, error){"Open": Open, "OpenReadOnly": OpenReadOnly} {
		s, err := open(path, Options{})
		if err == nil {
			s.Close()
			t.Fatalf("%s: no error", name)
		}
		if !errors.Is(err, ErrSchema) || !strings.HasPrefix(err.Error(), want) {
			t.Errorf("%s: %v\nwant ErrSchema starting %q", name, err, want)
		}
	}
	after, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(before, after) {
		t.Errorf("file changed: %d bytes before, %d after", len(before), len(after))
	}
	if _, err := os.Stat(pidPath(path)); !errors.Is(err, fs.ErrNotExist) {
		t.Errorf("sidecar: %v", err)
	}
}

func TestOpenRefusesNewerSchema(t *testing.T) {
	s, path := openTest(t)
	commit(t, s, &Batch{Characteristics: []Characteristic{fillWeight(t)}, Consumer: "lockstep-fill", Cursor: 10})
	err := s.db.Update(func(tx *bolt.Tx) error {
		return tx.Bucket([]byte(bucketMeta)).Put([]byte(keySchema), binary.BigEndian.AppendUint32(nil, SchemaVersion+2))
	})
	if err != nil {
		t.Fatal(err)
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	refused(t, path, fmt.Sprintf("store %s: schema version %d is newer than this lockstep (%d): upgrade lockstep",
		path, SchemaVersion+2, SchemaVersion))

	// Put the version back for the cleanup's Verify.
	db, err := bolt.Open(path, 0o600, nil)
	if err != nil {
		t.Fatal(err)
	}
	err = db.Update(func(tx *bolt.Tx) error {
		return tx.Bucket([]byte(bucketMeta)).Put([]byte(keySchema), binary.BigEndian.AppendUint32(nil, SchemaVersion))
	})
	if err := errors.Join(err, db.Close()); err != nil {
		t.Fatal(err)
	}
}

func TestOpenRefusesForeignBboltFile(t *testing.T) {
	dir := t.TempDir()
	for name, fill := range map[string]func(*bolt.Tx) error{
		"other buckets": func(tx *bolt.Tx) error {
			b, err := tx.CreateBucket([]byte("widgets"))
			if err == nil {
				err = b.Put([]byte("w-1"), []byte("blue"))
			}
			return err
		},
		"a meta bucket of its own": func(tx *bolt.Tx) error {
			b, err := tx.CreateBucket([]byte("meta"))
			if err == nil {
				err = b.Put([]byte("schema"), []byte{0, 0, 0, 1})
			}
			return err
		},
	} {
		t.Run(name, func(t *testing.T) {
			path := filepath.Join(dir, strings.ReplaceAll(name, " ", "-")+".db")
			db, err := bolt.Open(path, 0o600, nil)
			if err != nil {
				t.Fatal(err)
			}
			if err := errors.Join(db.Update(fill), db.Close()); err != nil {
				t.Fatal(err)
			}
			refused(t, path, "store "+path+": not a lockstep store")
		})
	}
}

func TestOpenRefusesNonBboltFile(t *testing.T) {
	dir := t.TempDir()
	csv := "time,line,weight_g\n2026-03-16T06:00:00Z,line-1,500.12\n"
	for name, data := range map[string][]byte{
		"csv":       []byte(csv),
		"one page":  bytes.Repeat([]byte(csv), 4096/len(csv)+1),
		"ten pages": bytes.Repeat([]byte{0xA5}, 40960),
	} {
		t.Run(name, func(t *testing.T) {
			path := filepath.Join(dir, strings.ReplaceAll(name, " ", "-"))
			if err := os.WriteFile(path, data, 0o600); err != nil {
				t.Fatal(err)
			}
			refused(t, path, "store "+path+": not a lockstep store")
		})
	}
}

func TestOpenOptions(t *testing.T) {
	path := filepath.Join(t.TempDir(), "lockstep.db")
	if _, err := Open(path, Options{Timeout: -time.Second}); err == nil {
		t.Error("negative timeout accepted")
	}
	if _, err := OpenReadOnly(path, Options{}); !errors.Is(err, fs.ErrNotExist) {
		t.Errorf("read-only open of a missing file: %v", err)
	}
	if _, err := os.Stat(path); !errors.Is(err, fs.ErrNotExist) {
		t.Errorf("file created: %v", err)
	}
}

func TestOpenInUseInThisProcess(t *testing.T) {
	_, path := openTest(t)
	s, err := Open(path, Options{Timeout: 100 * time.Millisecond})
	if err == nil {
		s.Close()
		t.Fatal("second Open succeeded")
	}
	if !errors.Is(err, ErrInUse) || !strings.Contains(err.Error(), "in use by PID "+strconv.Itoa(os.Getpid())) {
		t.Errorf("got %v", err)
	}
}

// TestOpenInUseByAnotherProcess runs the test binary as a helper that holds
// the store, and opens it here.
func TestOpenInUseByAnotherProcess(t *testing.T) {
	path := filepath.Join(t.TempDir(), "lockstep.db")
	cmd := exec.Command(os.Args[0], "-test.run=^$", "line-3-holder")
	cmd.Env = append(os.Environ(), holdEnv+"="+path)
	stdin, err := cmd.StdinPipe()
	if err != nil {
		t.Fatal(err)
	}
	stdout, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	done := false
	t.Cleanup(func() {
		if !done {
			_ = cmd.Process.Kill()
			_ = cmd.Wait()
		}
	})
	line, err := bufio.NewReader(stdout).ReadString('\n')
	if line != "ready\n" {
		t.Fatalf("helper said %q, %v; stderr: %s", line, err, stderr.String())
	}

	const timeout = 300 * time.Millisecond
	for name, open := range map[string]func(string, Options) (*Store, error){"Open": Open, "OpenReadOnly": OpenReadOnly} {
		start := time.Now()
		s, err := open(path, Options{Timeout: timeout})
		elapsed := time.Since(start)
		if err == nil {
			s.Close()
			t.Fatalf("%s succeeded while the helper holds the store", name)
		}
		want := fmt.Sprintf("store %s is in use by PID %d (", path, cmd.Process.Pid)
		if !errors.Is(err, ErrInUse) || !strings.HasPrefix(err.Error(), want) ||
			!strings.Contains(err.Error(), "line-3-holder): stop it, or read through its HTTP API") {
			t.Errorf("%s: %v\nwant ErrInUse starting %q and naming the helper's command", name, err, want)
		}
		if elapsed < timeout-100*time.Millisecond || elapsed > timeout+time.Second {
			t.Errorf("%s gave up after %v, want about %v", name, elapsed, timeout)
		}
	}

	// The helper closes the store and exits; then the store is free.
	if err := stdin.Close(); err != nil {
		t.Fatal(err)
	}
	if err := cmd.Wait(); err != nil {
		t.Fatalf("helper: %v; stderr: %s", err, stderr.String())
	}
	done = true
	if _, err := os.Stat(pidPath(path)); !errors.Is(err, fs.ErrNotExist) {
		t.Errorf("helper's sidecar after its Close: %v", err)
	}
	s, err := Open(path, Options{NoSync: true})
	if err != nil {
		t.Fatalf("open after the helper closed: %v", err)
	}
	closeAndVerify(t, s, path)
}

func TestCommandLine(t *testing.T) {
	cases := []struct {
		args []string
		want string
	}{
		{[]string{"/usr/bin/lockstep", "run", "--config", "/etc/lockstep/lockstep.conf"}, "lockstep run --config /etc/lockstep/lockstep.conf"},
		{[]string{"lockstep", "run\n--evil"}, "lockstep run?--evil"},
		{[]string{"/opt/x/" + strings.Repeat("y", 100)}, strings.Repeat("y", 80) + "…"},
		{nil, ""},
	}
	for _, tc := range cases {
		if got := commandLine(tc.args); got != tc.want {
			t.Errorf("commandLine(%q) = %q, want %q", tc.args, got, tc.want)
		}
	}
}
