package chart

import (
	"image/color"

	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
)

// gridLines is a light grid behind the data.
func gridLines() *plotter.Grid {
	g := plotter.NewGrid()
	g.Vertical.Color = color.Gray{Y: 220}
	g.Horizontal.Color = color.Gray{Y: 220}
	g.Vertical.Width, g.Horizontal.Width = vg.Points(0.4), vg.Points(0.4)
	return g
}
