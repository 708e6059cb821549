package main

import (
	"math"
	"slices"
	"time"

	"github.com/lockstep-project/lockstep/stats"
	"github.com/lockstep-project/lockstep/window"
)

// jsonQuantiles is one group's box of the live report ("quantiles"): the
// quartiles and the median of the values its window keeps, for the
// dashboard's box plots; the whiskers are the group's exact min and max of
// "groups". kept is how many values the quantiles rest on; n is how many
// the window holds. When kept < n the window keeps a sample (at most
// [defaults] sample per bucket and group, Vitter 1985 Algorithm R), so the
// quartiles are estimates from that sample: every bucket contributes
// equally many values at most, so a bucket with more values is slightly
// under-represented. null quartiles: no value kept.
type jsonQuantiles struct {
	Name   string   `json:"name"`
	N      int64    `json:"n"`
	Kept   int      `json:"kept"`
	Q1     *float64 `json:"q1"`
	Median *float64 `json:"median"`
	Q3     *float64 `json:"q3"`
}

// groupValues are the kept values of one analysed group, in the data's
// units.
type groupValues struct {
	name   string
	n      int64
	values []float64
}

// keptValues collects, for every group the evaluation analysed (not the
// silent ones), the values win keeps in the evaluated window, uncentred
// with ref. A time-based window is read bucket by bucket with
// Window.Bucket, which never changes a later result; a count-based one
// with Window.Buckets, which for such a window only reads its values. nil
// for a nil window.
func keptValues(win *window.Window, ev window.Evaluation, ref stats.Reference) []groupValues {
	if win == nil {
		return nil
	}
	names := win.Groups()
	idx := make([]int, len(names)) // group index → position in out, −1 silent
	var out []groupValues
	for g, name := range names {
		idx[g] = -1
		if g < len(ev.Counts) && !ev.Counts[g].Silent {
			idx[g] = len(out)
			out = append(out, groupValues{name: name, n: ev.Counts[g].N})
		}
	}
	if len(out) == 0 {
		return nil
	}
	cfg := win.Config()
	if cfg.Count > 0 {
		win.Buckets(func(_ time.Time, g int, _ stats.Accumulator, sample []float64) {
			if g < len(idx) && idx[g] >= 0 {
				gv := &out[idx[g]]
				for _, v := range sample {
					gv.values = append(gv.values, ref.Uncentre(v))
				}
			}
		})
		return out
	}
	if cfg.Bucket <= 0 || !ev.From.Before(ev.To) {
		return out
	}
	for start := ev.From; start.Before(ev.To); start = start.Add(cfg.Bucket) {
		for g := range names {
			if idx[g] < 0 {
				continue
			}
			_, sample, ok := win.Bucket(start, g)
			if !ok {
				continue
			}
			gv := &out[idx[g]]
			for _, v := range sample {
				gv.values = append(gv.values, ref.Uncentre(v))
			}
		}
	}
	return out
}

// groupQuantiles returns the box of each group; an empty array for none.
// It sorts the groups' values in place.
func groupQuantiles(groups []groupValues) []jsonQuantiles {
	out := make([]jsonQuantiles, 0, len(groups))
	for _, g := range groups {
		slices.Sort(g.values)
		q := jsonQuantiles{Name: g.name, N: g.n, Kept: len(g.values)}
		if len(g.values) > 0 {
			q.Q1 = num(quantile7(g.values, 0.25))
			q.Median = num(quantile7(g.values, 0.5))
			q.Q3 = num(quantile7(g.values, 0.75))
		}
		out = append(out, q)
	}
	return out
}

// quantile7 returns the p-quantile of the sorted values x by linear
// interpolation between order statistics, Hyndman & Fan (1996) definition
// 7 (R's default type): with h = (n − 1)p, x[⌊h⌋] + (h − ⌊h⌋)(x[⌊h⌋+1] −
// x[⌊h⌋]) (0-based). NaN for no values or p outside [0, 1].
func quantile7(x []float64, p float64) float64 {
	n := len(x)
	if n == 0 || !(p >= 0 && p <= 1) {
		return math.NaN()
	}
	h := float64(n-1) * p
	lo := int(math.Floor(h))
	if lo >= n-1 {
		return x[n-1]
	}
	return x[lo] + (h-float64(lo))*(x[lo+1]-x[lo])
}
