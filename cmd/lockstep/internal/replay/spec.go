package replay

import (
	"context"
	"errors"
	"fmt"
	"time"

	"github.com/lockstep-project/lockstep/stats"
	"github.com/lockstep-project/lockstep/store"
	"github.com/lockstep-project/lockstep/window"
)

// Source says where a replay rebuilds its windows from.
type Source uint8

const (
	// Auto: raw values when they cover the period, bucket states when the
	// raw values have aged out and the bucket states reach further back.
	Auto Source = iota
	// Raw: the retained raw values, re-added to a fresh window (exact).
	Raw
	// Buckets: the stored bucket states (window.Restore).
	Buckets
)

func (s Source) String() string {
	switch s {
	case Raw:
		return "raw"
	case Buckets:
		return "buckets"
	}
	return "auto"
}

// ParseSource reads "auto", "raw" or "buckets".
func ParseSource(s string) (Source, error) {
	switch s {
	case "auto", "":
		return Auto, nil
	case "raw":
		return Raw, nil
	case "buckets":
		return Buckets, nil
	}
	return Auto, fmt.Errorf("source %q: use auto, raw or buckets", s)
}

// Store is what a replay reads of a store (*store.Store).
type Store interface {
	Characteristics() ([]store.Characteristic, error)
	Buckets(char string, from, to time.Time, fn func(store.BucketState) error) error
	Raw(char string, from, to time.Time, fn func(store.RawValue) error) error
}

var _ Store = (*store.Store)(nil)

// Spec is one replay.
type Spec struct {
	Characteristic string
	// From and To bound the evaluation times: From, From+Step, … ≤ To.
	From, To time.Time
	Step     time.Duration
	// Window is the window of each evaluation (defaults filled by
	// window.New). Replay from bucket states needs the bucket width and
	// sample the states were stored with.
	Window window.Config
	// Options are the levels of each analysis.
	Options stats.Options
	Source  Source
	// StateHash, when non-zero, is the hash of the bucket and sample
	// settings of Window as the daemon computes it; replay from bucket
	// states refuses a store whose characteristic was stored with another.
	StateHash uint64
}

// MaxEvaluations bounds the evaluations of one replay, so that a mistyped
// step (1ns over a year) is refused at once instead of running for days.
const MaxEvaluations = 50_000_000

// ErrRange is wrapped by the errors about the period and the step.
var ErrRange = errors.New("bad replay range")

// ErrSource is wrapped when the chosen source cannot replay the period.
var ErrSource = errors.New("cannot replay from this source")

// Eval is one evaluation of a replay.
type Eval struct {
	At   time.Time
	Eval window.Evaluation
	// Window is the replay's window as evaluated at At, for the alert
	// detectors' spans (window.SpanSums, EndedSums). It is valid only
	// during the callback, and the callback must not add to it.
	Window *window.Window
}

// check validates the period and the step.
func (s *Spec) check() error {
	switch {
	case s.From.IsZero() || s.To.IsZero():
		return fmt.Errorf("%w: give both --from and --to", ErrRange)
	case s.To.Before(s.From):
		return fmt.Errorf("%w: --to %s is before --from %s", ErrRange, fmtTime(s.To), fmtTime(s.From))
	case s.Step <= 0:
		return fmt.Errorf("%w: step %v must be positive", ErrRange, s.Step)
	case s.From.Year() < 1900 || s.To.Year() > 2200:
		return fmt.Errorf("%w: %s to %s lies outside the years 1900 to 2200", ErrRange, fmtTime(s.From), fmtTime(s.To))
	}
	if n := s.To.Sub(s.From)/s.Step + 1; n > MaxEvaluations {
		return fmt.Errorf("%w: %s to %s at a step of %v is %d evaluations, more than %d: use a longer step or a shorter period",
			ErrRange, fmtTime(s.From), fmtTime(s.To), s.Step, n, MaxEvaluations)
	}
	return nil
}

func fmtTime(t time.Time) string { return t.UTC().Format(time.RFC3339Nano) }

// errStop ends an iteration early without an error.
var errStop = errors.New("stop")

// ctxErr returns ctx's error every 4096 calls, cheaply.
type ctxCheck struct {
	ctx context.Context
	n   int
}

func (c *ctxCheck) err() error {
	c.n++
	if c.n&4095 != 0 {
		return nil
	}
	return c.ctx.Err()
}
