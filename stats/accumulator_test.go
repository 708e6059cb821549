package stats

import (
	"math"
	"math/rand/v2"
	"testing"
)

// twoPass computes mean and M2 the textbook way, as an independent check:
// mean first, then the sum of squared deviations from it.
func twoPass(xs []float64) (mean, m2 float64) {
	for _, x := range xs {
		mean += x
	}
	mean /= float64(len(xs))
	for _, x := range xs {
		m2 += (x - mean) * (x - mean)
	}
	return mean, m2
}

func relErr(got, want float64) float64 {
	if got == want {
		return 0
	}
	return math.Abs(got-want) / math.Max(math.Abs(want), math.SmallestNonzeroFloat64)
}

func TestAccumulatorSmall(t *testing.T) {
	// Hand-checkable: 2, 4, 4, 4, 5, 5, 7, 9 has mean 5, M2 32 (SD 2 with n
	// divisor, a common textbook example; the arithmetic is checked here).
	var a Accumulator
	for _, x := range []float64{2, 4, 4, 4, 5, 5, 7, 9} {
		a.Add(x)
	}
	if a.N != 8 || a.Mean != 5 || a.M2 != 32 || a.Min != 2 || a.Max != 9 {
		t.Fatalf("got %+v, want N 8 mean 5 M2 32 min 2 max 9", a)
	}
	if v := a.Variance(); math.Abs(v-32.0/7) > 1e-15 {
		t.Errorf("variance %v, want 32/7", v)
	}
	var empty, one Accumulator
	one.Add(3)
	if empty.Variance() != 0 || one.Variance() != 0 || one.SD() != 0 {
		t.Errorf("variance of fewer than two values must be 0")
	}
}

// TestAccumulatorMergeProperty: splitting data into random parts, building
// one accumulator per part and merging them in random order gives the
// accumulator of the whole (N, Min, Max exactly; mean and M2 to rounding),
// which in turn agrees with the two-pass computation.
func TestAccumulatorMergeProperty(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for trial := range 200 {
		n := 1 + rng.IntN(2000)
		xs := make([]float64, n)
		scale := math.Pow(10, float64(rng.IntN(7)-3))
		for i := range xs {
			xs[i] = scale * (rng.NormFloat64() + 3)
		}
		var seq Accumulator
		for _, x := range xs {
			seq.Add(x)
		}
		// Random cut points, parts merged in a random order.
		var parts []Accumulator
		for start := 0; start < n; {
			end := min(n, start+1+rng.IntN(200))
			var p Accumulator
			for _, x := range xs[start:end] {
				p.Add(x)
			}
			parts = append(parts, p)
			start = end
		}
		parts = append(parts, Accumulator{}) // an empty part changes nothing
		rng.Shuffle(len(parts), func(i, j int) { parts[i], parts[j] = parts[j], parts[i] })
		var merged Accumulator
		for _, p := range parts {
			merged.Merge(p)
		}
		mean, m2 := twoPass(xs)
		for _, c := range []struct {
			name string
			a    Accumulator
		}{{"sequential", seq}, {"merged", merged}} {
			if c.a.N != int64(n) || c.a.Min != seq.Min || c.a.Max != seq.Max {
				t.Fatalf("trial %d %s: N/min/max %d %g %g, want %d %g %g", trial, c.name, c.a.N, c.a.Min, c.a.Max, n, seq.Min, seq.Max)
			}
			// Mean to 1e-13 relative; M2 to 1e-11 relative: rounding grows with
			// n for both algorithms, far below these bounds at n ≤ 2000.
			if e := relErr(c.a.Mean, mean); e > 1e-13 {
				t.Errorf("trial %d %s: mean relative error %g", trial, c.name, e)
			}
			if n > 1 {
				if e := relErr(c.a.M2, m2); e > 1e-11 {
					t.Errorf("trial %d %s: M2 relative error %g", trial, c.name, e)
				}
			}
		}
	}
}

func TestAccumulatorZeroAllocs(t *testing.T) {
	var a, b Accumulator
	b.Add(1)
	b.Add(2)
	x := 0.5
	if n := testing.AllocsPerRun(1000, func() { a.Add(x); x += 0.25 }); n != 0 {
		t.Errorf("Add allocates %v times per call", n)
	}
	if n := testing.AllocsPerRun(1000, func() { a.Merge(b) }); n != 0 {
		t.Errorf("Merge allocates %v times per call", n)
	}
}

var sinkAcc Accumulator
var sinkFloat float64

// BenchmarkSumBaseline is the floor the accumulator is compared with: a
// plain running sum over the same values.
func BenchmarkSumBaseline(b *testing.B) {
	xs := benchValues()
	var s float64
	b.ReportAllocs()
	for i := 0; b.Loop(); i++ {
		s += xs[i&1023]
	}
	sinkFloat = s
}

func BenchmarkAccumulatorAdd(b *testing.B) {
	xs := benchValues()
	var a Accumulator
	b.ReportAllocs()
	for i := 0; b.Loop(); i++ {
		a.Add(xs[i&1023])
	}
	sinkAcc = a
}

func BenchmarkAccumulatorMerge(b *testing.B) {
	xs := benchValues()
	parts := make([]Accumulator, 64)
	for i, x := range xs {
		parts[i%64].Add(x)
	}
	var a Accumulator
	b.ReportAllocs()
	for i := 0; b.Loop(); i++ {
		a.Merge(parts[i&63])
	}
	sinkAcc = a
}

func benchValues() []float64 {
	rng := rand.New(rand.NewPCG(3, 4))
	xs := make([]float64, 1024)
	for i := range xs {
		xs[i] = rng.NormFloat64()
	}
	return xs
}
