package plant_test

import (
	"math"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/cmd/lockstep/internal/plant"
)

// The event tests measure the effects from the generated values. A mean
// of n values with standard deviation σ is within z·σ/√n of its expectation
// but for a chance of 2·(1−Φ(z)); the tests use z = 4.5 (about 7 in a
// million per comparison), so they fail for a wrong generator, not by bad
// luck. Rounding to the instrument resolution r adds no bias and a variance
// of r²/12, which is negligible against every σ here.
const z = 4.5

// checkMean reports whether the mean of xs is within z standard errors of want.
func checkMean(t *testing.T, what string, xs []float64, want, sd float64) {
	t.Helper()
	if len(xs) < 30 {
		t.Fatalf("%s: only %d values", what, len(xs))
	}
	m, _ := meanSD(xs)
	tol := z * sd / math.Sqrt(float64(len(xs)))
	if math.Abs(m-want) > tol {
		t.Errorf("%s: mean %.4f of %d values, want %.4f ± %.4f", what, m, len(xs), want, tol)
	}
}

// checkSD reports whether the sample SD of xs is within z standard errors of
// want; the SD of a normal sample has a standard error of about σ/√(2(n−1)).
func checkSD(t *testing.T, what string, xs []float64, want float64) {
	t.Helper()
	_, s := meanSD(xs)
	tol := z * want / math.Sqrt(2*float64(len(xs)-1))
	if math.Abs(s-want) > tol {
		t.Errorf("%s: SD %.4f of %d values, want %.4f ± %.4f", what, s, len(xs), want, tol)
	}
}

// The coffee plant's L3 ramps up by 1.5 g from 5 to 15 minutes; the other
// lines stay at 500 g.
func TestShiftRamp(t *testing.T) {
	ms := generate(t, coffee(30*time.Minute))
	const sd = 0.8
	min := time.Minute
	checkMean(t, "L3 before the ramp", sample(t, ms, "fill-weight", "L3", 0, 5*min), 500, sd)
	// A window centred on the ramp's middle averages to its middle value.
	checkMean(t, "L3 mid-ramp", sample(t, ms, "fill-weight", "L3", 8*min, 12*min), 500.75, sd)
	checkMean(t, "L3 after the ramp", sample(t, ms, "fill-weight", "L3", 15*min, 30*min), 501.5, sd)
	checkSD(t, "L3 after the ramp", sample(t, ms, "fill-weight", "L3", 15*min, 30*min), sd)
	for _, g := range []string{"L1", "L2", "L4"} {
		checkMean(t, g+" after L3's ramp", sample(t, ms, "fill-weight", g, 15*min, 30*min), 500, sd)
	}
}

func TestShiftStep(t *testing.T) {
	sc := coffee(20 * time.Minute)
	sc.Characteristics = sc.Characteristics[:1]
	sc.Characteristics[0].Events = []plant.Event{
		{Kind: plant.Shift, Group: "L1", At: 10 * time.Minute, By: -2},
		{Kind: plant.Shift, Group: "L1", At: 15 * time.Minute, By: 2}, // back
	}
	ms := generate(t, sc)
	min := time.Minute
	checkMean(t, "L1 before", sample(t, ms, "fill-weight", "L1", 0, 10*min), 500, 0.8)
	checkMean(t, "L1 shifted", sample(t, ms, "fill-weight", "L1", 10*min, 15*min), 498, 0.8)
	checkMean(t, "L1 back", sample(t, ms, "fill-weight", "L1", 15*min, 20*min), 500, 0.8)
	// A step: the 30 s right after 10 minutes are shifted in full, the
	// 30 s before are not shifted at all.
	var before, after []float64
	for _, m := range ms {
		if m.Group != "L1" || m.Bad != "" {
			continue
		}
		off := m.Time.Sub(sc.Start)
		v, _ := valueOf(t, m)
		switch {
		case off >= 9*min+30*time.Second && off < 10*min:
			before = append(before, v)
		case off >= 10*min && off < 10*min+30*time.Second:
			after = append(after, v)
		}
	}
	checkMean(t, "L1 30 s before the step", before, 500, 0.8)
	checkMean(t, "L1 30 s after the step", after, 498, 0.8)
}

// The coffee plant's capping heads all drift together by +0.12 N·m over
// 4 h: every head moves, and they stay together.
func TestDrift(t *testing.T) {
	sc := coffee(4 * time.Hour)
	sc.Characteristics = sc.Characteristics[2:] // the other streams would not change
	ms := generate(t, sc)
	const sd = 0.04
	for _, g := range []string{"H1", "H2", "H3", "H4", "H5", "H6", "H7", "H8"} {
		// Mean over the first and the last 20 minutes: the ramp's value at
		// their middles, 10 min and 3 h 50 min.
		checkMean(t, g+" first 20 min", sample(t, ms, "cap-torque", g, 0, 20*time.Minute), 2.10+0.12*10/240, sd)
		checkMean(t, g+" last 20 min", sample(t, ms, "cap-torque", g, 220*time.Minute, 240*time.Minute), 2.10+0.12*230/240, sd)
		checkSD(t, g+" last 20 min", sample(t, ms, "cap-torque", g, 220*time.Minute, 240*time.Minute), sd)
	}
}

func TestDriftStep(t *testing.T) {
	sc := coffee(20 * time.Minute)
	sc.Characteristics = sc.Characteristics[:1]
	sc.Characteristics[0].Events = []plant.Event{{Kind: plant.Drift, At: 10 * time.Minute, By: 3}}
	ms := generate(t, sc)
	for _, g := range sc.Characteristics[0].Groups {
		checkMean(t, g+" before the drift", sample(t, ms, "fill-weight", g, 0, 10*time.Minute), 500, 0.8)
		checkMean(t, g+" after the drift", sample(t, ms, "fill-weight", g, 10*time.Minute, 20*time.Minute), 503, 0.8)
	}
}

// The coffee plant's J4 has three times the SD from 8 minutes on; its mean
// and the other jaws stay as they were.
func TestSpread(t *testing.T) {
	ms := generate(t, coffee(30*time.Minute))
	const sd = 0.6
	checkSD(t, "J4 before", sample(t, ms, "seal-temperature", "J4", 0, 8*time.Minute), sd)
	after := sample(t, ms, "seal-temperature", "J4", 8*time.Minute, 30*time.Minute)
	checkSD(t, "J4 after", after, 3*sd)
	checkMean(t, "J4 after", after, 182, 3*sd)
	for _, g := range []string{"J1", "J2", "J3", "J5", "J6"} {
		checkSD(t, g+" after J4's spread", sample(t, ms, "seal-temperature", g, 8*time.Minute, 30*time.Minute), sd)
	}
}

func TestSpreadRamp(t *testing.T) {
	sc := coffee(30 * time.Minute)
	sc.Characteristics = sc.Characteristics[1:2]
	sc.Characteristics[0].Rate = 10
	sc.Characteristics[0].Events = []plant.Event{{Kind: plant.Spread, Group: "J2", At: 10 * time.Minute, Duration: 10 * time.Minute, Factor: 0.5}}
	ms := generate(t, sc)
	// Mid-ramp the factor is 0.75 (its mean over a short symmetric window
	// is close to that), afterwards 0.5.
	checkSD(t, "J2 mid-ramp", sample(t, ms, "seal-temperature", "J2", 14*time.Minute, 16*time.Minute), 0.75*0.6)
	checkSD(t, "J2 after", sample(t, ms, "seal-temperature", "J2", 20*time.Minute, 30*time.Minute), 0.5*0.6)
}
