package calib

import (
	"math"

	"github.com/lockstep-project/lockstep/alert"
	"github.com/lockstep-project/lockstep/stats"
	"gonum.org/v1/gonum/stat/distuv"
)

// baselines are the two per-group textbook charts, on each group's
// subgroup (bucket) means against the group's own known target (the
// in-control mean, 0) with the SD known:
//
//   - a Shewhart chart of subgroup means (W. A. Shewhart, Economic Control
//     of Quality of Manufactured Product, 1931): a signal when
//     |mean − target| > L·σ/√n;
//   - a two-sided CUSUM (Page 1954) of z = (mean − target)/(σ/√n) with
//     reference k and decision interval h, restarted at zero after a
//     signal, as is common practice.
//
// L and h are set so that, in control, the g groups' charts together
// signal at the rate p per evaluation: L = Φ⁻¹(1 − p/(2g)) exactly for
// normal means, h by Siegmund's approximation for 2g one-sided charts of
// run length 2g/p (alert.CUSUMThreshold).
type baselines struct {
	sd     float64
	l      float64
	k, h   float64
	hi, lo []float64
}

func newBaselines(sd float64, groups int, p, k float64) *baselines {
	g := float64(groups)
	return &baselines{
		sd: sd,
		l:  distuv.UnitNormal.Quantile(1 - p/(2*g)),
		k:  k,
		h:  alert.CUSUMThreshold(k, 2*g/p),
		hi: make([]float64, groups), lo: make([]float64, groups),
	}
}

// step takes one evaluation's ended buckets and says whether each chart
// signals.
func (b *baselines) step(recent []stats.Accumulator) (shewhart, cusum bool) {
	for g, a := range recent {
		if a.N == 0 || g >= len(b.hi) {
			continue
		}
		z := a.Mean / (b.sd / math.Sqrt(float64(a.N)))
		if math.Abs(z) > b.l {
			shewhart = true
		}
		b.hi[g] = math.Max(0, b.hi[g]+z-b.k)
		b.lo[g] = math.Max(0, b.lo[g]-z-b.k)
		if b.hi[g] > b.h || b.lo[g] > b.h {
			cusum = true
			b.hi[g], b.lo[g] = 0, 0
		}
	}
	return shewhart, cusum
}
