package store

import (
	"encoding/binary"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"runtime"
	"strconv"
	"sync"
	"time"

	bolt "go.etcd.io/bbolt"
	bolterrors "go.etcd.io/bbolt/errors"
)

// Options configure Open and OpenReadOnly. The zero value is the default.
type Options struct {
	// Timeout is how long Open and OpenReadOnly wait for the file lock
	// before they give up with ErrInUse. Zero means the default, 1 s; a negative value is
	// refused. There is no waiting forever: a daemon that hangs at start-up
	// on a file another process holds helps no one.
	Timeout time.Duration

	// NoSync skips the fsync at the end of every commit. Commits are then
	// much faster, and a crash of the machine (not only of the process) can
	// lose the last commits, or leave a file that needs restoring from a
	// backup. For tests and benchmarks only: the daemon acks JetStream
	// messages after Commit returns, so with NoSync an acked message can be
	// lost. Default false.
	NoSync bool
}

// defaultTimeout is the lock wait when Options.Timeout is zero.
const defaultTimeout = time.Second

// initialMmap is the address space mapped for a read-write store up front,
// so that a long read transaction (a replay, a backup) does not block
// commits while the file grows: bbolt can only remap when no read
// transaction is open. It reserves address space, not memory or disk, except
// on Windows, where bbolt grows the file to the mapped size; it is not used
// there.
const initialMmap = 1 << 30

func (o Options) timeout() (time.Duration, error) {
	switch {
	case o.Timeout < 0:
		return 0, fmt.Errorf("store options: timeout %v is negative", o.Timeout)
	case o.Timeout == 0:
		return defaultTimeout, nil
	}
	return o.Timeout, nil
}

// Store is an open lockstep store. Its methods may be called from several
// goroutines at once; commits are serialised, reads run beside them on a
// consistent snapshot.
type Store struct {
	db       *bolt.DB
	path     string
	readOnly bool

	closeOnce sync.Once
	closeErr  error
}

// Open opens the store at path for reading and writing, creating and
// initialising it when the file does not exist or is empty. It takes the
// file's lock, waiting up to opt.Timeout, and writes the sidecar FILE.pid
// with this process's id and command line, which Close removes.
//
// An existing file is first opened read-only and its schema checked, so a
// file that is refused (ErrSchema: not a lockstep store, or a newer schema)
// is never written. When another process holds the file, the error wraps
// ErrInUse and names that process as its sidecar tells it.
func Open(path string, opt Options) (*Store, error) {
	timeout, err := opt.timeout()
	if err != nil {
		return nil, err
	}
	info, err := os.Stat(path)
	fresh := errors.Is(err, fs.ErrNotExist) || (err == nil && info.Size() == 0)
	if err != nil && !fresh {
		return nil, fmt.Errorf("open store %s: %w", path, err)
	}
	if !fresh {
		if err := look(path, timeout); err != nil {
			return nil, err
		}
	}
	db, err := openBolt(path, timeout, false, opt.NoSync)
	if err != nil {
		return nil, err
	}
	var empty bool
	err = db.View(func(tx *bolt.Tx) error {
		empty, err = checkSchema(tx, path)
		return err
	})
	if err == nil && empty {
		err = db.Update(initSchema)
		if err != nil {
			err = fmt.Errorf("initialise store %s: %w", path, err)
		}
	}
	if err == nil {
		err = writePID(path)
	}
	if err != nil {
		return nil, errors.Join(err, db.Close())
	}
	return &Store{db: db, path: path}, nil
}

// look opens an existing file read-only and checks its schema.
func look(path string, timeout time.Duration) error {
	db, err := openBolt(path, timeout, true, false)
	if err != nil {
		return err
	}
	err = db.View(func(tx *bolt.Tx) error {
		_, err := checkSchema(tx, path)
		return err
	})
	return errors.Join(err, db.Close())
}

// OpenReadOnly opens an existing store for reading only: a stopped daemon's
// file or a backup, for replay, export and Verify. It never writes to the
// file, nor creates the sidecar. It shares the lock with other readers, so it
// fails with ErrInUse while a process has the file open with Open.
func OpenReadOnly(path string, opt Options) (*Store, error) {
	timeout, err := opt.timeout()
	if err != nil {
		return nil, err
	}
	info, err := os.Stat(path)
	if err != nil {
		return nil, fmt.Errorf("open store %s: %w", path, err)
	}
	if info.Size() == 0 {
		return nil, notAStore(path, "the file is empty")
	}
	db, err := openBolt(path, timeout, true, false)
	if err != nil {
		return nil, err
	}
	err = db.View(func(tx *bolt.Tx) error {
		empty, err := checkSchema(tx, path)
		if err == nil && empty {
			err = notAStore(path, "an empty bbolt file")
		}
		return err
	})
	if err != nil {
		return nil, errors.Join(err, db.Close())
	}
	return &Store{db: db, path: path, readOnly: true}, nil
}

// openBolt opens the bbolt file and turns its errors into the package's.
func openBolt(path string, timeout time.Duration, readOnly, noSync bool) (*bolt.DB, error) {
	bo := &bolt.Options{Timeout: timeout, ReadOnly: readOnly, NoSync: noSync}
	if !readOnly && runtime.GOOS != "windows" && strconv.IntSize == 64 {
		bo.InitialMmapSize = initialMmap
	}
	db, err := bolt.Open(path, 0o640, bo)
	switch {
	case err == nil:
		return db, nil
	case errors.Is(err, bolterrors.ErrTimeout):
		return nil, inUseError(path)
	case !errors.As(err, new(*fs.PathError)) && !hasBboltMagic(path):
		return nil, &storeError{path: path, sentinel: ErrSchema, cause: err,
			msg: "not a lockstep store: not a bbolt file"}
	}
	return nil, fmt.Errorf("open store %s: %w", path, err)
}

// hasBboltMagic reports whether the file at path starts with a bbolt meta
// page: its magic number (0xED0CDAED, in the byte order of the machine that
// wrote it) after the 16-byte page header. bbolt's own errors for a file
// that is not one of its own vary with the file's size ("invalid database",
// "file size too small"); this tells a foreign file from a damaged bbolt file.
func hasBboltMagic(path string) bool {
	f, err := os.Open(path)
	if err != nil {
		return false
	}
	defer f.Close()
	var b [4]byte
	if _, err := f.ReadAt(b[:], 16); err != nil {
		return false
	}
	const magic = 0xED0CDAED
	return binary.LittleEndian.Uint32(b[:]) == magic || binary.BigEndian.Uint32(b[:]) == magic
}

// Path returns the file name the store was opened with.
func (s *Store) Path() string { return s.path }

// Close removes the sidecar FILE.pid and closes the file, waiting for open
// read transactions (a Raw or Buckets call in another goroutine, a Backup)
// to end. Calls after the first return the first call's result.
func (s *Store) Close() error {
	s.closeOnce.Do(func() {
		var errPID error
		if !s.readOnly {
			errPID = removePID(s.path)
		}
		s.closeErr = errors.Join(errPID, s.db.Close())
	})
	return s.closeErr
}

// update runs fn in a read-write transaction, refusing on a read-only store.
func (s *Store) update(op string, fn func(*bolt.Tx) error) error {
	if s.readOnly {
		return &storeError{path: s.path, sentinel: ErrReadOnly, msg: op + ": opened read-only"}
	}
	return s.db.Update(fn)
}
