package main

import (
	"errors"
	"flag"
	"fmt"
	"io"
)

// errHelp is returned by a command asked for --help: its usage goes to
// standard output and the exit status is 0.
var errHelp = errors.New("help requested")

// newFlagSet returns a flag set that reports problems as errors instead of
// printing them, so that the command decides what to print.
func newFlagSet(name string) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	fs.Usage = func() {}
	return fs
}

// parseFlags parses args, allowing flags after positional arguments (as in
// "lockstep check data.csv --json"), and returns the positional arguments.
// A lone "-" is a positional argument (standard input); "--" ends the flags.
func parseFlags(fs *flag.FlagSet, args []string) ([]string, error) {
	var pos []string
	for {
		if err := fs.Parse(args); err != nil {
			if errors.Is(err, flag.ErrHelp) {
				return nil, errHelp
			}
			return nil, fmt.Errorf("%w: %v", errUsage, err)
		}
		rest := fs.Args()
		if len(rest) == 0 {
			return pos, nil
		}
		if len(args) > 0 && len(rest) < len(args) && args[len(args)-len(rest)-1] == "--" {
			return append(pos, rest...), nil
		}
		pos = append(pos, rest[0])
		args = rest[1:]
	}
}
