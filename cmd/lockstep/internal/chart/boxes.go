package chart

import (
	"fmt"
	"image/color"
	"io"
	"math"

	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
)

// BoxGroup is one group of a Boxes chart.
type BoxGroup struct {
	Name   string
	Values []float64 // the group's values in the window (or a sample of them)
	// Lower and Upper are the analysis-of-means decision limits of the
	// group; NaN when not available.
	Lower, Upper float64
	Named        bool // the analysis named this group as diverging
}

// Boxes is the chart of one window: a box plot per group (median,
// quartiles, whiskers to the furthest values within 1.5 interquartile
// ranges, points beyond; Tukey 1977), the grand mean and each group's
// analysis-of-means decision limits (Ott 1967).
type Boxes struct {
	Title     string
	Subtitle  string // e.g. "F = 12.3, p = 1.2e-05; L3 diverges by +0.21 g"
	Unit      string
	Groups    []BoxGroup
	GrandMean float64 // NaN when not available
}

// WriteTo draws the chart as format ("png" or "svg") to w.
func (b *Boxes) WriteTo(w io.Writer, format string) error {
	any := false
	for _, g := range b.Groups {
		any = any || len(g.Values) > 0
	}
	if !any {
		return fmt.Errorf("draw box plots: %w: no values in the window", ErrEmpty)
	}
	dc, write, err := canvasFor(format, 24*vg.Centimeter, 15*vg.Centimeter)
	if err != nil {
		return err
	}
	unit := ""
	if b.Unit != "" {
		unit = " (" + b.Unit + ")"
	}
	title := b.Title
	if b.Subtitle != "" {
		title += "\n" + b.Subtitle
	}
	p := basePlot(title, "group", "value"+unit)
	p.Legend.Left = false
	p.Y.Tick.Marker = preciseTicks{}
	names := make([]string, len(b.Groups))
	const width = 0.5
	for i, g := range b.Groups {
		names[i] = g.Name
		if g.Named {
			names[i] += " (named)"
		}
		if len(g.Values) == 0 {
			continue
		}
		clr, glyph, _ := groupStyle(i)
		box, err := plotter.NewBoxPlot(vg.Points(28), float64(i), plotter.Values(g.Values))
		if err != nil {
			return fmt.Errorf("draw box plots: group %q: %w", g.Name, err)
		}
		box.BoxStyle.Color, box.MedianStyle.Color, box.WhiskerStyle.Color = clr, clr, clr
		box.MedianStyle.Width = vg.Points(2)
		box.GlyphStyle.Color, box.GlyphStyle.Shape = clr, glyph
		p.Add(box)
		if math.IsNaN(g.Lower) || math.IsNaN(g.Upper) {
			continue
		}
		for k, y := range []float64{g.Lower, g.Upper} {
			l, err := plotter.NewLine(plotter.XYs{{X: float64(i) - width, Y: y}, {X: float64(i) + width, Y: y}})
			if err != nil {
				return fmt.Errorf("draw box plots: %w", err)
			}
			l.Color, l.Width, l.Dashes = color.RGBA{R: 180, A: 255}, vg.Points(1.5), []vg.Length{vg.Points(5), vg.Points(2)}
			p.Add(l)
			if i == 0 && k == 0 {
				p.Legend.Add("analysis-of-means decision limits", l)
			}
		}
	}
	if !math.IsNaN(b.GrandMean) {
		l, err := plotter.NewLine(plotter.XYs{{X: -width, Y: b.GrandMean}, {X: float64(len(b.Groups)-1) + width, Y: b.GrandMean}})
		if err != nil {
			return fmt.Errorf("draw box plots: %w", err)
		}
		l.Color, l.Width, l.Dashes = color.Gray{Y: 60}, vg.Points(1.2), []vg.Length{vg.Points(1), vg.Points(2)}
		p.Add(l)
		p.Legend.Add("grand mean", l)
	}
	p.NominalX(names...)
	p.Draw(dc)
	return write(w)
}
