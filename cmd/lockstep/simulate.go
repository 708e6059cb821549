package main

import (
	"bufio"
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"strings"
	"text/tabwriter"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"github.com/lockstep-project/lockstep/cmd/lockstep/internal/plant"
)

// Defaults and limits of lockstep simulate.
const (
	simDefaultNATS     = nats.DefaultURL // nats://127.0.0.1:4222
	simDefaultInFlight = 256
	simMaxInFlight     = 1 << 20
	// simPaceSlack is how far ahead of its due time a message may be sent
	// rather than sleeping for it.
	simPaceSlack = 2 * time.Millisecond
	// simAckTimeout bounds the wait for one JetStream acknowledgement.
	simAckTimeout = 10 * time.Second
	// simDrainTimeout bounds the wait for the outstanding messages at the
	// end, also after an interrupt.
	simDrainTimeout = 10 * time.Second
)

// SimulateCommand publishes a synthetic plant to NATS, or writes its
// messages to standard output.
type SimulateCommand struct {
	Stdout, Stderr io.Writer
}

// Usage returns the help text of lockstep simulate.
func (c *SimulateCommand) Usage() string {
	return `Usage: lockstep simulate [options]

Publishes the measurements of an invented plant to NATS, for trying lockstep
out, demonstrations and load tests: parallel groups making the same product,
with a group whose mean shifts, one whose spread grows, a drift that moves
every group together, groups that fall silent (in a scenario file), and a
share of bad messages.
Without --scenario it runs the built-in coffee plant: filling lines L1–L4
(fill-weight, g; L3 drifts 1.5 g heavy from 5 min in), sealing jaws J1–J6
(seal-temperature, °C; J4's spread triples 8 min in) and capping heads H1–H8
(cap-torque, N·m; all heads drift together by +0.12 N·m over 4 h), with one
message in a thousand bad. testdata/plant/coffee.toml is the same scenario as
a commented file to copy and change.

Messages go to subjects meas.<characteristic>.<group> as JSON:
  {"value":"500.12","time":"2026-12-01T06:00:00.123Z","id":"L3-000042","unit":"g"}
The same seed and scenario give the same messages, byte for byte.

Options:
  --nats URL          NATS server to publish to (default ` + simDefaultNATS + `)
  --jetstream         publish to JetStream and wait for its acknowledgements,
                      pipelined, at most --in-flight unacknowledged at a time;
                      a stream must capture the subjects (e.g. meas.>).
                      Default: core NATS publish, no acknowledgements
  --in-flight N       unacknowledged JetStream messages at most (default ` + fmt.Sprint(simDefaultInFlight) + `)
  --scenario FILE     TOML scenario file (default: the built-in coffee plant)
  --seed N            random seed (default: the scenario's, 1 for the built-in one)
  --speed X           simulated seconds per wall-clock second: 1 is real time,
                      60 plays an hour in a minute, 0 is as fast as possible
                      (default 1, or 0 with --dry-run)
  --duration D        simulated time to run, e.g. 10m, 4h; 0 runs until
                      interrupted (default: the scenario's, 4h for the built-in one)
  --rate-scale X      multiply every group's rate of values, for load tests (default 1)
  --start T           simulated time of the start: RFC 3339 (2026-12-01T06:00:00Z),
                      "now", or an offset from now such as -1h (default: the
                      scenario's start if it has one; otherwise now, or, at a
                      speed of 0 or above 1 with a --duration, now minus the
                      duration, so that no time lies in the future)
  --dry-run           write the messages to standard output instead, one per
                      line: subject, a tab, the payload

At the end, and on an interrupt (Ctrl-C), a summary goes to standard error:
messages per characteristic and group, bad messages by kind, elapsed time and
rate. Bad messages are deliberate: not JSON, a value that is no number, NaN,
a value out of the plausible range, a wrong unit, a time a day in the
future, and a repeat of the previous message's id.

Exit status: 0 when the run ended or was interrupted, 1 on an error (no NATS
server, a publish that failed, a bad scenario file), 2 on a usage mistake.
`
}

// simOptions are the parsed options of lockstep simulate.
type simOptions struct {
	natsURL   string
	jetstream bool
	inFlight  int
	dryRun    bool
	speed     float64
}

// Run parses the options, builds the plant and publishes it until the
// scenario's end or an interrupt.
func (c *SimulateCommand) Run(ctx context.Context, args []string) error {
	fs := newFlagSet("simulate")
	natsURL := fs.String("nats", simDefaultNATS, "")
	useJS := fs.Bool("jetstream", false, "")
	inFlight := fs.Int("in-flight", simDefaultInFlight, "")
	scenarioPath := fs.String("scenario", "", "")
	seed := fs.Uint64("seed", 0, "")
	speed := fs.Float64("speed", 1, "")
	duration := fs.Duration("duration", 0, "")
	rateScale := fs.Float64("rate-scale", 1, "")
	startText := fs.String("start", "", "")
	dryRun := fs.Bool("dry-run", false, "")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) > 0 {
		return fmt.Errorf("%w: unexpected argument %q; lockstep simulate takes only options", errUsage, pos[0])
	}
	set := map[string]bool{}
	fs.Visit(func(f *flag.Flag) { set[f.Name] = true })

	if !set["speed"] && *dryRun {
		*speed = 0
	}
	switch {
	case !(*speed >= 0) || math.IsInf(*speed, 0):
		return fmt.Errorf("%w: --speed %g: give 0 (as fast as possible) or a positive factor such as 1 or 60", errUsage, *speed)
	case !(*rateScale > 0) || math.IsInf(*rateScale, 0):
		return fmt.Errorf("%w: --rate-scale %g: give a positive factor such as 10", errUsage, *rateScale)
	case *duration < 0:
		return fmt.Errorf("%w: --duration %v: must not be negative (0 runs until interrupted)", errUsage, *duration)
	case *inFlight < 1 || *inFlight > simMaxInFlight:
		return fmt.Errorf("%w: --in-flight %d: give 1 to %d", errUsage, *inFlight, simMaxInFlight)
	case *useJS && *dryRun:
		return fmt.Errorf("%w: --jetstream and --dry-run: choose one", errUsage)
	}

	sc := plant.Coffee()
	if *scenarioPath != "" {
		if sc, err = plant.LoadScenario(*scenarioPath); err != nil {
			return err
		}
	}
	if set["seed"] {
		sc.Seed = *seed
	}
	if set["duration"] {
		sc.Duration = *duration
	}
	if *rateScale != 1 {
		sc = sc.WithRateScale(*rateScale)
	}
	now := time.Now()
	switch {
	case *startText != "":
		if sc.Start, err = parseStart(*startText, now); err != nil {
			return err
		}
	case sc.Start.IsZero():
		sc.Start = now
		if (*speed == 0 || *speed > 1) && sc.Duration > 0 {
			sc.Start = now.Add(-sc.Duration)
		}
	}
	sc.Start = sc.Start.UTC().Truncate(time.Millisecond)
	gen, err := plant.New(sc)
	if err != nil {
		return err
	}
	opt := simOptions{natsURL: *natsURL, jetstream: *useJS, inFlight: *inFlight, dryRun: *dryRun, speed: *speed}
	return c.simulate(ctx, sc, gen, opt)
}

// parseStart reads --start: RFC 3339, "now", or a signed offset from now.
func parseStart(s string, now time.Time) (time.Time, error) {
	if s == "now" {
		return now, nil
	}
	if t, err := time.Parse(time.RFC3339Nano, s); err == nil {
		return t, nil
	}
	if s[0] == '-' || s[0] == '+' {
		if d, err := time.ParseDuration(s); err == nil {
			return now.Add(d), nil
		}
	}
	return time.Time{}, fmt.Errorf("%w: --start %q: give an RFC 3339 time such as 2026-12-01T06:00:00Z, \"now\", or an offset such as -1h", errUsage, s)
}

// publisher sends messages somewhere.
type publisher interface {
	// publish sends one message; the payload may be kept until flush.
	publish(ctx context.Context, m *plant.Message) error
	// flushSoon hands on what is buffered, before the loop sleeps.
	flushSoon() error
	// finish waits until everything published has arrived (or been
	// acknowledged) and reports what did not.
	finish(ctx context.Context) error
	// close releases the connection.
	close()
	// describe says where the messages went, for the summary.
	describe() string
}

// simulate runs the loop: pace, publish, count; then the summary.
func (c *SimulateCommand) simulate(ctx context.Context, sc plant.Scenario, gen *plant.Generator, opt simOptions) error {
	var pub publisher
	if opt.dryRun {
		pub = &linePublisher{w: bufio.NewWriterSize(c.Stdout, 64<<10)}
	} else {
		nc, err := nats.Connect(opt.natsURL, nats.Name("lockstep simulate"))
		if err != nil {
			return fmt.Errorf("connect to NATS at %s: %w; is a NATS server running there? (--nats sets the URL; --dry-run writes to standard output instead)", opt.natsURL, err)
		}
		if opt.jetstream {
			jp, err := newJSPublisher(nc, opt.inFlight)
			if err != nil {
				nc.Close()
				return err
			}
			pub = jp
		} else {
			pub = &corePublisher{nc: nc, url: opt.natsURL}
		}
	}
	defer pub.close()

	sum := newSimSummary(sc, gen.Streams(), opt)
	pacer := plant.Pacer{Speed: opt.speed, Start: sc.Start}
	timer := time.NewTimer(time.Hour)
	timer.Stop()
	wallStart := time.Now()
	var runErr error
loop:
	for {
		select {
		case <-ctx.Done():
			sum.interrupted = true
			break loop
		default:
		}
		m, ok := gen.Next()
		if !ok {
			break
		}
		if opt.speed > 0 {
			due := pacer.Due(m.Time)
			wait := due - time.Since(wallStart)
			if wait > simPaceSlack {
				if runErr = pub.flushSoon(); runErr != nil {
					break
				}
				timer.Reset(wait)
				select {
				case <-ctx.Done():
					timer.Stop()
					sum.interrupted = true
					break loop
				case <-timer.C:
				}
			} else if -wait > sum.maxLag {
				sum.maxLag = -wait
			}
		}
		if runErr = pub.publish(ctx, &m); runErr != nil {
			if ctx.Err() != nil {
				sum.interrupted, runErr = true, nil
			}
			break
		}
		sum.count(&m)
	}
	// Interrupted or not, wait a bounded time for what is on its way, so
	// that the summary says what arrived.
	fctx, cancel := context.WithTimeout(context.WithoutCancel(ctx), simDrainTimeout)
	ferr := pub.finish(fctx)
	cancel()
	sum.elapsed = time.Since(wallStart)
	if jp, ok := pub.(*jsPublisher); ok {
		sum.acked, sum.failed, sum.ackErr = jp.acked, jp.failed, jp.firstErr
	}
	sum.where = pub.describe()
	sum.write(c.Stderr)
	return errors.Join(runErr, ferr)
}

// linePublisher writes "subject<TAB>payload" lines.
type linePublisher struct {
	w *bufio.Writer
}

func (p *linePublisher) publish(_ context.Context, m *plant.Message) error {
	p.w.WriteString(m.Subject)
	p.w.WriteByte('\t')
	p.w.Write(m.Payload)
	if err := p.w.WriteByte('\n'); err != nil {
		return fmt.Errorf("write messages: %w", err)
	}
	return nil
}

func (p *linePublisher) flushSoon() error { return p.flush() }

func (p *linePublisher) finish(context.Context) error { return p.flush() }

func (p *linePublisher) flush() error {
	if err := p.w.Flush(); err != nil {
		return fmt.Errorf("write messages: %w", err)
	}
	return nil
}

func (p *linePublisher) close()           {}
func (p *linePublisher) describe() string { return "written to standard output" }

// corePublisher publishes with core NATS: no acknowledgements; the client
// buffers and its flusher sends.
type corePublisher struct {
	nc  *nats.Conn
	url string
}

func (p *corePublisher) publish(_ context.Context, m *plant.Message) error {
	if err := p.nc.Publish(m.Subject, m.Payload); err != nil {
		return fmt.Errorf("publish %s: %w", m.Subject, err)
	}
	return nil
}

func (p *corePublisher) flushSoon() error { return nil }

// finish waits for the server to have received everything: a flush is a
// round trip after the last message.
func (p *corePublisher) finish(ctx context.Context) error {
	if err := p.nc.FlushWithContext(ctx); err != nil {
		return fmt.Errorf("flush to NATS: %w", err)
	}
	if err := p.nc.LastError(); err != nil {
		return fmt.Errorf("NATS: %w", err)
	}
	return nil
}

func (p *corePublisher) close()           { p.nc.Close() }
func (p *corePublisher) describe() string { return "published to " + p.url }

// jsPublisher publishes to JetStream asynchronously and waits for the
// acknowledgements in order, with at most len(ring) outstanding: the
// publish of message n+len(ring) waits for the acknowledgement of message n.
type jsPublisher struct {
	nc       *nats.Conn
	js       jetstream.JetStream
	ring     []jetstream.PubAckFuture
	head, n  int
	acked    int
	failed   int
	firstErr error
	noStream bool // a message was refused for want of a stream
}

func newJSPublisher(nc *nats.Conn, window int) (*jsPublisher, error) {
	js, err := jetstream.New(nc,
		jetstream.WithPublishAsyncMaxPending(window+1), // our window is the limit
		jetstream.WithPublishAsyncTimeout(simAckTimeout))
	if err != nil {
		return nil, fmt.Errorf("JetStream: %w", err)
	}
	return &jsPublisher{nc: nc, js: js, ring: make([]jetstream.PubAckFuture, window)}, nil
}

func (p *jsPublisher) publish(ctx context.Context, m *plant.Message) error {
	if p.n == len(p.ring) {
		if err := p.waitOldest(ctx); err != nil {
			return err
		}
	}
	f, err := p.js.PublishAsync(m.Subject, m.Payload)
	if err != nil {
		return fmt.Errorf("publish %s to JetStream: %w", m.Subject, err)
	}
	p.ring[(p.head+p.n)%len(p.ring)] = f
	p.n++
	return nil
}

// waitOldest waits for the oldest outstanding acknowledgement. A message
// that no stream captures stops the run; other failures (time-outs) are
// counted and the run goes on.
func (p *jsPublisher) waitOldest(ctx context.Context) error {
	f := p.ring[p.head]
	var err error
	select {
	case <-f.Ok():
		p.acked++
	case err = <-f.Err():
		p.failed++
		if p.firstErr == nil {
			p.firstErr = fmt.Errorf("%s: %w", f.Msg().Subject, err)
		}
	case <-ctx.Done():
		return ctx.Err()
	}
	p.ring[p.head] = nil
	p.head = (p.head + 1) % len(p.ring)
	p.n--
	if !p.noStream && (errors.Is(err, jetstream.ErrNoStreamResponse) || errors.Is(err, nats.ErrNoResponders)) {
		p.noStream = true // said once
		return fmt.Errorf("publish %s to JetStream: no stream captures the subject; create one for %s.> first, or publish without --jetstream: %w",
			f.Msg().Subject, plant.SubjectPrefix, err)
	}
	return nil
}

func (p *jsPublisher) flushSoon() error { return nil }

func (p *jsPublisher) finish(ctx context.Context) error {
	for p.n > 0 {
		if err := p.waitOldest(ctx); err != nil {
			if ctx.Err() != nil {
				return fmt.Errorf("wait for JetStream acknowledgements: %d still outstanding: %w", p.n, err)
			}
			return err
		}
	}
	return nil
}

func (p *jsPublisher) close() { p.nc.Close() }
func (p *jsPublisher) describe() string {
	return "published to JetStream at " + p.nc.ConnectedUrlRedacted()
}

// simSummary counts what a run sent.
type simSummary struct {
	sc          plant.Scenario
	streams     []plant.Stream
	opt         simOptions
	perSubject  map[string]*[2]int // messages, bad messages
	badKinds    map[plant.BadKind]int
	total, bad  int
	first, last time.Time
	elapsed     time.Duration
	maxLag      time.Duration
	interrupted bool
	where       string
	acked       int
	failed      int
	ackErr      error
}

func newSimSummary(sc plant.Scenario, streams []plant.Stream, opt simOptions) *simSummary {
	s := &simSummary{sc: sc, streams: streams, opt: opt, perSubject: map[string]*[2]int{}, badKinds: map[plant.BadKind]int{}}
	for _, st := range streams {
		s.perSubject[st.Subject] = new([2]int)
	}
	return s
}

func (s *simSummary) count(m *plant.Message) {
	c := s.perSubject[m.Subject]
	c[0]++
	s.total++
	if m.Bad != "" {
		c[1]++
		s.bad++
		s.badKinds[m.Bad]++
	}
	if s.total == 1 {
		s.first = m.Time
	}
	s.last = m.Time
}

// write prints the summary.
func (s *simSummary) write(w io.Writer) {
	name := s.sc.Name
	if name == "" {
		name = "scenario"
	}
	span := "until interrupted"
	if s.sc.Duration > 0 {
		span = "for " + s.sc.Duration.String()
	}
	fmt.Fprintf(w, "lockstep simulate: %s, seed %d, simulated from %s %s", name, s.sc.Seed, s.sc.Start.Format(time.RFC3339Nano), span)
	if s.opt.speed > 0 {
		fmt.Fprintf(w, " at speed %g\n", s.opt.speed)
	} else {
		fmt.Fprintf(w, " as fast as possible\n")
	}
	if s.interrupted {
		fmt.Fprintf(w, "interrupted after %v of simulated time\n", s.last.Sub(s.sc.Start).Truncate(time.Millisecond))
	}
	rate := 0.0
	if secs := s.elapsed.Seconds(); secs > 0 {
		rate = float64(s.total) / secs
	}
	elapsed := s.elapsed.Round(time.Millisecond)
	if s.elapsed < time.Second {
		elapsed = s.elapsed.Round(time.Microsecond)
	}
	fmt.Fprintf(w, "%d messages %s in %v (%.0f messages/s)\n", s.total, s.where, elapsed, rate)
	if s.maxLag > time.Second {
		fmt.Fprintf(w, "fell behind the simulated clock by up to %v: the publisher could not keep up with --speed %g\n", s.maxLag.Round(time.Millisecond), s.opt.speed)
	}
	if s.opt.jetstream {
		fmt.Fprintf(w, "JetStream: %d acknowledged, %d failed", s.acked, s.failed)
		if s.ackErr != nil {
			fmt.Fprintf(w, " (first: %v)", s.ackErr)
		}
		fmt.Fprintln(w)
	}
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "characteristic\tgroup\t%10s\t%6s\n", "messages", "bad")
	for _, st := range s.streams {
		c := s.perSubject[st.Subject]
		fmt.Fprintf(tw, "%s\t%s\t%10d\t%6d\n", st.Characteristic, st.Group, c[0], c[1])
	}
	tw.Flush()
	var kinds []string
	for _, k := range plant.AllBadKinds() {
		kinds = append(kinds, fmt.Sprintf("%s %d", k, s.badKinds[k]))
	}
	fmt.Fprintf(w, "bad messages: %d (%s)\n", s.bad, strings.Join(kinds, ", "))
}
