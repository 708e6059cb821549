package chart

import (
	"fmt"
	"image/color"
	"io"
	"math"
	"strconv"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
	"gonum.org/v1/plot/vg/vgsvg"
)

// Colours that stay apart in grey as well as in colour (dark to light),
// after the Okabe & Ito (2008) colour-blind-safe palette.
var palette = [...]color.RGBA{
	{0, 0, 0, 255},       // black
	{0, 114, 178, 255},   // blue
	{213, 94, 0, 255},    // vermilion
	{0, 158, 115, 255},   // bluish green
	{204, 121, 167, 255}, // reddish purple
	{86, 180, 233, 255},  // sky blue
	{230, 159, 0, 255},   // orange
}

// glyphs are the marker shapes, in the order groups take them.
var glyphs = [...]draw.GlyphDrawer{
	draw.CircleGlyph{}, draw.SquareGlyph{}, draw.TriangleGlyph{}, draw.CrossGlyph{},
	draw.PlusGlyph{}, draw.RingGlyph{}, draw.BoxGlyph{}, draw.PyramidGlyph{},
}

// dashes are the line patterns, in the order groups take them.
var dashes = [...][]vg.Length{
	nil,
	{vg.Points(6), vg.Points(2)},
	{vg.Points(2), vg.Points(2)},
	{vg.Points(6), vg.Points(2), vg.Points(2), vg.Points(2)},
	{vg.Points(10), vg.Points(3)},
	{vg.Points(1), vg.Points(3)},
}

// groupStyle returns the colour, marker and dash of the i-th group.
func groupStyle(i int) (color.Color, draw.GlyphDrawer, []vg.Length) {
	return palette[i%len(palette)], glyphs[i%len(glyphs)], dashes[i%len(dashes)]
}

// canvasFor returns a canvas of the format and a function that writes it.
func canvasFor(format string, w, h vg.Length) (draw.Canvas, func(io.Writer) error, error) {
	switch format {
	case "png":
		c := vgimg.NewWith(vgimg.UseWH(w, h), vgimg.UseDPI(120), vgimg.UseBackgroundColor(color.White))
		return draw.New(c), func(out io.Writer) error {
			_, err := vgimg.PngCanvas{Canvas: c}.WriteTo(out)
			return err
		}, nil
	case "svg":
		c := vgsvg.New(w, h)
		dc := draw.New(c)
		dc.SetColor(color.White)
		dc.Fill(dc.Rectangle.Path())
		return dc, func(out io.Writer) error {
			_, err := c.WriteTo(out)
			return err
		}, nil
	}
	return draw.Canvas{}, nil, fmt.Errorf("chart format %q: use png or svg", format)
}

// basePlot returns a plot with the common look.
func basePlot(title, x, y string) *plot.Plot {
	p := plot.New()
	p.Title.Text = title
	p.X.Label.Text = x
	p.Y.Label.Text = y
	p.Legend.Top = true
	p.Legend.Left = true
	p.Add(gridLines())
	return p
}

// preciseTicks are plot.DefaultTicks labelled with as many digits as the
// values need: the default labels of values near 500 with a spread of
// 0.05 all read "5e+02".
type preciseTicks struct{}

// Ticks returns the default ticks, relabelled.
func (preciseTicks) Ticks(lo, hi float64) []plot.Tick {
	ticks := plot.DefaultTicks{}.Ticks(lo, hi)
	for i := range ticks {
		if ticks[i].Label != "" {
			ticks[i].Label = strconv.FormatFloat(ticks[i].Value, 'g', 12, 64)
		}
	}
	return ticks
}

// decadeTicks label the powers of ten of a log axis ("1", "0.01",
// "1e-06"), every second one when there are more than eight decades.
type decadeTicks struct{}

// Ticks returns a tick at every power of ten in [lo, hi].
func (decadeTicks) Ticks(lo, hi float64) []plot.Tick {
	k0, k1 := int(math.Ceil(math.Log10(lo)-1e-9)), int(math.Floor(math.Log10(hi)+1e-9))
	every := 1
	if k1-k0 > 8 {
		every = 2
	}
	var out []plot.Tick
	for k := k1; k >= k0; k-- {
		t := plot.Tick{Value: math.Pow10(k)}
		if (k1-k)%every == 0 {
			t.Label = strconv.FormatFloat(t.Value, 'g', -1, 64)
		}
		out = append(out, t)
	}
	return out
}
