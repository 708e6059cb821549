package main

import (
	"bufio"
	"context"
	"encoding/csv"
	"fmt"
	"io"
	"time"

	"github.com/lockstep-project/lockstep/cmd/lockstep/internal/replay"
	"github.com/lockstep-project/lockstep/store"
)

// ExportCommand writes the stored raw measurements of a characteristic.
type ExportCommand struct {
	Stdout, Stderr io.Writer
}

// Usage returns the help text of lockstep export.
func (c *ExportCommand) Usage() string {
	return `Usage: lockstep export --store FILE --characteristic NAME [--from T] [--to T] --csv

Writes the retained raw measurements of one characteristic as CSV to
standard output, for other tools: a header row, then one row per
measurement in time order (equal times in the order they were stored) with
the columns time (RFC 3339, UTC, to the nanosecond), group, value (the
decimal text exactly as it was received) and id (empty when the measurement
had none). The store is read as a stream, so an export of any length runs in
constant memory. The store is opened read-only; while the daemon holds it,
export a copy taken with "lockstep backup".

Options:
  --store FILE           the store (default lockstep.db)
  --characteristic NAME  the characteristic
  --from T, --to T       only measurements with from <= time < to (RFC 3339 with a
                         zone, or a date); default everything retained
  --csv                  CSV output (the only format, and the default)

Exit status: 0 when the export ran, 1 on a problem, 2 on a usage mistake.
`
}

// Run parses the options and exports.
func (c *ExportCommand) Run(ctx context.Context, args []string) error {
	fs := newFlagSet("export")
	path := fs.String("store", "lockstep.db", "")
	char := fs.String("characteristic", "", "")
	fromText := fs.String("from", "", "")
	toText := fs.String("to", "", "")
	_ = fs.Bool("csv", true, "")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) > 0 {
		return fmt.Errorf("%w: unexpected argument %q", errUsage, pos[0])
	}
	if *char == "" {
		return fmt.Errorf("%w: give --characteristic NAME", errUsage)
	}
	var from, to time.Time
	if *fromText != "" {
		if from, err = replay.ParseTime(*fromText); err != nil {
			return fmt.Errorf("%w: --from: %v", errUsage, err)
		}
	}
	if *toText != "" {
		if to, err = replay.ParseTime(*toText); err != nil {
			return fmt.Errorf("%w: --to: %v", errUsage, err)
		}
	}
	if !from.IsZero() && !to.IsZero() && !from.Before(to) {
		return fmt.Errorf("%w: --from %s is not before --to %s", replay.ErrRange, from.Format(time.RFC3339Nano), to.Format(time.RFC3339Nano))
	}
	st, err := readOnlyStore(*path, "export")
	if err != nil {
		return err
	}
	defer st.Close()
	if _, err := replay.FindRecord(st, *char); err != nil {
		return err
	}
	n, err := exportCSV(ctx, st, *char, from, to, c.Stdout)
	if err != nil {
		return err
	}
	if n == 0 {
		fmt.Fprintf(c.Stderr, "no raw values of %q in the range: they may have aged out of the store (retain_raw)\n", *char)
	}
	return nil
}

// exportCSV streams the raw values of char in [from, to) as CSV to w and
// returns how many it wrote.
func exportCSV(ctx context.Context, st *store.Store, char string, from, to time.Time, w io.Writer) (int64, error) {
	bw := bufio.NewWriterSize(w, 64<<10)
	cw := csv.NewWriter(bw)
	if err := cw.Write([]string{"time", "group", "value", "id"}); err != nil {
		return 0, fmt.Errorf("write export: %w", err)
	}
	var n int64
	rec := make([]string, 4)
	var tb []byte
	err := st.Raw(char, from, to, func(rv store.RawValue) error {
		n++
		if n&4095 == 0 {
			if err := ctx.Err(); err != nil {
				return err
			}
		}
		tb = rv.Time.UTC().AppendFormat(tb[:0], time.RFC3339Nano)
		rec[0], rec[1], rec[2], rec[3] = string(tb), rv.Group, rv.Text, rv.ID
		return cw.Write(rec)
	})
	if err != nil {
		return n, fmt.Errorf("export %q: %w", char, err)
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return n, fmt.Errorf("write export: %w", err)
	}
	if err := bw.Flush(); err != nil {
		return n, fmt.Errorf("write export: %w", err)
	}
	return n, nil
}
