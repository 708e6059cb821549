package calib

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"sort"
	"sync"
	"sync/atomic"
	"time"

	"github.com/lockstep-project/lockstep/alert"
	"github.com/lockstep-project/lockstep/stats"
	"gonum.org/v1/gonum/stat/distuv"
)

// Config is one calibration.
type Config struct {
	Scenario Scenario
	// Rule is the base rule: its detectors, shares, clearing and test are
	// used as they are; Alpha and Confirm come from the grid. Its spread,
	// silent and reject conditions are switched off.
	Rule     alert.Rule
	Alphas   []float64
	Confirms []int
	// Shifts are the shifts of one group (the first) to time, in SDs.
	Shifts    []float64
	ShiftRuns int
	Horizon   time.Duration // how long after the shift a run waits for a raise
	// Days of in-control stream, split into replicates of at most 30 days.
	Days float64
	// Drift moves every group together by Drift SDs, linearly over
	// DriftOver, in each of DriftRuns runs.
	Drift     float64
	DriftOver time.Duration
	DriftRuns int
	// MaxFalse is the target: false raises per 30 days at most. The
	// baselines are held at this rate.
	MaxFalse float64
	// BaselineK is the per-group CUSUM's reference value, in SDs of a
	// subgroup mean.
	BaselineK float64
	Seed      uint64
	Workers   int
	// Progress, if set, is called from the workers with the evaluations
	// done and the total, at most once per replicate.
	Progress func(done, total int64)
}

// Delay is the time to raise for one shift.
type Delay struct {
	Shift float64 // in SDs
	Runs  int     // runs timed (runs with a false raise before the shift are left out)
	// Raised is how many runs raised within the horizon; Wrong how many of
	// those named another group first or the wrong direction.
	Raised, Wrong int
	// Median and P90 are minutes from the shift to the raise; +Inf when
	// fewer than half (a tenth) of the runs raised within the horizon.
	Median, P90 float64
}

// Rate is a count of false raises over an in-control stretch.
type Rate struct {
	Raises      int64
	Evaluations int64
	// Per8h and Per30d are the rates per 8-hour shift and per 30 days;
	// Low and High bound Per30d by the exact 95 % Poisson interval.
	Per8h, Per30d, Low, High float64
}

// Drift is the outcome of the common-drift runs.
type Drift struct {
	Runs, Raised int
	Median       float64 // minutes from the drift's start to the raise; +Inf when fewer than half raised
	// Chance is how many of the runs would raise by chance alone at the
	// in-control false-raise rate: Runs × (1 − exp(−rate × evaluations of
	// a run)). A between-group monitor is blind to a common drift, so its
	// Raised should be near Chance; the per-group charts' far above.
	Chance float64
}

// Point is one grid point's measurements.
type Point struct {
	Alpha   float64
	Confirm int
	False   Rate
	Delays  []Delay
	Drift   Drift
}

// Baseline is one per-group chart's measurements.
type Baseline struct {
	Name     string
	Settings string
	False    Rate
	Delays   []Delay
	Drift    Drift
}

// Result is a calibration's outcome.
type Result struct {
	Points []Point
	// Recommended indexes Points: the most sensitive point whose false
	// raises per 30 days are at most MaxFalse; −1 when none is.
	Recommended int
	Baselines   []Baseline
}

// Validate checks the configuration.
func (c *Config) Validate() error {
	var errs []error
	if err := c.Scenario.Validate(); err != nil {
		errs = append(errs, err)
	}
	if len(c.Alphas) == 0 || len(c.Confirms) == 0 {
		errs = append(errs, errors.New("grid: give at least one alpha and one confirm count"))
	}
	for _, a := range c.Alphas {
		if !(a > 0 && a < 1) {
			errs = append(errs, fmt.Errorf("alphas: %v is not between 0 and 1", a))
		}
	}
	for _, m := range c.Confirms {
		if m < 1 || m > 1000 {
			errs = append(errs, fmt.Errorf("confirms: %d is not between 1 and 1000", m))
		}
	}
	for _, s := range c.Shifts {
		if !(s != 0) || math.IsInf(s, 0) || math.IsNaN(s) {
			errs = append(errs, fmt.Errorf("shifts: %v is not a non-zero number of SDs", s))
		}
	}
	if c.ShiftRuns < 0 || c.DriftRuns < 0 || !(c.Days >= 0) {
		errs = append(errs, errors.New("runs and days must not be negative"))
	}
	if c.Days == 0 {
		errs = append(errs, errors.New("days: 0 days of in-control stream give no false-raise estimate"))
	}
	if len(c.Shifts) > 0 && (c.Horizon < c.Scenario.Bucket || c.ShiftRuns == 0) {
		errs = append(errs, errors.New("shifts need a horizon of at least one bucket and at least one run"))
	}
	if c.DriftRuns > 0 && c.DriftOver < c.Scenario.Bucket {
		errs = append(errs, fmt.Errorf("drift-over %v is shorter than a bucket", c.DriftOver))
	}
	if !(c.MaxFalse > 0) {
		errs = append(errs, fmt.Errorf("max-false %v is not positive", c.MaxFalse))
	}
	if !(c.BaselineK > 0) {
		errs = append(errs, fmt.Errorf("baseline k %v is not positive", c.BaselineK))
	}
	if len(errs) == 0 {
		for _, r := range c.rules() {
			if err := r.Validate(); err != nil {
				errs = append(errs, fmt.Errorf("rule at alpha %v, confirm %d: %w", r.Alpha, r.Confirm, err))
				break
			}
		}
	}
	return errors.Join(errs...)
}

// rules returns the grid's rules, alphas outer, confirms inner.
func (c *Config) rules() []alert.Rule {
	var out []alert.Rule
	for _, a := range c.Alphas {
		for _, m := range c.Confirms {
			r := c.Rule
			r.Alpha, r.Confirm = a, m
			r.ClearAlpha = math.Max(r.ClearAlpha, a)
			r.Spread.Off, r.Reject.Off, r.SilentAfter = true, true, 0
			out = append(out, r)
		}
	}
	return out
}

// job is one replicate.
type job struct {
	kind  int // jobInControl, jobShift, jobDrift
	shift int // index into Shifts
	evals int
	onset int // evaluation index of the first shifted bucket
}

const (
	jobInControl = iota
	jobShift
	jobDrift
)

// outcome is one replicate's result: per grid point then per baseline
// (Shewhart, CUSUM), its raises (in control) or the minutes to the first
// raise after the onset (NaN: none; −1: raised before the onset).
type outcome struct {
	evals  int64
	raises []int64
	delay  []float64
	wrong  []bool
}

// Run runs the calibration. It stops early, with ctx's error, when ctx is
// done.
func Run(ctx context.Context, c Config) (Result, error) {
	if err := c.Validate(); err != nil {
		return Result{}, fmt.Errorf("check calibration: %w", err)
	}
	rules := c.rules()
	perDay := int(24 * time.Hour / c.Scenario.Bucket)
	warm := 5
	for _, d := range c.Rule.Windows {
		warm = max(warm, int(d.Length/c.Scenario.Bucket)+5)
	}
	var jobs []job
	total := int(math.Ceil(c.Days * float64(perDay)))
	chunk := 30 * perDay
	for done := 0; done < total; done += chunk {
		jobs = append(jobs, job{kind: jobInControl, evals: min(chunk, total-done), onset: warm})
	}
	horizon := int(c.Horizon / c.Scenario.Bucket)
	for s := range c.Shifts {
		for range c.ShiftRuns {
			jobs = append(jobs, job{kind: jobShift, shift: s, evals: warm + horizon, onset: warm})
		}
	}
	driftEvals := int(c.DriftOver / c.Scenario.Bucket)
	for range c.DriftRuns {
		jobs = append(jobs, job{kind: jobDrift, evals: warm + driftEvals, onset: warm})
	}
	var work int64
	for _, j := range jobs {
		work += int64(j.evals)
		if j.kind == jobInControl {
			work += int64(j.onset)
		}
	}
	p := c.MaxFalse / float64(30*perDay) // the baselines' rate per evaluation
	outs := make([]outcome, len(jobs))
	errs := make([]error, len(jobs))
	next := atomic.Int64{}
	var done atomic.Int64
	var wg sync.WaitGroup
	for range max(c.Workers, 1) {
		wg.Go(func() {
			for {
				i := int(next.Add(1) - 1)
				if i >= len(jobs) || ctx.Err() != nil {
					return
				}
				rng := rand.New(rand.NewPCG(c.Seed, uint64(i)+1))
				outs[i], errs[i] = runJob(c, rules, jobs[i], driftEvals, p, rng)
				n := done.Add(int64(jobs[i].evals))
				if jobs[i].kind == jobInControl {
					n = done.Add(int64(jobs[i].onset))
				}
				if c.Progress != nil {
					c.Progress(n, work)
				}
			}
		})
	}
	wg.Wait()
	if err := ctx.Err(); err != nil {
		return Result{}, fmt.Errorf("run calibration: %w", err)
	}
	if err := errors.Join(errs...); err != nil {
		return Result{}, fmt.Errorf("run calibration: %w", err)
	}
	return summarise(c, rules, jobs, outs, perDay, p), nil
}

// runJob runs one replicate.
func runJob(c Config, rules []alert.Rule, j job, driftEvals int, p float64, rng *rand.Rand) (outcome, error) {
	ng := len(c.Scenario.Rates)
	var mean meanFunc
	switch j.kind {
	case jobInControl:
		mean = func(int, int) float64 { return 0 }
		j.evals += j.onset
	case jobShift:
		s := c.Shifts[j.shift]
		mean = func(g, e int) float64 {
			if g == 0 && e >= j.onset {
				return s
			}
			return 0
		}
	case jobDrift:
		mean = func(_, e int) float64 {
			if e < j.onset {
				return 0
			}
			return c.Drift * math.Min(float64(e-j.onset+1)/float64(driftEvals), 1)
		}
	}
	o := &observer1{
		job: j, kinds: j.kind, n: len(rules) + 2, bucketMin: c.Scenario.Bucket.Minutes(),
		base: newBaselines(c.Scenario.SD, ng, p, c.BaselineK),
	}
	o.init()
	if err := stream(c.Scenario, rules, j.evals, mean, rng, o); err != nil {
		return outcome{}, err
	}
	o.out.evals = int64(j.evals - j.onset)
	return o.out, nil
}

// observer1 follows one replicate's raises.
type observer1 struct {
	job       job
	kinds     int
	n         int
	bucketMin float64
	base      *baselines
	raised    []bool
	out       outcome
}

func (o *observer1) init() {
	o.raised = make([]bool, o.n)
	o.out.raises = make([]int64, o.n)
	o.out.delay = make([]float64, o.n)
	o.out.wrong = make([]bool, o.n)
	for i := range o.out.delay {
		o.out.delay[i] = math.NaN()
	}
}

func (o *observer1) observe(e int, conds [][]alert.Condition, recent []stats.Accumulator) bool {
	sh, cu := o.base.step(recent)
	nrule := len(conds)
	pending := false
	for i := range o.n {
		var raise, now bool
		var cond *alert.Condition
		switch {
		case i < nrule:
			for k := range conds[i] {
				if c := &conds[i][k]; c.Kind == alert.KindMeansDiverge && c.Phase == alert.PhaseRaise {
					now, cond = true, c
				}
			}
			raise = now && !o.raised[i]
			o.raised[i] = now
		case i == nrule:
			raise = sh
		default:
			raise = cu
		}
		if raise && e >= o.job.onset {
			o.out.raises[i]++
			if math.IsNaN(o.out.delay[i]) {
				o.out.delay[i] = float64(e-o.job.onset+1) * o.bucketMin
				if cond != nil && o.kinds == jobShift {
					o.out.wrong[i] = len(cond.Groups) == 0 || cond.Groups[0] != "G1"
				}
			}
		} else if raise && e < o.job.onset && math.IsNaN(o.out.delay[i]) {
			o.out.delay[i] = -1
		}
		if math.IsNaN(o.out.delay[i]) {
			pending = true
		}
	}
	return o.kinds == jobInControl || pending || e < o.job.onset
}

// summarise gathers the replicates in job order.
func summarise(c Config, rules []alert.Rule, jobs []job, outs []outcome, perDay int, p float64) Result {
	n := len(rules) + 2
	rates := make([]Rate, n)
	delays := make([][][]float64, n)
	wrong := make([][]int, n)
	drift := make([][]float64, n)
	for i := range n {
		delays[i] = make([][]float64, len(c.Shifts))
		wrong[i] = make([]int, len(c.Shifts))
	}
	for k, j := range jobs {
		o := outs[k]
		for i := range n {
			switch j.kind {
			case jobInControl:
				rates[i].Raises += o.raises[i]
				rates[i].Evaluations += o.evals
			case jobShift:
				if d := o.delay[i]; d != -1 {
					if math.IsNaN(d) {
						d = math.Inf(1)
					}
					delays[i][j.shift] = append(delays[i][j.shift], d)
					if o.wrong[i] {
						wrong[i][j.shift]++
					}
				}
			case jobDrift:
				if d := o.delay[i]; d != -1 {
					if math.IsNaN(d) {
						d = math.Inf(1)
					}
					drift[i] = append(drift[i], d)
				}
			}
		}
	}
	res := Result{Recommended: -1}
	for i := range n {
		r := rateOf(rates[i], perDay)
		ds := make([]Delay, len(c.Shifts))
		for s := range c.Shifts {
			ds[s] = delayOf(c.Shifts[s], delays[i][s], wrong[i][s])
		}
		dr := Drift{Runs: len(drift[i])}
		for _, d := range drift[i] {
			if !math.IsInf(d, 1) {
				dr.Raised++
			}
		}
		dr.Median = quantile(drift[i], 0.5)
		if r.Evaluations > 0 {
			perEval := float64(r.Raises) / float64(r.Evaluations)
			dr.Chance = float64(dr.Runs) * -math.Expm1(-perEval*float64(int(c.DriftOver/c.Scenario.Bucket)))
		}
		if i < len(rules) {
			res.Points = append(res.Points, Point{Alpha: rules[i].Alpha, Confirm: rules[i].Confirm, False: r, Delays: ds, Drift: dr})
			continue
		}
		b := Baseline{False: r, Delays: ds, Drift: dr}
		bl := newBaselines(c.Scenario.SD, len(c.Scenario.Rates), p, c.BaselineK)
		if i == len(rules) {
			b.Name, b.Settings = "per-group Shewhart chart of subgroup means", fmt.Sprintf("limits ±%.3f σ/√n", bl.l)
		} else {
			b.Name, b.Settings = "per-group CUSUM on its own target", fmt.Sprintf("k = %g, h = %.3f", bl.k, bl.h)
		}
		res.Baselines = append(res.Baselines, b)
	}
	res.Recommended = recommend(res.Points, c.Shifts, c.MaxFalse)
	return res
}

// recommend returns the most sensitive point meeting maxFalse: the smallest
// median time to raise at the smallest shift, then at the next, then the
// smallest 90th percentiles, then the fewest false raises.
func recommend(points []Point, shifts []float64, maxFalse float64) int {
	order := make([]int, len(shifts))
	for i := range order {
		order[i] = i
	}
	sort.SliceStable(order, func(a, b int) bool { return math.Abs(shifts[order[a]]) < math.Abs(shifts[order[b]]) })
	better := func(a, b *Point) bool {
		for _, s := range order {
			if x, y := a.Delays[s].Median, b.Delays[s].Median; x != y {
				return x < y
			}
		}
		for _, s := range order {
			if x, y := a.Delays[s].P90, b.Delays[s].P90; x != y {
				return x < y
			}
		}
		return a.False.Per30d < b.False.Per30d
	}
	best := -1
	for i := range points {
		if points[i].False.Per30d > maxFalse {
			continue
		}
		if best < 0 || better(&points[i], &points[best]) {
			best = i
		}
	}
	return best
}

func rateOf(r Rate, perDay int) Rate {
	if r.Evaluations == 0 {
		return r
	}
	per := float64(r.Evaluations)
	scale30 := float64(30*perDay) / per
	r.Per30d = float64(r.Raises) * scale30
	r.Per8h = float64(r.Raises) * float64(perDay) / 3 / per
	// Exact (Garwood 1936) Poisson interval: χ²(2x; 0.025)/2, χ²(2x+2; 0.975)/2.
	x := float64(r.Raises)
	if x > 0 {
		r.Low = distuv.ChiSquared{K: 2 * x}.Quantile(0.025) / 2 * scale30
	}
	r.High = distuv.ChiSquared{K: 2*x + 2}.Quantile(0.975) / 2 * scale30
	return r
}

func delayOf(shift float64, ds []float64, wrong int) Delay {
	d := Delay{Shift: shift, Runs: len(ds), Wrong: wrong}
	for _, x := range ds {
		if !math.IsInf(x, 1) {
			d.Raised++
		}
	}
	d.Median, d.P90 = quantile(ds, 0.5), quantile(ds, 0.9)
	return d
}

// quantile returns the q-quantile of xs (+Inf entries allowed) by the
// lower order statistic ⌈q·n⌉; +Inf for an empty xs.
func quantile(xs []float64, q float64) float64 {
	if len(xs) == 0 {
		return math.Inf(1)
	}
	s := slices.Clone(xs)
	slices.Sort(s)
	k := int(math.Ceil(q*float64(len(s)))) - 1
	return s[max(k, 0)]
}
