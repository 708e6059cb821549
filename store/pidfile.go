package store

import (
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"unicode"
	"unicode/utf8"
)

// The sidecar FILE.pid beside a store that is open for writing holds two
// lines: the process id and the command line of the process that opened it.
// It is advisory: the bbolt file lock decides who has the store, the sidecar
// only lets the error for the loser name the winner. A process that crashed
// leaves its sidecar behind; the next Open replaces it.

func pidPath(path string) string { return path + ".pid" }

// maxCommand is the longest command line kept in the sidecar and shown in
// messages, in runes.
const maxCommand = 80

func writePID(path string) error {
	data := fmt.Sprintf("%d\n%s\n", os.Getpid(), commandLine(os.Args))
	if err := os.WriteFile(pidPath(path), []byte(data), 0o644); err != nil {
		return fmt.Errorf("write store sidecar: %w", err)
	}
	return nil
}

func removePID(path string) error {
	err := os.Remove(pidPath(path))
	if err != nil && !errors.Is(err, fs.ErrNotExist) {
		return fmt.Errorf("remove store sidecar: %w", err)
	}
	return nil
}

// commandLine is the program's base name and its arguments, with control
// characters replaced and cut to maxCommand runes.
func commandLine(args []string) string {
	if len(args) == 0 {
		return ""
	}
	s := strings.Join(append([]string{filepath.Base(args[0])}, args[1:]...), " ")
	return clean(s)
}

// clean replaces control characters and invalid UTF-8 by '?', and cuts s to
// maxCommand runes, marking a cut with "…".
func clean(s string) string {
	var b strings.Builder
	n := 0
	for _, r := range s {
		if n == maxCommand {
			b.WriteString("…")
			break
		}
		if r == utf8.RuneError || unicode.IsControl(r) {
			r = '?'
		}
		b.WriteRune(r)
		n++
	}
	return b.String()
}

// readPID reads the sidecar of the store at path.
func readPID(path string) (pid int, command string, ok bool) {
	data, err := os.ReadFile(pidPath(path))
	if err != nil || len(data) > 4096 {
		return 0, "", false
	}
	sc := bufio.NewScanner(bytes.NewReader(data))
	if !sc.Scan() {
		return 0, "", false
	}
	pid, err = strconv.Atoi(strings.TrimSpace(sc.Text()))
	if err != nil || pid <= 0 {
		return 0, "", false
	}
	if sc.Scan() {
		command = clean(sc.Text())
	}
	return pid, command, true
}

// inUseError is the ErrInUse error for the store at path, naming the
// process its sidecar names.
func inUseError(path string) error {
	holder := "another process"
	if pid, cmd, ok := readPID(path); ok {
		holder = "PID " + strconv.Itoa(pid)
		if cmd != "" {
			holder += " (" + cmd + ")"
		}
	}
	return &storeError{path: path, sentinel: ErrInUse, whole: true,
		msg: "store " + path + " is in use by " + holder + ": stop it, or read through its HTTP API"}
}
