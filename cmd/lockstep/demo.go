package main

import (
	"bytes"
	"context"
	_ "embed"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"time"

	"github.com/lockstep-project/lockstep/cmd/lockstep/internal/plant"
)

// demoConfig is the daemon's configuration in lockstep demo.
//
//go:embed etc/demo.toml
var demoConfig []byte

// Defaults of lockstep demo.
const (
	demoDefaultListen = "127.0.0.1:8420"
	demoMaxSpeed      = 1000
	// demoSimStop bounds the wait for the simulator to hand over what it
	// published, before the daemon stops.
	demoSimStop = 2 * time.Second
)

// DemoCommand is lockstep demo: an embedded NATS server, the daemon, the
// simulated coffee plant and the dashboard, in one command.
type DemoCommand struct {
	Stdout, Stderr io.Writer
	// ready, when set, is called with the dashboard's URL once it serves
	// (for tests).
	ready func(url string)
}

// Usage returns the help text of lockstep demo.
func (c *DemoCommand) Usage() string {
	return `Usage: lockstep demo [options]

Shows all of lockstep working, with nothing installed but Go: starts an
embedded NATS server with JetStream, the daemon (lockstep run) with a bundled
configuration, the invented coffee plant of lockstep simulate publishing to
it, and the shift dashboard; prints the dashboard's address. Ctrl-C stops
everything.

The plant: four filling lines of 500 g bags (fill-weight, L1–L4), of which
L3 drifts 1.5 g heavy from 5 to 15 minutes in; six sealing jaws (seal-
temperature, J1–J6), of which J4 starts to scatter 8 minutes in; eight
capping heads (cap-torque, H1–H8) that drift together with the ambient
temperature, which lockstep rightly leaves quiet. At --speed 1 the L3 alert
shows about 10 minutes in; --speed 60 plays an hour in a minute.

The daemon runs on the demo's clock, which runs --speed times faster than
the wall clock from the start: the times the dashboard shows are simulated.

Options:
  --speed X        simulated seconds per wall-clock second, 1 to ` + fmt.Sprint(demoMaxSpeed) + ` (default 1)
  --listen H:P     the dashboard and API address (default ` + demoDefaultListen + `, a fixed
                   port; give 127.0.0.1:0 for any free port); loopback only
  --data DIR       keep the store and the JetStream files in DIR (default: a
                   temporary directory, removed at the end). At a speed above 1
                   the stored times run ahead of the wall clock: use a fresh DIR
                   for each run
  --log-level L    the daemon's log: trace, debug, info, warn (default) or error

lockstep is advisory: it is not a safety interlock and does not replace the
plant's quality procedures, local regulations or licensed practice.
`
}

// Run starts the demo and runs it until ctx ends.
func (c *DemoCommand) Run(ctx context.Context, args []string) (err error) {
	fs := newFlagSet("demo")
	speed := fs.Float64("speed", 1, "")
	listen := fs.String("listen", demoDefaultListen, "")
	data := fs.String("data", "", "")
	logLevel := fs.String("log-level", "warn", "")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) > 0 {
		return fmt.Errorf("%w: unexpected argument %q; lockstep demo takes only options", errUsage, pos[0])
	}
	if !(*speed >= 1 && *speed <= demoMaxSpeed) || math.IsInf(*speed, 0) {
		return fmt.Errorf("%w: --speed %g: give a factor from 1 (real time) to %d", errUsage, *speed, demoMaxSpeed)
	}
	if host, _, herr := splitHostPort(*listen); herr != nil || !isLoopback(host) {
		return fmt.Errorf("%w: --listen %q: give a loopback address such as %s or 127.0.0.1:0 (the demo has no token)", errUsage, *listen, demoDefaultListen)
	}
	log, err := newLogger(c.Stderr, *logLevel, "auto")
	if err != nil {
		return fmt.Errorf("%w: %v", errUsage, err)
	}

	dir := *data
	if dir == "" {
		if dir, err = os.MkdirTemp("", "lockstep-demo-"); err != nil {
			return fmt.Errorf("create demo directory: %w", err)
		}
		defer func() {
			if rerr := os.RemoveAll(dir); rerr != nil {
				err = errors.Join(err, fmt.Errorf("remove demo directory: %w", rerr))
			}
		}()
	} else if err := os.MkdirAll(dir, 0o755); err != nil {
		return fmt.Errorf("create demo directory: %w", err)
	}
	cfg, err := demoSettings(dir, *listen, *speed)
	if err != nil {
		return err
	}
	clock := demoClock{wall: time.Now, start: time.Now(), speed: *speed}

	// The daemon stops after the simulator, so that what was published
	// is still acknowledged; both stop when ctx ends.
	dctx, stopDaemon := context.WithCancel(context.WithoutCancel(ctx))
	defer stopDaemon()
	started := make(chan runInfo, 1)
	daemonDone := make(chan error, 1)
	rc := &RunCommand{Stdout: c.Stdout, Stderr: c.Stderr, clock: clock.now, started: func(i runInfo) { started <- i }}
	go func() { daemonDone <- rc.serve(dctx, cfg, log) }()
	var info runInfo
	select {
	case info = <-started:
	case err := <-daemonDone:
		return fmt.Errorf("start the daemon: %w", err)
	case <-ctx.Done():
		stopDaemon()
		return <-daemonDone
	}

	sc := plant.Coffee()
	sc.Duration = 0 // until interrupted
	sc.Start = clock.now().UTC().Truncate(time.Millisecond)
	gen, err := plant.New(sc)
	if err != nil {
		stopDaemon()
		return errors.Join(err, <-daemonDone)
	}
	sctx, stopSim := context.WithCancel(ctx)
	defer stopSim()
	simDone := make(chan error, 1)
	sim := &SimulateCommand{Stdout: io.Discard, Stderr: io.Discard}
	go func() {
		simDone <- sim.simulate(sctx, sc, gen, simOptions{natsURL: info.NATS, jetstream: true, inFlight: simDefaultInFlight, speed: *speed})
	}()

	url := "http://" + info.HTTP + "/"
	fmt.Fprintf(c.Stdout, "lockstep demo: the dashboard is at %s\n", url)
	fmt.Fprintf(c.Stdout, "  the coffee plant publishes to %s at speed %g; data in %s\n", info.NATS, *speed, dir)
	fmt.Fprintf(c.Stdout, "  Ctrl-C stops everything. lockstep is advisory: not a safety interlock.\n")
	if c.ready != nil {
		c.ready(url)
	}

	var simErr error
	select {
	case <-ctx.Done():
	case err := <-daemonDone:
		stopSim()
		return errors.Join(err, <-simDone)
	case simErr = <-simDone:
		simDone <- simErr // read again below
	}
	stopSim()
	select {
	case simErr = <-simDone:
	case <-time.After(demoSimStop):
		simErr = nil // it is still draining; the daemon's stop ends its connection
	}
	stopDaemon()
	derr := <-daemonDone
	if ctx.Err() == nil && simErr != nil {
		return errors.Join(fmt.Errorf("simulate the plant: %w", simErr), derr)
	}
	fmt.Fprintln(c.Stdout, "lockstep demo: stopped")
	return derr
}

// demoSettings returns the daemon's configuration: the bundled file, with
// the directory, the address and a commit interval scaled to the speed.
func demoSettings(dir, listen string, speed float64) (*Config, error) {
	cfg := DefaultConfig()
	if err := ParseConfig(bytes.NewReader(demoConfig), cfg); err != nil {
		return nil, fmt.Errorf("read the demo configuration: %w", err)
	}
	cfg.NATS.URL = natsEmbedded
	cfg.NATS.Listen = "127.0.0.1:0"
	cfg.NATS.Data = filepath.Join(dir, "jetstream")
	cfg.Store.Path = filepath.Join(dir, "lockstep.db")
	cfg.HTTP.Listen = listen
	// The commit interval is in the daemon's (simulated) time: the same
	// wall-clock interval at every speed.
	cfg.Store.CommitInterval = setDuration(time.Duration(float64(cfg.Store.CommitInterval.D) * speed))
	if err := cfg.Validate(); err != nil {
		return nil, fmt.Errorf("check the demo configuration: %w", err)
	}
	return cfg, nil
}

// demoClock is the demo's simulated time: from start it runs speed times
// faster than wall.
type demoClock struct {
	wall  func() time.Time
	start time.Time
	speed float64
}

func (c demoClock) now() time.Time {
	el := c.wall().Sub(c.start)
	return c.start.Add(time.Duration(float64(el) * c.speed))
}
