package chart

import (
	"errors"
	"fmt"
	"image/color"
	"io"
	"math"
	"time"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// MinP is the floor of the p axis: smaller p-values are drawn at MinP.
const MinP = 1e-12

// DefaultMaxPoints is how many evaluations a Timeline keeps at most.
const DefaultMaxPoints = 1000

// Point is one evaluation on a Timeline. NaN marks a value that is not
// available (a silent group, a p that could not be computed).
type Point struct {
	Time         time.Time
	Mean         []float64 // by group
	Lower, Upper []float64 // confidence interval of each mean
	GrandMean    float64
	P, WelchP    float64
}

// Timeline is the chart of a replay. Add points in time order; when more
// than MaxPoints have come, it keeps every second one and from then on
// takes every second point offered (then every fourth, …), so the chart
// stays evenly spaced and its memory bounded.
type Timeline struct {
	Title      string
	Unit       string
	Groups     []string
	Confidence float64 // of the intervals, e.g. 0.95
	Alpha      float64 // the significance line
	Raised     [][2]time.Time
	MaxPoints  int // 0: DefaultMaxPoints

	points  []Point
	stride  int
	offered int
}

// Add offers one evaluation.
func (t *Timeline) Add(p Point) {
	if t.stride == 0 {
		t.stride = 1
	}
	max := t.MaxPoints
	if max <= 0 {
		max = DefaultMaxPoints
	}
	t.offered++
	if (t.offered-1)%t.stride != 0 {
		return
	}
	t.points = append(t.points, p)
	if len(t.points) >= max {
		kept := t.points[:0]
		for i := 0; i < len(t.points); i += 2 {
			kept = append(kept, t.points[i])
		}
		clear(t.points[len(kept):])
		t.points = kept
		t.stride *= 2
	}
}

// Len returns the number of points kept.
func (t *Timeline) Len() int { return len(t.points) }

// ErrEmpty: there is nothing to draw.
var ErrEmpty = errors.New("nothing to draw")

// WriteTo draws the chart as format ("png" or "svg") to w.
func (t *Timeline) WriteTo(w io.Writer, format string) error {
	if len(t.points) == 0 {
		return fmt.Errorf("draw timeline: %w: no evaluations", ErrEmpty)
	}
	dc, write, err := canvasFor(format, 27*vg.Centimeter, 19*vg.Centimeter)
	if err != nil {
		return err
	}
	top, err := t.meansPlot()
	if err != nil {
		return fmt.Errorf("draw timeline: %w", err)
	}
	bottom, err := t.pPlot()
	if err != nil {
		return fmt.Errorf("draw timeline: %w", err)
	}
	tiles := draw.Tiles{Rows: 2, Cols: 1, PadX: vg.Millimeter, PadY: 4 * vg.Millimeter,
		PadTop: 2 * vg.Millimeter, PadBottom: 2 * vg.Millimeter, PadLeft: 2 * vg.Millimeter, PadRight: 4 * vg.Millimeter}
	cs := plot.Align([][]*plot.Plot{{top}, {bottom}}, tiles, dc)
	top.Draw(cs[0][0])
	bottom.Draw(cs[1][0])
	return write(w)
}

func xOf(tm time.Time) float64 { return float64(tm.UnixNano()) / 1e9 }

func timeTicks(span time.Duration) plot.TimeTicks {
	f := "15:04"
	switch {
	case span >= 48*time.Hour:
		f = "01-02 15h"
	case span < 10*time.Minute:
		f = "15:04:05"
	}
	return plot.TimeTicks{Format: f}
}

func (t *Timeline) span() time.Duration {
	return t.points[len(t.points)-1].Time.Sub(t.points[0].Time)
}

// meansPlot is the upper panel.
func (t *Timeline) meansPlot() (*plot.Plot, error) {
	unit := ""
	if t.Unit != "" {
		unit = " (" + t.Unit + ")"
	}
	conf := t.Confidence
	if conf == 0 {
		conf = 0.95
	}
	p := basePlot(t.Title, "", fmt.Sprintf("group mean%s, %g %% interval", unit, 100*conf))
	p.X.Tick.Marker = timeTicks(t.span())
	p.Y.Tick.Marker = preciseTicks{}
	for g, name := range t.Groups {
		clr, glyph, dash := groupStyle(g)
		var xys plotter.XYs
		var errs plotter.YErrors
		for _, pt := range t.points {
			if g >= len(pt.Mean) || math.IsNaN(pt.Mean[g]) {
				continue
			}
			xys = append(xys, plotter.XY{X: xOf(pt.Time), Y: pt.Mean[g]})
			lo, hi := pt.Mean[g], pt.Mean[g]
			if g < len(pt.Lower) && !math.IsNaN(pt.Lower[g]) && !math.IsNaN(pt.Upper[g]) {
				lo, hi = pt.Lower[g], pt.Upper[g]
			}
			errs = append(errs, struct{ Low, High float64 }{pt.Mean[g] - lo, hi - pt.Mean[g]})
		}
		if len(xys) == 0 {
			continue
		}
		line, pts, err := plotter.NewLinePoints(xys)
		if err != nil {
			return nil, err
		}
		line.Color, line.Dashes, line.Width = clr, dash, vg.Points(1)
		pts.Color, pts.Shape, pts.Radius = clr, glyph, vg.Points(2.2)
		bars, err := plotter.NewYErrorBars(struct {
			plotter.XYs
			plotter.YErrors
		}{xys, errs})
		if err != nil {
			return nil, err
		}
		bars.Color, bars.Width, bars.CapWidth = clr, vg.Points(0.5), vg.Points(3)
		p.Add(bars, line, pts)
		p.Legend.Add(name, line, pts)
	}
	var grand plotter.XYs
	for _, pt := range t.points {
		if !math.IsNaN(pt.GrandMean) {
			grand = append(grand, plotter.XY{X: xOf(pt.Time), Y: pt.GrandMean})
		}
	}
	if len(grand) > 0 {
		l, err := plotter.NewLine(grand)
		if err != nil {
			return nil, err
		}
		l.Color, l.Width, l.Dashes = color.Gray{Y: 90}, vg.Points(2), []vg.Length{vg.Points(1), vg.Points(1.5)}
		p.Add(l)
		p.Legend.Add("grand mean", l)
	}
	return p, nil
}

// pPlot is the lower panel.
func (t *Timeline) pPlot() (*plot.Plot, error) {
	p := basePlot("", "time (UTC)", fmt.Sprintf("p (log scale; below %g drawn at %g)", MinP, MinP))
	p.X.Tick.Marker = timeTicks(t.span())
	p.Y.Scale = plot.LogScale{}
	p.Y.Tick.Marker = decadeTicks{}
	p.Y.Min, p.Y.Max = MinP, 1
	p.Legend.Top = false
	x0, x1 := xOf(t.points[0].Time), xOf(t.points[len(t.points)-1].Time)
	if x1 == x0 {
		x1 = x0 + 1
	}
	p.X.Min, p.X.Max = x0, x1
	for i, sp := range t.Raised {
		a, b := max(xOf(sp[0]), x0), min(xOf(sp[1]), x1)
		if b < a {
			continue
		}
		if b == a {
			b = a + (x1-x0)/500
		}
		poly, err := plotter.NewPolygon(plotter.XYs{{X: a, Y: MinP}, {X: b, Y: MinP}, {X: b, Y: 1}, {X: a, Y: 1}})
		if err != nil {
			return nil, err
		}
		poly.Color = color.RGBA{R: 255, G: 200, B: 170, A: 255}
		poly.LineStyle.Width = 0
		p.Add(poly)
		if i == 0 {
			p.Legend.Add("alert raised", poly)
		}
	}
	for k, series := range []struct {
		name string
		get  func(Point) float64
	}{{"p of F", func(pt Point) float64 { return pt.P }}, {"p of Welch F", func(pt Point) float64 { return pt.WelchP }}} {
		var xys plotter.XYs
		for _, pt := range t.points {
			v := series.get(pt)
			if math.IsNaN(v) {
				continue
			}
			xys = append(xys, plotter.XY{X: xOf(pt.Time), Y: min(max(v, MinP), 1)})
		}
		if len(xys) == 0 {
			continue
		}
		line, pts, err := plotter.NewLinePoints(xys)
		if err != nil {
			return nil, err
		}
		clr, glyph, dash := groupStyle(k)
		line.Color, line.Dashes, line.Width = clr, dash, vg.Points(1)
		pts.Color, pts.Shape, pts.Radius = clr, glyph, vg.Points(1.8)
		p.Add(line, pts)
		p.Legend.Add(series.name, line, pts)
	}
	if t.Alpha > 0 {
		l, err := plotter.NewLine(plotter.XYs{{X: x0, Y: t.Alpha}, {X: x1, Y: t.Alpha}})
		if err != nil {
			return nil, err
		}
		l.Color, l.Width, l.Dashes = color.RGBA{R: 180, A: 255}, vg.Points(1.5), []vg.Length{vg.Points(8), vg.Points(3)}
		p.Add(l)
		p.Legend.Add(fmt.Sprintf("significance %g", t.Alpha), l)
	}
	return p, nil
}
