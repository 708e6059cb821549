package main

import (
	"bytes"
	"fmt"
	"math"
	"strings"
	"unicode/utf8"

	"github.com/lockstep-project/lockstep/stats"
)

// formatReport renders a report as aligned text for a terminal or a shift
// log. Means and shifts are printed to the same number of decimals, chosen
// from the within-group SD so that it shows three significant digits.
func formatReport(r stats.Report, info checkInfo) []byte {
	var b bytes.Buffer
	f := newFormatter(r)
	u := unitSuffix(info.Unit)
	t := r.Table

	fmt.Fprintf(&b, "lockstep check: %s — %d groups, %d values, centred on %s\n\n",
		info.Source, len(r.Groups), t.N, r.Reference.Decimal().String())
	fmt.Fprintf(&b, "VERDICT  %s\n\n", verdictText(r, info.Unit))

	ci := fmt.Sprintf("%s CI of mean", percent(r.Options.Confidence))
	rows := [][]string{{"group", "n", "mean", "SD", ci, "min", "max"}}
	for i, g := range r.Groups {
		ciText := "not available"
		if g.CIErr == nil {
			ciText = f.units(g.Lower) + " to " + f.units(g.Upper)
		}
		name := g.Name
		if info.Data != nil && i < len(info.Data.Groups) && info.Data.Groups[i].Sampled {
			name += " †"
		}
		rows = append(rows, []string{name, fmt.Sprint(g.N), f.units(g.Mean), f.sd(g.SD, g.N), ciText, f.units(g.Min), f.units(g.Max)})
	}
	section(&b, "Groups"+u, rows, "lrrrrrr")

	if t.K >= 2 {
		fText, pText := "not available", "not available"
		if r.TableErr == nil {
			fText, pText = sig(t.F, 4), pValue(t.P)
		}
		ms := "—"
		if t.DFWithin >= 1 {
			ms = sig(t.MSWithin, 5)
		}
		rows = [][]string{
			{"source", "df", "SS", "MS", "F", "p"},
			{"Between", sig(t.DFBetween, 6), sig(t.SSBetween, 6), sig(t.MSBetween, 5), fText, pText},
			{"Within", sig(t.DFWithin, 6), sig(t.SSWithin, 6), ms, "", ""},
			{"Total", sig(t.DFTotal, 6), sig(t.SSTotal, 6), "", "", ""},
		}
		section(&b, "One-way analysis of variance", rows, "lrrrrr")
		if t.DFWithin >= 1 && t.SSTotal > 0 {
			fmt.Fprintf(&b, "  R² %s   adjusted R² %s   ω² %s   residual SD %s%s\n\n",
				fixed(t.R2, 3), fixed(t.AdjR2, 3), fixed(t.Omega2, 3), f.sd(t.ResidualSD, 2), spaced(info.Unit))
		}
	}

	rows = [][]string{{"test", "statistic", "df", "p", "question"}}
	addF := func(name string, x *stats.FTest, q string) {
		if x == nil {
			rows = append(rows, []string{name, "not available", "", "", q})
			return
		}
		rows = append(rows, []string{name, "F = " + sig(x.F, 4), sig(x.DF1, 4) + ", " + sig(x.DF2, 4), pValue(x.P), q})
	}
	addChi := func(name, sym string, x *stats.ChiSquareTest, q string) {
		if x == nil {
			rows = append(rows, []string{name, "not available", "", "", q})
			return
		}
		rows = append(rows, []string{name, sym + " = " + sig(x.Statistic, 4), sig(x.DF, 4), pValue(x.P), q})
	}
	addF("Welch", r.Welch, "means, spreads not assumed equal")
	addChi("Kruskal–Wallis", "H", r.KruskalWallis, "locations, by ranks")
	addChi("Bartlett", "χ²", r.Bartlett, "spreads (sensitive to non-normality)")
	addF("Levene", r.Levene, "spreads, around means")
	addF("Brown–Forsythe", r.BrownForsythe, "spreads, around medians")
	section(&b, "Other tests", rows, "lrrrl")

	if len(r.Pairs) > 0 {
		conf := percent(r.Options.Confidence)
		rows = [][]string{{"a", "b", "b − a", "Tukey–Kramer " + conf + " interval", "Tukey p", "Games–Howell p", ""}}
		for _, p := range r.Pairs {
			iv, tp, gp, mark := "not available", "—", "—", ""
			if p.Tukey != nil {
				iv = f.signed(p.Tukey.Lower) + " to " + f.signed(p.Tukey.Upper)
				tp = pValue(p.Tukey.P)
				if p.Tukey.P < r.Options.Alpha {
					mark = "differ"
				}
			}
			if p.GamesHowell != nil {
				gp = pValue(p.GamesHowell.P)
				if p.GamesHowell.P < r.Options.Alpha && mark == "" {
					mark = "differ (G–H)"
				}
			}
			rows = append(rows, []string{r.Groups[p.A].Name, r.Groups[p.B].Name, f.signed(p.Diff), iv, tp, gp, mark})
		}
		section(&b, "Pairs"+u, rows, "llrrrrl")
	}

	if m := r.Means; m != nil {
		rows = [][]string{{"group", "mean − grand mean", "limit", "out"}}
		for _, d := range m.Groups {
			out := ""
			switch d.Direction {
			case 1:
				out = "HIGH ▲"
			case -1:
				out = "LOW ▼"
			}
			rows = append(rows, []string{r.Groups[d.Group].Name, f.signed(d.Deviation), "± " + f.units(d.HalfWidth), out})
		}
		section(&b, fmt.Sprintf("Analysis of means%s, grand mean %s, α = %s (Šidák-adjusted limits)", u, f.units(r.GrandMean), sig(m.Alpha, 3)), rows, "lrrl")
	}

	if s := r.Shift; s != nil {
		fmt.Fprintf(&b, "Minimum detectable shift: %s%s in any one group is detected by the F test with %s power at α = %s.\n\n",
			f.units(s.Largest), spaced(info.Unit), percent(s.Power), sig(s.Alpha, 3))
	}

	var notes []string
	if info.Data != nil {
		for _, g := range info.Data.Groups {
			if g.Sampled {
				notes = append(notes, fmt.Sprintf("† group %q: Levene, Brown–Forsythe and Kruskal–Wallis used a reproducible random sample of %d of its %d values; all other figures use every value",
					g.Name, len(g.Values), g.Acc.N))
			}
		}
		if info.Data.Inexact > 0 {
			notes = append(notes, fmt.Sprintf("%d values had too many digits to centre exactly and were converted as binary numbers first", info.Data.Inexact))
		}
	}
	notes = append(notes, r.Notes...)
	if len(notes) > 0 {
		b.WriteString("Notes\n")
		for _, n := range notes {
			fmt.Fprintf(&b, "  - %s\n", n)
		}
		b.WriteString("\n")
	}
	b.WriteString("lockstep is advisory: act on its findings under the plant's own procedures.\n")
	return b.Bytes()
}

// verdictText is the one-line decision: do the means differ, which group
// moved, which way and by how much, and whether a spread stands out.
func verdictText(r stats.Report, unit string) string {
	v := r.Verdict
	f := newFormatter(r)
	us := spaced(unit)
	if !v.Available {
		return "No verdict: " + v.NotAvailable + "."
	}
	var s strings.Builder
	test := fmt.Sprintf("%s = %s, %s", v.Test, sig(v.F, 4), pIs(v.P))
	switch {
	case v.Differ && len(v.Divergent) > 3:
		// Many groups apart: one short list instead of a sentence each.
		fmt.Fprintf(&s, "Means differ (%s). %d of %d groups stand apart from the rest:", test, len(v.Divergent), len(r.Groups))
		for i, d := range v.Divergent {
			sep := ","
			if i == 0 {
				sep = ""
			}
			fmt.Fprintf(&s, "%s %s %s%s", sep, d.Name, f.signed(d.Shift), us)
		}
		s.WriteString("; see the analysis of means.")
	case v.Differ && len(v.Divergent) > 0:
		fmt.Fprintf(&s, "Means differ (%s).", test)
		for _, d := range v.Divergent {
			// Printed as a size in the direction of the move: for a low
			// group the interval of the drop is (−upper, −lower).
			way, lo, hi := "high", d.Lower, d.Upper
			if d.Direction < 0 {
				way, lo, hi = "low", -d.Upper, -d.Lower
			}
			fmt.Fprintf(&s, " %s is %s by %s%s (%s CI %s to %s%s) against the other groups.",
				d.Name, way, f.units(math.Abs(d.Shift)), us, percent(r.Options.Confidence),
				f.units(lo), f.units(hi), us)
		}
	case v.Differ:
		fmt.Fprintf(&s, "Means differ (%s), but no single group is outside the analysis-of-means limits; see the pairs.", test)
	default:
		fmt.Fprintf(&s, "No evidence that the means differ (%s).", test)
		if r.Shift != nil {
			fmt.Fprintf(&s, " A shift of %s%s in any one group would be detected with %s power.",
				f.units(r.Shift.Largest), us, percent(r.Shift.Power))
		}
	}
	if sp := v.Spread; sp != nil {
		fmt.Fprintf(&s, " Spreads differ (Brown–Forsythe %s): the SD of %s is %s × the pooled SD", pIs(sp.P), sp.Name, sig(sp.Ratio, 3))
		if v.Test == "Welch F" {
			s.WriteString(", so Welch's F decides.")
		} else {
			s.WriteString(".")
		}
	}
	return s.String()
}

// formatter prints values in the data's units to a fixed number of decimals.
type formatter struct{ decimals int }

func newFormatter(r stats.Report) formatter {
	sd := r.Table.ResidualSD
	if !(sd > 0) {
		for _, g := range r.Groups {
			sd = math.Max(sd, g.SD)
		}
	}
	d := 4
	if sd > 0 && !math.IsInf(sd, 0) {
		d = 3 - int(math.Ceil(math.Log10(sd)))
	}
	return formatter{decimals: min(max(d, 0), 12)}
}

func (f formatter) units(v float64) string { return fmt.Sprintf("%.*f", f.decimals, v) }

func (f formatter) signed(v float64) string { return fmt.Sprintf("%+.*f", f.decimals, v) }

func (f formatter) sd(v float64, n int64) string {
	if n < 2 {
		return "—"
	}
	return fmt.Sprintf("%.*f", f.decimals, v)
}

// sig prints v with at most n significant digits, without trailing zeros.
func sig(v float64, n int) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "not available"
	}
	if v == math.Trunc(v) && math.Abs(v) < 1e15 {
		return fmt.Sprintf("%.0f", v)
	}
	return fmt.Sprintf("%.*g", n, v)
}

func fixed(v float64, decimals int) string { return fmt.Sprintf("%.*f", decimals, v) }

// pValue prints a p-value: four decimals down to 0.0001, then scientific.
func pValue(p float64) string {
	switch {
	case math.IsNaN(p):
		return "not available"
	case p == 0:
		return "< 1e-300"
	case p < 1e-4:
		return fmt.Sprintf("%.2e", p)
	}
	return fmt.Sprintf("%.4f", p)
}

// pIs prints "p = 0.0123", or "p < 1e-300" below the smallest p printed.
func pIs(p float64) string {
	if t := pValue(p); strings.HasPrefix(t, "<") {
		return "p " + t
	} else {
		return "p = " + t
	}
}

func percent(c float64) string { return sig(100*c, 4) + "%" }

func unitSuffix(unit string) string {
	if unit == "" {
		return ""
	}
	return " (" + unit + ")"
}

func spaced(unit string) string {
	if unit == "" {
		return ""
	}
	return " " + unit
}

// section writes a heading and an aligned table. align has one letter per
// column: 'l' left (names, words), 'r' right (numbers).
func section(b *bytes.Buffer, title string, rows [][]string, align string) {
	b.WriteString(title + "\n")
	var width []int
	for _, row := range rows {
		for i, c := range row {
			if i >= len(width) {
				width = append(width, 0)
			}
			width[i] = max(width[i], utf8.RuneCountInString(c))
		}
	}
	for _, row := range rows {
		var line strings.Builder
		for i, c := range row {
			pad := strings.Repeat(" ", width[i]-utf8.RuneCountInString(c))
			line.WriteString("  ")
			if i < len(align) && align[i] == 'l' {
				line.WriteString(c + pad)
			} else {
				line.WriteString(pad + c)
			}
		}
		b.WriteString(strings.TrimRight(line.String(), " ") + "\n")
	}
	b.WriteString("\n")
}
