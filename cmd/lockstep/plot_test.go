package main

import (
	"bytes"
	"image/png"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// checkPNG checks that the file is a PNG of a useful size with drawn
// content: many pixels that are not white, in several colours.
func checkPNG(t *testing.T, path string) {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(bytes.NewReader(b))
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	r := img.Bounds()
	if r.Dx() < 800 || r.Dy() < 500 {
		t.Errorf("%s: %v, want at least 800×500 pixels", path, r)
	}
	inked, colours := 0, map[[3]uint32]bool{}
	for y := r.Min.Y; y < r.Max.Y; y += 2 {
		for x := r.Min.X; x < r.Max.X; x += 2 {
			cr, cg, cb, _ := img.At(x, y).RGBA()
			if cr < 0xf000 || cg < 0xf000 || cb < 0xf000 {
				inked++
				colours[[3]uint32{cr >> 12, cg >> 12, cb >> 12}] = true
			}
		}
	}
	total := (r.Dx() / 2) * (r.Dy() / 2)
	if inked < total/50 || len(colours) < 8 {
		t.Errorf("%s: %d of %d sampled pixels inked in %d colours: the chart looks blank", path, inked, total, len(colours))
	}
}

// checkSVG checks that the file is an SVG holding the labels.
func checkSVG(t *testing.T, path string, labels ...string) {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	s := string(b)
	if len(b) < 10_000 || !strings.Contains(s, "<svg") {
		t.Fatalf("%s: %d bytes, want an SVG document of some size", path, len(b))
	}
	for _, l := range labels {
		if !strings.Contains(s, l) {
			t.Errorf("%s: no text %q in %s", path, l, textOf(s))
		}
	}
}

// TestReplayPlot: a replay draws its timeline as PNG and SVG, with the
// titles, the axis labels with units, the legend and the significance line.
func TestReplayPlot(t *testing.T) {
	path := replayFixture(t)
	dir := t.TempDir()
	for _, name := range []string{"replay.png", "replay.svg"} {
		out := filepath.Join(dir, name)
		code, _, errOut := runCmd(t, "replay", "--store", path, "--characteristic", "fill", "--json",
			"--from", "2026-12-01T06:10:00Z", "--to", "2026-12-01T06:50:00Z", "--step", "30s", "--plot", out)
		if code != 0 {
			t.Fatalf("exit %d: %s", code, errOut)
		}
		if strings.HasSuffix(name, ".png") {
			checkPNG(t, out)
			continue
		}
		checkSVG(t, out, "fill: replay 2026-12-01 06:10 to 2026-12-01 06:50", "group mean (g), 95 % interval", "time (UTC)",
			"p (log scale", "L1", "L2", "L3", "L4", "grand mean", "p of F", "p of Welch F", "significance 0.05")
	}
}

// TestPlotWindow: one window as box plots, PNG and SVG, annotated with F,
// p and the named group, with the analysis-of-means limits in the legend.
func TestPlotWindow(t *testing.T) {
	path := replayFixture(t)
	dir := t.TempDir()
	for _, name := range []string{"window.png", "window.svg"} {
		out := filepath.Join(dir, name)
		code, stdout, errOut := runCmd(t, "plot", "window", "--store", path, "--characteristic", "fill",
			"--at", "2026-12-01T06:48:00Z", "--output", out)
		if code != 0 {
			t.Fatalf("exit %d: %s", code, errOut)
		}
		if !strings.Contains(stdout, "named: L3") {
			t.Errorf("output %q should name L3 (it runs 0.04 g high from 06:40)", stdout)
		}
		if strings.HasSuffix(name, ".png") {
			checkPNG(t, out)
			continue
		}
		checkSVG(t, out, "fill: window 2026-12-01 06:19:00 to 06:48:00 (UTC)", "F = ", "named: L3", "value (g)", "group",
			"L1", "L3 (named)", "analysis-of-means decision limits", "grand mean")
	}
	code, _, errOut := runCmd(t, "plot", "window", "--store", path, "--characteristic", "fill", "--at", "2026-12-01T06:48:00Z")
	if code != 2 || !strings.Contains(errOut, "--output") {
		t.Errorf("without --output: exit %d, %q", code, errOut)
	}
}

// textOf lists the text elements of an SVG document, for a failure message.
func textOf(svg string) string {
	var out []string
	for _, part := range strings.Split(svg, "<text")[1:] {
		if i := strings.Index(part, ">"); i >= 0 {
			if j := strings.Index(part[i:], "</text>"); j >= 0 {
				out = append(out, part[i+1:i+j])
			}
		}
	}
	return strings.Join(out, " | ")
}
