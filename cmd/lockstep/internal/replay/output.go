package replay

import (
	"bufio"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"strconv"
	"strings"
	"time"
	"unicode/utf8"

	"github.com/lockstep-project/lockstep/stats"
)

// Writer prints a replay: its rows as they come, then the summary.
type Writer interface {
	Row(r *Row) error
	Summary(s Summary) error
}

// timeLayout is how the table and CSV print times: UTC, to the
// millisecond when there are milliseconds.
const timeLayout = "2006-01-02T15:04:05.999Z07:00"

func fmtT(t time.Time) string { return t.UTC().Format(timeLayout) }

// Decimals returns how many decimals the table gives a mean: two more than
// the reference has (the values' own resolution, usually), 2 to 9.
func Decimals(ref stats.Decimal) int {
	s := ref.String()
	exp := 0
	if j := strings.IndexAny(s, "eE"); j >= 0 {
		exp, _ = strconv.Atoi(s[j+1:])
		s = s[:j]
	}
	d := 0
	if i := strings.IndexByte(s, '.'); i >= 0 {
		d = len(s) - i - 1
	}
	return min(max(d-exp+2, 2), 9)
}

// TableWriter prints an aligned table, one line per evaluation.
type TableWriter struct {
	w        *bufio.Writer
	groups   []string
	decimals int
	unit     string
	cols     []column
	header   bool
}

type column struct {
	title string
	width int
	left  bool
}

// NewTableWriter returns a table for the plan's groups, with means to the
// given decimals, in unit.
func NewTableWriter(w io.Writer, groups []string, decimals int, unit string) *TableWriter {
	t := &TableWriter{w: bufio.NewWriter(w), groups: groups, decimals: decimals, unit: unit}
	meanW := 6 + decimals
	t.cols = append(t.cols, column{"time", len(timeLayout) - 4, true})
	for _, g := range groups {
		t.cols = append(t.cols, column{g + " n", 5, false}, column{g + " mean", meanW, false})
	}
	t.cols = append(t.cols,
		column{"F", 9, false}, column{"p", 9, false}, column{"Welch F", 9, false}, column{"Welch p", 9, false},
		column{"ω²", 6, false}, column{"test", 7, true}, column{"diverging", 9, true}, column{"shift", meanW - 3, false},
		column{"alerts", 6, true})
	for i := range t.cols {
		t.cols[i].width = max(t.cols[i].width, utf8.RuneCountInString(t.cols[i].title))
	}
	return t
}

func (t *TableWriter) line(cells []string) error {
	var b strings.Builder
	for i, c := range cells {
		col := t.cols[i]
		pad := col.width - utf8.RuneCountInString(c)
		if i > 0 {
			b.WriteString("  ")
		}
		last := i == len(cells)-1
		switch {
		case col.left && last:
			b.WriteString(c)
		case col.left:
			b.WriteString(c)
			b.WriteString(strings.Repeat(" ", max(pad, 0)))
		default:
			b.WriteString(strings.Repeat(" ", max(pad, 0)))
			b.WriteString(c)
		}
	}
	_, err := t.w.WriteString(strings.TrimRight(b.String(), " ") + "\n")
	return err
}

func cell(v *float64, format string) string {
	if v == nil {
		return "-"
	}
	return fmt.Sprintf(format, *v)
}

// Row prints one evaluation (the header before the first).
func (t *TableWriter) Row(r *Row) error {
	if !t.header {
		t.header = true
		if t.unit != "" {
			if _, err := fmt.Fprintf(t.w, "means and shifts in %s; times UTC; each evaluation sees the values stamped before its time\n", t.unit); err != nil {
				return err
			}
		}
		titles := make([]string, len(t.cols))
		for i, c := range t.cols {
			titles[i] = c.title
		}
		if err := t.line(titles); err != nil {
			return err
		}
	}
	mf := "%." + strconv.Itoa(t.decimals) + "f"
	cells := []string{fmtT(r.Time)}
	for i := range t.groups {
		g := r.Groups[i]
		mean := cell(g.Mean, mf)
		if g.Silent && g.N > 0 {
			mean = "silent"
		}
		cells = append(cells, strconv.FormatInt(g.N, 10), mean)
	}
	div := r.Diverging
	if div == "" {
		div = "-"
	}
	test := r.Test
	if r.F == nil {
		test = "-"
	}
	cells = append(cells, cell(r.F, "%.4g"), cell(r.P, "%.3g"), cell(r.WelchF, "%.4g"), cell(r.WelchP, "%.3g"),
		cell(r.Omega2, "%.3f"), test, div, cell(r.Shift, "%+."+strconv.Itoa(t.decimals)+"f"), transitionText(r.Transitions))
	return t.line(cells)
}

func transitionText(ts []Transition) string {
	if len(ts) == 0 {
		return ""
	}
	parts := make([]string, len(ts))
	for i, tr := range ts {
		s := tr.Kind
		if tr.Key != "" {
			s += " " + tr.Key
		} else if tr.Group != "" {
			s += " " + tr.Group
		}
		parts[i] = s + ": " + tr.Phase
	}
	return strings.Join(parts, "; ")
}

// Summary prints the summary lines after the table.
func (t *TableWriter) Summary(s Summary) error {
	fmt.Fprintf(t.w, "\n%d evaluations from %s.\n", s.Evaluations, sourceText(s.Source))
	writeSummaryText(t.w, s)
	return t.w.Flush()
}

func sourceText(s string) string {
	if s == "buckets" {
		return "stored bucket states"
	}
	return "retained raw values"
}

func writeSummaryText(w io.Writer, s Summary) {
	first := "none"
	if s.FirstRaise != nil {
		first = fmtT(*s.FirstRaise)
	}
	fmt.Fprintf(w, "Alerts raised: %d; first raised: %s; time raised: %v.\n", s.Raised, first, time.Duration(s.TimeRaised))
	for _, n := range s.Notes {
		fmt.Fprintln(w, "Note: "+n)
	}
}

// CSVWriter prints one CSV record per evaluation after a header; the
// summary goes to a separate writer (standard error), since CSV has no
// place for it.
type CSVWriter struct {
	w      *csv.Writer
	groups []string
	side   io.Writer
	header bool
}

// NewCSVWriter returns a CSV writer for the plan's groups; the summary
// goes to side (nil: nowhere).
func NewCSVWriter(w io.Writer, groups []string, side io.Writer) *CSVWriter {
	return &CSVWriter{w: csv.NewWriter(w), groups: groups, side: side}
}

func csvNum(v *float64) string {
	if v == nil {
		return ""
	}
	return strconv.FormatFloat(*v, 'g', -1, 64)
}

// Row writes one record.
func (c *CSVWriter) Row(r *Row) error {
	if !c.header {
		c.header = true
		h := []string{"time", "window_from", "window_to"}
		for _, g := range c.groups {
			h = append(h, "n:"+g, "mean:"+g)
		}
		h = append(h, "grand_mean", "f", "p", "welch_f", "welch_p", "omega2", "test", "differ", "diverging", "shift", "transitions", "raised")
		if err := c.w.Write(h); err != nil {
			return err
		}
	}
	rec := []string{fmtT(r.Time), fmtT(r.From), fmtT(r.To)}
	for i := range c.groups {
		g := r.Groups[i]
		rec = append(rec, strconv.FormatInt(g.N, 10), csvNum(g.Mean))
	}
	test := r.Test
	if r.F == nil {
		test = ""
	}
	rec = append(rec, csvNum(r.GrandMean), csvNum(r.F), csvNum(r.P), csvNum(r.WelchF), csvNum(r.WelchP), csvNum(r.Omega2),
		test, strconv.FormatBool(r.Differ), r.Diverging, csvNum(r.Shift), transitionText(r.Transitions), strconv.FormatBool(r.Raised))
	return c.w.Write(rec)
}

// Summary flushes the records and prints the summary to the side writer.
func (c *CSVWriter) Summary(s Summary) error {
	c.w.Flush()
	if err := c.w.Error(); err != nil {
		return err
	}
	if c.side != nil {
		writeSummaryText(c.side, s)
	}
	return nil
}

// JSONWriter prints JSON lines: one object per evaluation (Row's fields),
// then one {"summary": …} object.
type JSONWriter struct {
	w   *bufio.Writer
	enc *json.Encoder
}

// NewJSONWriter returns a JSON-lines writer.
func NewJSONWriter(w io.Writer) *JSONWriter {
	b := bufio.NewWriter(w)
	return &JSONWriter{w: b, enc: json.NewEncoder(b)}
}

// Row writes one line.
func (j *JSONWriter) Row(r *Row) error {
	if r.Transitions == nil {
		r.Transitions = []Transition{}
	}
	return j.enc.Encode(r)
}

// Summary writes the summary line and flushes.
func (j *JSONWriter) Summary(s Summary) error {
	if err := j.enc.Encode(struct {
		Summary Summary `json:"summary"`
	}{s}); err != nil {
		return err
	}
	return j.w.Flush()
}
