package chart

import (
	"bytes"
	"errors"
	"math"
	"strings"
	"testing"
	"time"
)

func timeline(n int) *Timeline {
	t0 := time.Date(2026, 12, 1, 6, 0, 0, 0, time.UTC)
	tl := &Timeline{Title: "fill", Unit: "g", Groups: []string{"A", "B"}, Alpha: 0.01, MaxPoints: 64,
		Raised: [][2]time.Time{{t0.Add(20 * time.Minute), t0.Add(30 * time.Minute)}}}
	for i := range n {
		m := 500 + 0.01*math.Sin(float64(i)/7)
		tl.Add(Point{Time: t0.Add(time.Duration(i) * time.Minute), Mean: []float64{m, math.NaN()},
			Lower: []float64{m - 0.01, math.NaN()}, Upper: []float64{m + 0.01, math.NaN()}, GrandMean: m,
			P: math.Pow(10, -float64(i%20)), WelchP: math.NaN()})
	}
	return tl
}

// TestTimelineBounded: past MaxPoints the timeline thins to every second
// point, so it never holds more than MaxPoints, evenly spaced.
func TestTimelineBounded(t *testing.T) {
	tl := timeline(1000)
	if tl.Len() > 64 || tl.Len() < 32 {
		t.Fatalf("%d points kept of 1000, want 32 to 64", tl.Len())
	}
	step := tl.points[1].Time.Sub(tl.points[0].Time)
	for i := 2; i < len(tl.points); i++ {
		if d := tl.points[i].Time.Sub(tl.points[i-1].Time); d != step {
			t.Fatalf("uneven spacing: %v then %v", step, d)
		}
	}
}

// TestTimelineFormats: both formats draw; the SVG holds the labels, the
// shaded span's legend and a group with no values is left out without
// failing; an unknown format and an empty timeline are errors.
func TestTimelineFormats(t *testing.T) {
	tl := timeline(60)
	var png, svg bytes.Buffer
	if err := tl.WriteTo(&png, "png"); err != nil {
		t.Fatal(err)
	}
	if err := tl.WriteTo(&svg, "svg"); err != nil {
		t.Fatal(err)
	}
	if !bytes.HasPrefix(png.Bytes(), []byte("\x89PNG")) || png.Len() < 20_000 {
		t.Errorf("PNG: %d bytes", png.Len())
	}
	for _, l := range []string{"fill", "group mean (g), 95 % interval", "alert raised", "significance 0.01", "p of F", "A", "grand mean", "1e-06"} {
		if !strings.Contains(svg.String(), l) {
			t.Errorf("SVG lacks %q", l)
		}
	}
	if err := tl.WriteTo(&svg, "pdf"); err == nil {
		t.Error("pdf: want an error")
	}
	if err := (&Timeline{}).WriteTo(&svg, "svg"); !errors.Is(err, ErrEmpty) {
		t.Errorf("empty: %v", err)
	}
}

// TestBoxes: box plots with limits, one group without limits, and the
// error for a window without values.
func TestBoxes(t *testing.T) {
	b := &Boxes{Title: "fill", Subtitle: "F = 3.2", Unit: "g", GrandMean: 500, Groups: []BoxGroup{
		{Name: "A", Values: []float64{499.9, 500, 500.1, 500.2}, Lower: 499.95, Upper: 500.05},
		{Name: "B", Values: []float64{500.3, 500.4, 500.2}, Lower: math.NaN(), Upper: math.NaN(), Named: true},
		{Name: "C"},
	}}
	var svg bytes.Buffer
	if err := b.WriteTo(&svg, "svg"); err != nil {
		t.Fatal(err)
	}
	for _, l := range []string{"F = 3.2", "B (named)", "value (g)", "analysis-of-means decision limits", "grand mean"} {
		if !strings.Contains(svg.String(), l) {
			t.Errorf("SVG lacks %q", l)
		}
	}
	empty := &Boxes{Groups: []BoxGroup{{Name: "A"}}, GrandMean: math.NaN()}
	if err := empty.WriteTo(&svg, "png"); !errors.Is(err, ErrEmpty) {
		t.Errorf("no values: %v", err)
	}
}
