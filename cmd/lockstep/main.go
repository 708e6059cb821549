// Command lockstep watches parallel production groups (lines, machines,
// heads, cavities) that should make the same thing and says, with a one-way
// analysis of variance, whether they still agree, which one moved and by how
// much. See `lockstep help`.
package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"syscall"
)

// version is set at build time with -ldflags "-X main.version=...".
var version = "dev"

// errUsage marks a command-line mistake: the command prints its usage hint
// and exits with status 2.
var errUsage = errors.New("usage")

// command is one subcommand.
type command interface {
	Run(ctx context.Context, args []string) error
	Usage() string
}

func commands(stdin io.Reader, stdout, stderr io.Writer) map[string]command {
	return map[string]command{
		"check":     &CheckCommand{Stdin: stdin, Stdout: stdout, Stderr: stderr},
		"run":       &RunCommand{Stdout: stdout, Stderr: stderr},
		"simulate":  &SimulateCommand{Stdout: stdout, Stderr: stderr},
		"calibrate": &CalibrateCommand{Stdout: stdout, Stderr: stderr},
		"replay":    &ReplayCommand{Stdout: stdout, Stderr: stderr},
		"plot":      &PlotCommand{Stdout: stdout, Stderr: stderr},
		"export":    &ExportCommand{Stdout: stdout, Stderr: stderr},
		"backup":    &BackupCommand{Stdout: stdout, Stderr: stderr},
		"verify":    &VerifyCommand{Stdout: stdout, Stderr: stderr},
		"alerts":    &AlertsCommand{Stdout: stdout, Stderr: stderr},
		"demo":      &DemoCommand{Stdout: stdout, Stderr: stderr},
	}
}

const mainUsage = `lockstep compares parallel production groups that should make the same thing
(filling lines, machines, heads, cavities) and says whether they still agree,
which group moved and by how much, in the product's units.

lockstep is advisory: it is not a safety interlock and does not replace the
plant's quality procedures, local regulations or licensed practice.

Usage:
  lockstep <command> [options]

Commands:
  demo      see everything at work: embedded NATS, the daemon, a simulated
            coffee plant and the shift dashboard, in one command
  check     analyse a CSV file of measurements (one-way analysis of variance,
            Welch, spread and rank tests, pairs, analysis of means)
  run       run the daemon: measurements from NATS, rolling windows, durable
            state, an HTTP API and Prometheus metrics
  simulate  publish the measurements of an invented plant to NATS, for trying
            lockstep out, demonstrations and load tests
  replay    re-run the evaluations of a stored period, optionally with other
            settings: one row per evaluation, a summary, a chart
  plot      draw one stored window: box plots with analysis-of-means limits
  export    write a characteristic's stored raw measurements as CSV
  backup    copy the live store through the daemon, or a stopped daemon's file
  verify    check a store file's integrity and schema version
  alerts    list the daemon's alerts, or acknowledge one
  calibrate measure alert settings on simulated streams: false raises per
            shift and per 30 days, time to raise, per-group baselines
  version   print the version
  help      print this help, or "lockstep help <command>" for one command

Run "lockstep <command> --help" for a command's options.
`

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	code := run(ctx, os.Args[1:], os.Stdin, os.Stdout, os.Stderr)
	stop()
	os.Exit(code)
}

// run executes one command line and returns the exit status: 0 success,
// 1 failure, 2 a usage mistake.
func run(ctx context.Context, args []string, stdin io.Reader, stdout, stderr io.Writer) int {
	if len(args) == 0 {
		fmt.Fprint(stderr, mainUsage)
		return 2
	}
	cmds := commands(stdin, stdout, stderr)
	name := args[0]
	switch name {
	case "help", "-h", "--help":
		if len(args) > 1 {
			if c, ok := cmds[args[1]]; ok {
				fmt.Fprint(stdout, c.Usage())
				return 0
			}
			fmt.Fprintf(stderr, "lockstep: no command %q\n", args[1])
			return 2
		}
		fmt.Fprint(stdout, mainUsage)
		return 0
	case "version", "--version":
		fmt.Fprintf(stdout, "lockstep %s\n", version)
		return 0
	}
	c, ok := cmds[name]
	if !ok {
		fmt.Fprintf(stderr, "lockstep: no command %q; run \"lockstep help\" for the list\n", name)
		return 2
	}
	err := c.Run(ctx, args[1:])
	switch {
	case err == nil:
		return 0
	case errors.Is(err, errHelp):
		fmt.Fprint(stdout, c.Usage())
		return 0
	case errors.Is(err, errUsage):
		fmt.Fprintf(stderr, "lockstep %s: %v\nrun \"lockstep %s --help\" for the options\n", name, err, name)
		return 2
	default:
		fmt.Fprintf(stderr, "lockstep %s: %v\n", name, err)
		return 1
	}
}
