package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"net/http"
	"os"
	"path/filepath"
	"strings"
	"time"

	"github.com/lockstep-project/lockstep/store"
)

// BackupCommand copies a store: the live one through the daemon's HTTP API,
// or a stopped daemon's file directly.
type BackupCommand struct {
	Stdout, Stderr io.Writer
	// Client fetches the backup (nil: a client without a timeout, since a
	// large store takes a while).
	Client *http.Client
	// Getenv reads the environment (nil: os.Getenv), for
	// LOCKSTEP_HTTP_TOKEN.
	Getenv func(string) string
}

// Usage returns the help text of lockstep backup.
func (c *BackupCommand) Usage() string {
	return `Usage: lockstep backup [--http ADDRESS | --config FILE] OUT
       lockstep backup --store FILE OUT

Writes a consistent copy of a lockstep store to OUT, which must not exist.

The first form asks the running daemon for it (GET /api/v1/backup on its
HTTP API): bbolt's online copy, taken in one read transaction while the
daemon goes on committing; when the daemon has a token ([http] token), the
request carries it (from --config or LOCKSTEP_HTTP_TOKEN). The second copies the file of a stopped daemon
(or another copy), opened read-only. Either way the copy is written to a
temporary file beside OUT, checked as "lockstep verify" does, and only then
renamed to OUT. The copy can be replayed, exported, plotted and verified,
or used as the daemon's store.

Options:
  --http ADDRESS   the daemon's HTTP API, HOST:PORT (default: [http] listen of
                   --config, else 127.0.0.1:8420)
  --config FILE    the daemon's configuration, for its HTTP address and token
  --store FILE     copy this store file instead of asking the daemon

Exit status: 0 when the copy is written and sound, 1 on a problem, 2 on a
usage mistake.
`
}

// Run parses the options and copies.
func (c *BackupCommand) Run(ctx context.Context, args []string) error {
	fs := newFlagSet("backup")
	addr := fs.String("http", "", "")
	configPath := fs.String("config", "", "")
	storePath := fs.String("store", "", "")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) != 1 {
		return fmt.Errorf("%w: give exactly one OUT file, have %d", errUsage, len(pos))
	}
	out := pos[0]
	if *storePath != "" && (*addr != "" || *configPath != "") {
		return fmt.Errorf("%w: --store copies a file directly; --http and --config are for the daemon", errUsage)
	}
	if _, err := os.Lstat(out); err == nil {
		return fmt.Errorf("back up store: %s exists: give a new file name (a backup never overwrites)", out)
	}
	var n int64
	if *storePath != "" {
		if same(*storePath, out) {
			return fmt.Errorf("%w: OUT is the store itself", errUsage)
		}
		n, err = writeBackup(out, func(w io.Writer) (int64, error) { return backupFile(*storePath, w) })
	} else {
		cfg, err := loadSettings(*configPath)
		if err != nil {
			return err
		}
		getenv := c.Getenv
		if getenv == nil {
			getenv = os.Getenv
		}
		applyEnv(cfg, getenv)
		if *addr == "" {
			*addr = cfg.HTTP.Listen
		}
		n, err = writeBackup(out, func(w io.Writer) (int64, error) { return c.fetch(ctx, *addr, cfg.HTTP.Token, w) })
		if err != nil {
			return err
		}
	}
	if err != nil {
		return err
	}
	fmt.Fprintf(c.Stdout, "wrote %s (%s); verified\n", out, byteSize(n))
	return nil
}

func same(a, b string) bool {
	fa, errA := os.Stat(a)
	fb, errB := os.Stat(b)
	return errA == nil && errB == nil && os.SameFile(fa, fb)
}

// backupFile copies a stopped daemon's store, opened read-only.
func backupFile(path string, w io.Writer) (int64, error) {
	st, err := store.OpenReadOnly(path, store.Options{})
	if errors.Is(err, store.ErrInUse) {
		return 0, fmt.Errorf("%w\nThe daemon holds the file: back it up through the daemon instead: lockstep backup --http ADDRESS OUT", err)
	}
	if err != nil {
		return 0, err
	}
	defer st.Close()
	return st.Backup(w)
}

// fetch streams the daemon's backup to w.
func (c *BackupCommand) fetch(ctx context.Context, addr, token string, w io.Writer) (int64, error) {
	if _, _, err := splitHostPort(addr); err != nil {
		return 0, fmt.Errorf("%w: --http %q: %v", errUsage, addr, err)
	}
	url := "http://" + addr + "/api/v1/backup"
	req, err := http.NewRequestWithContext(ctx, http.MethodGet, url, nil)
	if err != nil {
		return 0, fmt.Errorf("back up store: %w", err)
	}
	if token != "" {
		req.Header.Set("Authorization", "Bearer "+token)
	}
	client := c.Client
	if client == nil {
		client = &http.Client{}
	}
	resp, err := client.Do(req)
	if err != nil {
		return 0, fmt.Errorf("back up store through the daemon at %s: %w; is lockstep run serving there? (give its [http] listen with --http, or copy a stopped daemon's file with --store)", addr, err)
	}
	defer resp.Body.Close()
	if resp.StatusCode != http.StatusOK {
		msg, _ := io.ReadAll(io.LimitReader(resp.Body, 4096))
		return 0, fmt.Errorf("back up store through the daemon at %s: %s: %s", addr, resp.Status, strings.TrimSpace(string(msg)))
	}
	n, err := io.Copy(w, resp.Body)
	if err != nil {
		return n, fmt.Errorf("back up store through the daemon at %s: the copy broke off after %d bytes: %w", addr, n, err)
	}
	return n, nil
}

// writeBackup writes a copy through copyTo into a temporary file beside
// out, syncs it, verifies it and renames it to out.
func writeBackup(out string, copyTo func(io.Writer) (int64, error)) (int64, error) {
	tmp, err := os.CreateTemp(filepath.Dir(out), "."+filepath.Base(out)+".partial-*")
	if err != nil {
		return 0, fmt.Errorf("back up store: %w", err)
	}
	name := tmp.Name()
	defer os.Remove(name)
	n, err := copyTo(tmp)
	if err == nil {
		err = tmp.Sync()
	}
	if cerr := tmp.Close(); err == nil && cerr != nil {
		err = fmt.Errorf("back up store: %w", cerr)
	}
	if err != nil {
		return n, err
	}
	st, err := store.OpenReadOnly(name, store.Options{})
	if err == nil {
		err = errors.Join(st.Verify(), st.Close())
	}
	if err != nil {
		return n, fmt.Errorf("back up store: the copy does not verify, so it was not kept: %w", err)
	}
	// A hard link does not replace an OUT that appeared meanwhile; where
	// the file system has none, rename.
	if err := os.Link(name, out); err != nil {
		if errors.Is(err, os.ErrExist) {
			return n, fmt.Errorf("back up store: %s appeared meanwhile: %w", out, err)
		}
		if err := os.Rename(name, out); err != nil {
			return n, fmt.Errorf("back up store: %w", err)
		}
	}
	return n, nil
}

// backup serves GET /api/v1/backup: a consistent copy of the live store,
// streamed as it is read (bbolt's Tx.WriteTo in one read transaction,
// through store.Backup), while commits go on.
//
// The copy holds every value and alert: when a token is configured, it
// needs the token on any listener, loopback too (alertapi.go's authorized).
func (s apiState) backup(w http.ResponseWriter, r *http.Request) {
	if !s.authorized(w, r) {
		return
	}
	if s.store == nil {
		writeError(w, http.StatusServiceUnavailable, "no store to back up")
		return
	}
	// A large store takes longer than the server's write timeout.
	_ = http.NewResponseController(w).SetWriteDeadline(time.Time{})
	w.Header().Set("Content-Type", "application/octet-stream")
	w.Header().Set("Content-Disposition", `attachment; filename="lockstep-backup.db"`)
	w.Header().Set("Cache-Control", "no-store")
	n, err := s.store.Backup(w)
	if err != nil {
		// The status is sent; the client's check of the copy finds it short.
		s.log.Error().Err(err).Int64("bytes", n).Str("remote", r.RemoteAddr).Msg("backup broke off")
		return
	}
	s.log.Info().Int64("bytes", n).Str("remote", r.RemoteAddr).Msg("backup sent")
}

// backupSource is what the backup route needs of the store.
type backupSource interface {
	Backup(w io.Writer) (int64, error)
}
