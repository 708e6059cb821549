package window

import (
	"errors"
	"fmt"
	"time"
)

// Defaults of Config's fields.
const (
	DefaultBucket      = time.Minute
	DefaultLength      = 30 * time.Minute
	DefaultLateness    = time.Minute
	DefaultSilentAfter = 10 * time.Minute
	DefaultSample      = 64
)

// Limits of Config's fields. Sample and Count are allocated up front (per
// group and bucket, or per group), so their limits bound the memory a
// mistyped setting can claim; MaxDuration keeps every sum of an event time
// and a duration inside int64 nanoseconds.
const (
	MaxSample   = 1 << 16
	MaxCount    = 1 << 20
	MaxDuration = time.Duration(1 << 62) // about 146 years
)

// ErrConfig is wrapped by every error Validate and New return.
var ErrConfig = errors.New("invalid window configuration")

// Config is the window of one characteristic. A zero field takes its
// default; Lateness, SilentAfter and Sample also take a negative value,
// which switches the feature off (as a negative KeepAlive does in net.Dialer).
type Config struct {
	// Bucket is the width of a bucket, the time slice whose per-group sums
	// are kept, merged and stored. Default 1 min. Narrower buckets follow
	// the stream more closely and cost memory: one bucket per Bucket of
	// Length for every group (see Sample).
	Bucket time.Duration

	// Length is the window length, a multiple of Bucket. Default 30 min.
	// The live evaluation covers the Length/Bucket buckets that end with
	// the bucket holding now, the open one included.
	Length time.Duration

	// Lateness is the allowed lateness: the watermark is the largest event
	// time seen minus Lateness, and a value whose bucket ended at or before
	// the watermark is late. Default 1 min; negative for none (the
	// watermark is the largest event time itself). It must be shorter than
	// Length. Up to Lateness/Bucket + 2 buckets are open at a time, and an
	// evaluation merges each of them separately, so its cost grows with
	// Lateness/Bucket, not with Length/Bucket.
	Lateness time.Duration

	// SilentAfter: a group whose newest value is this long before now drops
	// out of the analysis and is reported silent; so does a group with no
	// value in the window at all. Default 10 min; negative to report only
	// the groups with no value in the window. A time-based window knows a
	// group's newest value to its bucket (it keeps no times), and measures
	// from the end of that bucket, so it reports silence up to one Bucket
	// late, never early. SilentAfter longer than Length therefore acts as
	// Length.
	SilentAfter time.Duration

	// Sample is how many values are kept per group and bucket for the tests
	// that need the values themselves (Levene, Brown–Forsythe,
	// Kruskal–Wallis) and for box plots. Default 64; negative keeps none,
	// and those tests are then reported not available. At most MaxSample.
	//
	// Method: a reservoir per bucket and group (Vitter 1985, Algorithm R):
	// the first Sample values are kept; the n-th value after that replaces
	// kept value j when j < Sample, with j uniform on [0, n), so every
	// value of the bucket is kept with probability Sample/n. j comes from
	// SplitMix64 (Steele, Lea & Flood 2014) seeded with the bucket's start
	// and the group's index and advanced to n, so the sample is a function
	// of the bucket's values in arrival order only: no global random
	// source, the same sample in every run, and a restored bucket goes on
	// sampling as the original would have.
	//
	// Bound: the window's values of a group are the concatenation of its
	// buckets' samples, at most Sample × Length/Bucket values (1,920 with
	// the defaults), and every bucket reserves Sample × 8 bytes per group
	// whether or not the group fills it. Each bucket contributes
	// min(n, Sample) values, so when a group's rate changes within the
	// window, its quieter buckets weigh more in the sample than in the sums:
	// a stratified sample, not a uniform one over the window.
	Sample int

	// Keep is how long before the window's oldest bucket the buckets that
	// leave the window are kept, for SpanSums and EndedSums only (never for
	// Sums or Evaluate). A span of the window's own length that leaves out
	// the open bucket reaches one bucket before the window: with Keep of
	// one Bucket, a 30-minute span of a 30-minute window holds 30 whole
	// minutes. Default 0; a multiple of Bucket, at most MaxDuration. The
	// kept buckets cost what as many window buckets cost; they are not in
	// Buckets (so not restored after a restart until they are lived
	// again).
	Keep time.Duration

	// Count > 0 makes the window count-based: the last Count values of each
	// group, in arrival order, for slow lines; Bucket and Length are then
	// not used (but still validated). Zero: time-based. At most MaxCount.
	Count int
}

// withDefaults returns c with zero fields set to their defaults.
func (c Config) withDefaults() Config {
	if c.Bucket == 0 {
		c.Bucket = DefaultBucket
	}
	if c.Length == 0 {
		c.Length = DefaultLength
	}
	if c.Lateness == 0 {
		c.Lateness = DefaultLateness
	}
	if c.SilentAfter == 0 {
		c.SilentAfter = DefaultSilentAfter
	}
	if c.Sample == 0 {
		c.Sample = DefaultSample
	}
	return c
}

// Validate reports every field that is out of range, after zero fields have
// taken their defaults. Each error wraps ErrConfig and names the field and
// its value, e.g. "window length 1m30s is not a multiple of the bucket 1m0s".
func (c Config) Validate() error {
	c = c.withDefaults()
	var errs []error
	bad := func(format string, args ...any) {
		errs = append(errs, fmt.Errorf("%w: "+format, append([]any{ErrConfig}, args...)...))
	}
	switch {
	case c.Bucket < 0:
		bad("bucket %v is negative", c.Bucket)
	case c.Bucket > MaxDuration:
		bad("bucket %v exceeds the limit of %v", c.Bucket, MaxDuration)
	}
	switch {
	case c.Length < 0:
		bad("window length %v is negative", c.Length)
	case c.Length > MaxDuration:
		bad("window length %v exceeds the limit of %v", c.Length, MaxDuration)
	case c.Bucket > 0 && c.Length%c.Bucket != 0:
		bad("window length %v is not a multiple of the bucket %v", c.Length, c.Bucket)
	}
	switch {
	case c.Keep < 0:
		bad("keep %v is negative", c.Keep)
	case c.Keep > MaxDuration:
		bad("keep %v exceeds the limit of %v", c.Keep, MaxDuration)
	case c.Bucket > 0 && c.Keep%c.Bucket != 0:
		bad("keep %v is not a multiple of the bucket %v", c.Keep, c.Bucket)
	}
	if c.Length > 0 && c.Lateness >= c.Length {
		bad("allowed lateness %v is not shorter than the window length %v", c.Lateness, c.Length)
	}
	if c.SilentAfter > MaxDuration {
		bad("silent-after %v exceeds the limit of %v", c.SilentAfter, MaxDuration)
	}
	if c.Sample > MaxSample {
		bad("sample of %d values per group and bucket exceeds the limit of %d", c.Sample, MaxSample)
	}
	switch {
	case c.Count < 0:
		bad("count %d is negative: use 0 for a time-based window", c.Count)
	case c.Count > MaxCount:
		bad("count %d exceeds the limit of %d values per group", c.Count, MaxCount)
	}
	return errors.Join(errs...)
}
