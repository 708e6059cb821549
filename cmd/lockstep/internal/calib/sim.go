package calib

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"time"

	"github.com/lockstep-project/lockstep/alert"
	"github.com/lockstep-project/lockstep/stats"
	"github.com/lockstep-project/lockstep/window"
)

// Scenario is the stream simulated: the groups' rates, the within-group SD
// and the bucket, which is also the evaluation interval.
type Scenario struct {
	Rates  []float64 // values per second of each group
	SD     float64   // within-group SD, the same in every group
	Bucket time.Duration
}

// Validate checks the scenario.
func (s Scenario) Validate() error {
	var errs []error
	if len(s.Rates) < 2 {
		errs = append(errs, fmt.Errorf("rates: %d groups, need at least 2", len(s.Rates)))
	}
	for i, r := range s.Rates {
		if !(r > 0) || math.IsInf(r, 0) {
			errs = append(errs, fmt.Errorf("rates: group %d's rate %v is not a positive number", i+1, r))
		} else if n := r * s.Bucket.Seconds(); n < 2 || n > 1e6 {
			errs = append(errs, fmt.Errorf("rates: group %d gives %.3g values per bucket, need 2 to 1e6", i+1, n))
		}
	}
	if !(s.SD > 0) || math.IsInf(s.SD, 0) {
		errs = append(errs, fmt.Errorf("sd %v is not a positive number", s.SD))
	}
	if s.Bucket < time.Second || s.Bucket > 24*time.Hour {
		errs = append(errs, fmt.Errorf("bucket %v is not between 1s and 24h", s.Bucket))
	}
	return errors.Join(errs...)
}

// perBucket returns each group's number of values per bucket.
func (s Scenario) perBucket() []int {
	n := make([]int, len(s.Rates))
	for i, r := range s.Rates {
		n[i] = max(int(math.Round(r*s.Bucket.Seconds())), 2)
	}
	return n
}

// meanFunc gives group g's true mean at evaluation step e (in bucket
// units from the start of the run), in units of the SD.
type meanFunc func(g, e int) float64

// observer sees every evaluation of a run.
type observer interface {
	// observe takes evaluation e of the run: the conditions of each grid
	// point's monitor, and the ended buckets' accumulators. It returns
	// false to stop the run early.
	observe(e int, conds [][]alert.Condition, recent []stats.Accumulator) bool
}

// stream simulates one run of evals evaluations: each bucket, every group's
// values go through the window, then every monitor steps on the Input made
// from the window. rng is the run's own source.
func stream(sc Scenario, rules []alert.Rule, evals int, mean meanFunc, rng *rand.Rand, obs observer) error {
	longest := sc.Bucket
	for _, d := range rules[0].Windows {
		longest = max(longest, d.Length)
	}
	length := (longest/sc.Bucket + 1) * sc.Bucket
	w, err := window.New(window.Config{Bucket: sc.Bucket, Length: length, Lateness: -1, SilentAfter: -1, Sample: -1})
	if err != nil {
		return fmt.Errorf("make window: %w", err)
	}
	mons := make([]*alert.Monitor, len(rules))
	for i, r := range rules {
		if mons[i], err = alert.NewMonitor(r); err != nil {
			return fmt.Errorf("make monitor %d: %w", i, err)
		}
	}
	ng := len(sc.Rates)
	names := make([]string, ng)
	for g := range ng {
		names[g] = fmt.Sprintf("G%d", g+1)
		w.Group(names[g])
	}
	nb := sc.perBucket()
	start := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
	bns := int64(sc.Bucket)
	spans := make([][]stats.Accumulator, len(rules[0].Windows))
	var recent []stats.Accumulator
	conds := make([][]alert.Condition, len(rules))
	var prev time.Time
	for e := range evals {
		t0 := start.Add(time.Duration(int64(e) * bns))
		for g := range ng {
			mu := mean(g, e) * sc.SD
			step := bns / int64(nb[g])
			for j := range nb[g] {
				t := t0.Add(time.Duration(int64(j)*step + step/2))
				if r := w.Add(g, t, mu+sc.SD*rng.NormFloat64()); r != window.Added {
					return fmt.Errorf("simulate: window said %v for a value at %v", r, t)
				}
			}
		}
		now := t0.Add(sc.Bucket)
		in := alert.Input{Time: now, Groups: names, RecentFrom: prev}
		for i, d := range rules[0].Windows {
			spans[i] = w.SpanSums(now, d.Length, spans[i])
			in.Spans = append(in.Spans, alert.Span{Length: d.Length, From: now.Add(-d.Length), To: now, Groups: spans[i]})
		}
		recent = w.EndedSums(prev, now, recent)
		in.Recent = recent
		prev = now
		for i, m := range mons {
			conds[i] = m.Step(in)
		}
		if !obs.observe(e, conds, recent) {
			break
		}
	}
	return nil
}
