package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"

	"github.com/lockstep-project/lockstep/store"
)

// VerifyCommand checks a store file.
type VerifyCommand struct {
	Stdout, Stderr io.Writer
}

// Usage returns the help text of lockstep verify.
func (c *VerifyCommand) Usage() string {
	return `Usage: lockstep verify FILE

Checks a lockstep store (a backup copy, or the file of a stopped daemon):
that it is a lockstep store of a schema version this lockstep reads, bbolt's
consistency check of every page, and that every record decodes (the
characteristics, cursors, bucket states and raw values, each raw value's
text a decimal number). It reads the whole file, read-only, and changes
nothing. Prints "ok" with the schema version and the characteristics, or
every problem found.

While the daemon runs it holds the file: verify a copy taken with
"lockstep backup COPY".

Exit status: 0 when the store is sound, 1 when it is not (or cannot be
read), 2 on a usage mistake.
`
}

// Run verifies the file.
func (c *VerifyCommand) Run(_ context.Context, args []string) error {
	fs := newFlagSet("verify")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) != 1 {
		return fmt.Errorf("%w: give exactly one store FILE, have %d", errUsage, len(pos))
	}
	path := pos[0]
	info, err := os.Stat(path)
	if err != nil {
		return fmt.Errorf("verify store: %w", err)
	}
	st, err := store.OpenReadOnly(path, store.Options{})
	switch {
	case errors.Is(err, store.ErrInUse):
		return fmt.Errorf("%w\nThe daemon holds the file. Verify a copy taken through it:\n  lockstep backup --http ADDRESS copy.db && lockstep verify copy.db", err)
	case errors.Is(err, store.ErrSchema):
		fmt.Fprintf(c.Stdout, "%s: NOT USABLE\n  %v\n", path, err)
		return fmt.Errorf("verify store: %w", err)
	case err != nil:
		fmt.Fprintf(c.Stdout, "%s: NOT READABLE\n  %v\n", path, err)
		return fmt.Errorf("verify store: %w", err)
	}
	defer st.Close()
	verr := st.Verify()
	chars, cerr := st.Characteristics()
	if verr != nil || cerr != nil {
		problems := problemLines(errors.Join(verr, cerr))
		fmt.Fprintf(c.Stdout, "%s: DAMAGED (%d problems)\n", path, len(problems))
		for _, p := range problems {
			fmt.Fprintf(c.Stdout, "  %s\n", p)
		}
		fmt.Fprintln(c.Stdout, "  Restore it from a backup, or start a new store and let the daemon rebuild it from the JetStream stream.")
		return fmt.Errorf("verify store %s: %d problems found", path, len(problems))
	}
	fmt.Fprintf(c.Stdout, "%s: ok\n", path)
	fmt.Fprintf(c.Stdout, "  lockstep store, schema version %d (this lockstep reads %d)\n", store.SchemaVersion, store.SchemaVersion)
	fmt.Fprintln(c.Stdout, "  bbolt page check passed; every record decodes")
	names := make([]string, len(chars))
	for i, ch := range chars {
		names[i] = ch.Name
	}
	list := strings.Join(names, ", ")
	if len(names) > 12 {
		list = strings.Join(names[:12], ", ") + fmt.Sprintf(", … (%d more)", len(names)-12)
	}
	if list == "" {
		list = "none yet"
	}
	fmt.Fprintf(c.Stdout, "  characteristics: %d (%s)\n", len(chars), list)
	fmt.Fprintf(c.Stdout, "  size: %s\n", byteSize(info.Size()))
	return nil
}

// problemLines splits a joined error into its lines.
func problemLines(err error) []string {
	var out []string
	for _, l := range strings.Split(err.Error(), "\n") {
		if l = strings.TrimSpace(l); l != "" {
			out = append(out, l)
		}
	}
	return out
}

// byteSize prints a size in B, KiB, MiB or GiB.
func byteSize(n int64) string {
	switch {
	case n < 1<<10:
		return fmt.Sprintf("%d B", n)
	case n < 1<<20:
		return fmt.Sprintf("%.1f KiB", float64(n)/(1<<10))
	case n < 1<<30:
		return fmt.Sprintf("%.1f MiB", float64(n)/(1<<20))
	}
	return fmt.Sprintf("%.2f GiB", float64(n)/(1<<30))
}
