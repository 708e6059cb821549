package ingest

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"reflect"
	"strconv"
	"strings"
	"testing"
	"testing/iotest"
	"unicode/utf8"

	"github.com/lockstep-project/lockstep/stats"
)

// fillRow is one coffee bag: filling line and fill weight in grams.
type fillRow struct{ line, grams string }

// coffeeFills are bags from four filling lines, interleaved as a line
// controller would log them.
var coffeeFills = []fillRow{
	{"L2", "250.4"}, {"L1", "249.8"}, {"L3", "251.1"}, {"L2", "250.0"},
	{"L4", "249.5"}, {"L1", "250.2"}, {"L3", "250.9"}, {"L1", "249.9"},
	{"L4", "249.7"}, {"L2", "250.6"}, {"L3", "251.3"}, {"L1", "250.1"},
}

// csvText writes rows below a header, joined by sep.
func csvText(header string, sep string, rows []fillRow) string {
	var b strings.Builder
	b.WriteString(header + "\n")
	for _, r := range rows {
		b.WriteString(r.line + sep + r.grams + "\n")
	}
	return b.String()
}

func mustRead(t *testing.T, input string, opt CSVOptions) *CSVResult {
	t.Helper()
	res, err := ReadCSV(strings.NewReader(input), opt)
	if err != nil {
		t.Fatalf("ReadCSV: %v", err)
	}
	return res
}

func mustReference(t *testing.T, s string) *stats.Reference {
	t.Helper()
	d, err := stats.ParseDecimal(s)
	if err != nil {
		t.Fatalf("ParseDecimal(%q): %v", s, err)
	}
	ref := stats.NewReference(d)
	return &ref
}

// expectedGroup is the straightforward computation that the accumulators
// are checked against: two passes over the raw values.
type expectedGroup struct {
	name               string
	raw                []float64
	mean, m2, min, max float64
}

func expectGroups(t *testing.T, rows []fillRow) []expectedGroup {
	t.Helper()
	var groups []expectedGroup
	pos := map[string]int{}
	for _, r := range rows {
		x, err := strconv.ParseFloat(r.grams, 64)
		if err != nil {
			t.Fatal(err)
		}
		i, ok := pos[r.line]
		if !ok {
			i = len(groups)
			pos[r.line] = i
			groups = append(groups, expectedGroup{name: r.line})
		}
		groups[i].raw = append(groups[i].raw, x)
	}
	for i := range groups {
		g := &groups[i]
		sum := 0.0
		g.min, g.max = math.Inf(1), math.Inf(-1)
		for _, x := range g.raw {
			sum += x
			g.min, g.max = math.Min(g.min, x), math.Max(g.max, x)
		}
		g.mean = sum / float64(len(g.raw))
		for _, x := range g.raw {
			g.m2 += (x - g.mean) * (x - g.mean)
		}
	}
	return groups
}

func near(a, b, tol float64) bool { return math.Abs(a-b) <= tol }

// checkAgainst compares res with the straightforward computation on rows,
// with values centred on offset.
func checkAgainst(t *testing.T, res *CSVResult, rows []fillRow, offset float64) {
	t.Helper()
	want := expectGroups(t, rows)
	if len(res.Groups) != len(want) {
		t.Fatalf("%d groups, want %d", len(res.Groups), len(want))
	}
	if res.Rows != int64(len(rows)) {
		t.Errorf("Rows = %d, want %d", res.Rows, len(rows))
	}
	const tol = 1e-9 // grams; the data have one decimal, rounding is ~1e-13
	for i, w := range want {
		g := res.Groups[i]
		if g.Name != w.name {
			t.Errorf("group %d is %q, want %q (first-appearance order)", i, g.Name, w.name)
			continue
		}
		if g.Acc.N != int64(len(w.raw)) {
			t.Errorf("%s: N = %d, want %d", w.name, g.Acc.N, len(w.raw))
		}
		if !near(g.Acc.Mean+offset, w.mean, tol) {
			t.Errorf("%s: mean %v + %v, want %v", w.name, g.Acc.Mean, offset, w.mean)
		}
		if !near(g.Acc.M2, w.m2, tol) {
			t.Errorf("%s: M2 = %v, want %v", w.name, g.Acc.M2, w.m2)
		}
		if !near(g.Acc.Min+offset, w.min, tol) || !near(g.Acc.Max+offset, w.max, tol) {
			t.Errorf("%s: min, max = %v, %v (+%v), want %v, %v", w.name, g.Acc.Min, g.Acc.Max, offset, w.min, w.max)
		}
		if g.Sampled || len(g.Values) != len(w.raw) {
			t.Errorf("%s: %d values kept (sampled %v), want all %d", w.name, len(g.Values), g.Sampled, len(w.raw))
			continue
		}
		for j, x := range w.raw {
			if !near(g.Values[j]+offset, x, tol) {
				t.Errorf("%s: value %d = %v + %v, want %v", w.name, j, g.Values[j], offset, x)
			}
		}
	}
}

func TestReadCSVCoffeeLines(t *testing.T) {
	res := mustRead(t, csvText("line,fill_g", ",", coffeeFills), CSVOptions{})
	if res.GroupColumn != "line" || res.ValueColumn != "fill_g" {
		t.Errorf("columns %q, %q, want line, fill_g", res.GroupColumn, res.ValueColumn)
	}
	// The reference is the first value read, 250.4 g: it centres to exactly 0.
	if v, exact, err := res.Reference.CentreString("250.4"); err != nil || v != 0 || !exact {
		t.Errorf("Reference.CentreString(first value) = %v, %v, %v; want exactly 0", v, exact, err)
	}
	if v, _, err := res.Reference.CentreString("251.4"); err != nil || v != 1 {
		t.Errorf("Reference.CentreString(251.4) = %v, %v; want 1", v, err)
	}
	if res.Inexact != 0 {
		t.Errorf("Inexact = %d, want 0 for one-decimal weights", res.Inexact)
	}
	checkAgainst(t, res, coffeeFills, 250.4)
}

func TestReadCSVGivenReference(t *testing.T) {
	res := mustRead(t, csvText("line,fill_g", ",", coffeeFills), CSVOptions{Reference: mustReference(t, "250")})
	if v, _, err := res.Reference.CentreString("250"); err != nil || v != 0 {
		t.Errorf("Reference.CentreString(250) = %v, %v; want 0", v, err)
	}
	checkAgainst(t, res, coffeeFills, 250)
}

func TestReadCSVColumnSelection(t *testing.T) {
	var b strings.Builder
	b.WriteString("Timestamp,Line,Operator,Fill_g,fill_G\n")
	for i, r := range coffeeFills {
		fmt.Fprintf(&b, "2025-03-04T06:%02d:00,%s,op%d,%s,%d\n", i, r.line, i%3, r.grams, 1000+i)
	}
	input := b.String()
	for _, c := range []struct{ group, value string }{
		{"Line", "Fill_g"}, // exact names
		{"line", "4"},      // case-insensitive name, number
		{"2", "Fill_g"},    // number, exact name that beats a case-insensitive match
		{" LINE ", "4"},    // option trimmed
	} {
		t.Run(c.group+"/"+c.value, func(t *testing.T) {
			res := mustRead(t, input, CSVOptions{Group: c.group, Value: c.value})
			if res.GroupColumn != "Line" || res.ValueColumn != "Fill_g" {
				t.Errorf("columns %q, %q, want Line, Fill_g", res.GroupColumn, res.ValueColumn)
			}
			checkAgainst(t, res, coffeeFills, 250.4)
		})
	}
	// Default columns are the first and second: here timestamp and line, so
	// the line names are not numbers.
	_, err := ReadCSV(strings.NewReader(input), CSVOptions{})
	if !errors.Is(err, stats.ErrSyntax) || !strings.Contains(err.Error(), `column 2 ("Line"): "L2" is not a number`) {
		t.Errorf("default columns: err = %v, want L2 is not a number in column 2", err)
	}
}

func TestReadCSVSeparators(t *testing.T) {
	for _, c := range []struct {
		name string
		sep  rune
	}{{"comma", ','}, {"semicolon", ';'}, {"tab", '\t'}, {"pipe", '|'}} {
		t.Run(c.name, func(t *testing.T) {
			s := string(c.sep)
			res := mustRead(t, csvText("line"+s+"fill_g", s, coffeeFills), CSVOptions{Separator: c.sep})
			checkAgainst(t, res, coffeeFills, 250.4)
		})
	}
	// An empty field between tabs stays a field: the value is column 3.
	res := mustRead(t, csvText("line\tnote\tfill_g", "\t\t", coffeeFills), CSVOptions{Separator: '\t', Value: "3"})
	if res.ValueColumn != "fill_g" {
		t.Errorf("value column %q, want fill_g", res.ValueColumn)
	}
	checkAgainst(t, res, coffeeFills, 250.4)
}

func TestReadCSVLayout(t *testing.T) {
	rows := coffeeFills[:4]
	for _, c := range []struct{ name, input string }{
		{"BOM", "\uFEFFline,fill_g\nL2,250.4\nL1,249.8\nL3,251.1\nL2,250.0\n"},
		{"BOM quoted header", "\uFEFF\"line\",\"fill_g\"\nL2,250.4\nL1,249.8\nL3,251.1\nL2,250.0\n"},
		{"CRLF", "line,fill_g\r\nL2,250.4\r\nL1,249.8\r\nL3,251.1\r\nL2,250.0\r\n"},
		{"no final newline", "line,fill_g\nL2,250.4\nL1,249.8\nL3,251.1\nL2,250.0"},
		{"blank lines", "\nline,fill_g\n\nL2,250.4\nL1,249.8\n\n\nL3,251.1\nL2,250.0\n\n"},
		{"spaces and quotes", " line , fill_g \n L2 , 250.4\n\"L1\", \"249.8\"\n\" L3 \",251.1 \nL2,\t250.0\n"},
		{"extra fields", "line,fill_g,operator\nL2,250.4,anna\nL1,249.8\nL3,251.1,ben,late\nL2,250.0,anna\n"},
	} {
		t.Run(c.name, func(t *testing.T) {
			res := mustRead(t, c.input, CSVOptions{Group: "line", Value: "fill_g"})
			if res.GroupColumn != "line" || res.ValueColumn != "fill_g" {
				t.Errorf("columns %q, %q, want line, fill_g", res.GroupColumn, res.ValueColumn)
			}
			checkAgainst(t, res, rows, 250.4)
		})
	}
}

func TestReadCSVInexact(t *testing.T) {
	// A balance that logs 41 significant digits: more than the 38 that
	// stats centres exactly, so the value is centred in binary arithmetic.
	const long = "250.12345678901234567890123456789012345678"
	res := mustRead(t, "line,fill_g\nL1,250.1\nL2,"+long+"\nL1,250.3\n", CSVOptions{})
	if res.Inexact != 1 || res.Rows != 3 {
		t.Errorf("Inexact = %d of %d rows, want 1 of 3", res.Inexact, res.Rows)
	}
	x, _ := strconv.ParseFloat(long, 64)
	if got := res.Groups[1].Values[0]; !near(got, x-250.1, 1e-12) {
		t.Errorf("inexact value centred to %v, want %v", got, x-250.1)
	}
}

func TestReadCSVOneGroup(t *testing.T) {
	// Fewer than two groups is for the analysis to report, not an error.
	res := mustRead(t, "line,fill_g\nL1,250.1\nL1,250.3\n", CSVOptions{})
	if len(res.Groups) != 1 || res.Groups[0].Acc.N != 2 {
		t.Fatalf("groups %+v, want one group of 2", res.Groups)
	}
}

// sequenceCSV is one group "H1" (a sealing head) with the values 0..n−1.
func sequenceCSV(n int) string {
	var b strings.Builder
	b.WriteString("head,seal_temp\n")
	for i := range n {
		fmt.Fprintf(&b, "H1,%d\n", i)
	}
	return b.String()
}

func TestReadCSVKeepAll(t *testing.T) {
	for _, c := range []struct {
		n, keep     int
		wantSampled bool
	}{{999, 1000, false}, {1000, 1000, false}, {1001, 1000, true}} {
		res := mustRead(t, sequenceCSV(c.n), CSVOptions{Keep: c.keep})
		g := res.Groups[0]
		if g.Acc.N != int64(c.n) || g.Sampled != c.wantSampled || len(g.Values) != min(c.n, c.keep) {
			t.Errorf("n %d, keep %d: N %d, sampled %v, %d values; want N %d, sampled %v, %d values",
				c.n, c.keep, g.Acc.N, g.Sampled, len(g.Values), c.n, c.wantSampled, min(c.n, c.keep))
		}
		if cap(g.Values) > c.keep {
			t.Errorf("n %d, keep %d: capacity %d beyond keep", c.n, c.keep, cap(g.Values))
		}
		if !g.Sampled {
			for i, v := range g.Values {
				if v != float64(i) {
					t.Fatalf("n %d: value %d = %v, want all values in file order", c.n, i, v)
				}
			}
		}
	}
}

func TestReadCSVReservoirSample(t *testing.T) {
	const n, keep = 10000, 1000
	input := sequenceCSV(n)
	res := mustRead(t, input, CSVOptions{Keep: keep})
	g := res.Groups[0]
	if !g.Sampled || g.Acc.N != n || len(g.Values) != keep {
		t.Fatalf("sampled %v, N %d, %d values; want a sample of %d from %d", g.Sampled, g.Acc.N, len(g.Values), keep, n)
	}
	// The reference is the first value, 0, so the centred values are the
	// integers themselves. A sample holds distinct ones, each from the file.
	seen := map[float64]bool{}
	sum := 0.0
	var perBlock [10]int
	for _, v := range g.Values {
		if v != math.Trunc(v) || v < 0 || v >= n || seen[v] {
			t.Fatalf("sample holds %v: not a distinct value of the file", v)
		}
		seen[v] = true
		sum += v
		perBlock[int(v)/1000]++
	}
	// Drawing 1000 of 0..9999 without replacement, the sample mean has
	// expectation 4999.5 and standard error
	//   σ/√n · √((N−n)/(N−1)),  σ² = (N²−1)/12,
	// = 2886.8/31.62 · 0.9487 ≈ 86.6. ±450 is 5.2 standard errors: a uniform
	// sampler lands outside with probability below 1e-6, while keeping the
	// first or last values (means 499.5, 9499.5) or favouring late values
	// (mean near 9000) is far outside.
	if mean := sum / keep; math.Abs(mean-4999.5) > 450 {
		t.Errorf("sample mean %.1f, want 4999.5 ± 450", mean)
	}
	// The mean alone misses a sampler that keeps both ends. Each block of
	// 1000 consecutive values should hold about 100 of the sample; the count
	// is hypergeometric with standard deviation ≈ 9, and 55..145 is 5 of
	// them.
	for i, c := range perBlock {
		if c < 55 || c > 145 {
			t.Errorf("values %d..%d: %d in the sample, want 100 ± 45", 1000*i, 1000*i+999, c)
		}
	}

	again := mustRead(t, input, CSVOptions{Keep: keep})
	if !reflect.DeepEqual(again.Groups[0].Values, g.Values) {
		t.Error("a second read of the same file kept a different sample")
	}
}

func TestReadCSVSampleIndependentOfOtherGroups(t *testing.T) {
	// H1 alone, and H1 interleaved with H2 and preceded by H3: H1 keeps the
	// same sample, because each group draws from its own generator.
	var alone, mixed strings.Builder
	alone.WriteString("head,seal_temp\n")
	mixed.WriteString("head,seal_temp\nH3,5\n")
	for i := range 3000 {
		fmt.Fprintf(&alone, "H1,%d\n", i)
		fmt.Fprintf(&mixed, "H1,%d\n", i)
		if i%3 == 0 {
			fmt.Fprintf(&mixed, "H2,%d\n", i)
		}
	}
	opt := CSVOptions{Keep: 100, Reference: mustReference(t, "0")}
	a := mustRead(t, alone.String(), opt)
	m := mustRead(t, mixed.String(), opt)
	if m.Groups[1].Name != "H1" {
		t.Fatalf("group 1 is %q, want H1", m.Groups[1].Name)
	}
	if !reflect.DeepEqual(a.Groups[0].Values, m.Groups[1].Values) {
		t.Error("H1's sample changed when other groups were added to the file")
	}
	if h2 := m.Groups[2]; h2.Name != "H2" || !h2.Sampled || h2.Acc.N != 1000 || len(h2.Values) != 100 {
		t.Errorf("H2: %q sampled %v, N %d, %d values; want a sample of 100 from 1000", h2.Name, h2.Sampled, h2.Acc.N, len(h2.Values))
	}
}

func TestReadCSVErrors(t *testing.T) {
	errBoom := errors.New("disk gone")
	cases := []struct {
		name   string
		input  string
		reader io.Reader // instead of input
		opt    CSVOptions
		line   int // want InputError.Line
		col    int // want InputError.Column
		is     error
		msg    []string // substrings of the message
	}{
		{name: "empty", input: "", is: ErrNoData,
			msg: []string{"file is empty: expected a header row and data rows"}},
		{name: "BOM only", input: "\uFEFF", is: ErrNoData, msg: []string{"file is empty"}},
		{name: "blank lines only", input: "\n\n\r\n", is: ErrNoData, msg: []string{"file is empty"}},
		{name: "header only", input: "line,fill_g\n", line: 1, is: ErrNoData,
			msg: []string{"line 1: header only, no data rows"}},
		{name: "header only after blank lines", input: "\n\nline,fill_g\n\n", line: 3, is: ErrNoData,
			msg: []string{"line 3: header only"}},
		{name: "missing column", input: "line,fill_g\nL1,250.1\n", opt: CSVOptions{Value: "weight"},
			line: 1, is: ErrColumn,
			msg: []string{`no column "weight" in header: have "line", "fill_g"`, "--value"}},
		{name: "missing group column", input: "line,fill_g\nL1,250.1\n", opt: CSVOptions{Group: "jaw"},
			line: 1, is: ErrColumn, msg: []string{`no column "jaw"`, "--group"}},
		{name: "number beyond width", input: "line,fill_g\nL1,250.1\n", opt: CSVOptions{Value: "5"},
			line: 1, is: ErrColumn, msg: []string{"no column 5", `2 columns: "line", "fill_g"`}},
		{name: "default beyond width", input: "line\nL1\n",
			line: 1, is: ErrColumn, msg: []string{"no column 2", "1 column:", "--value"}},
		{name: "column zero", input: "line,fill_g\nL1,250.1\n", opt: CSVOptions{Group: "0"},
			line: 1, is: ErrColumn, msg: []string{"--group 0: column numbers start at 1"}},
		{name: "ambiguous name", input: "line,Fill,fill\nL1,250.1,250.2\n", opt: CSVOptions{Value: "FILL"},
			line: 1, is: ErrColumn, msg: []string{`"FILL" matches 2 header columns (2, 3)`}},
		{name: "duplicate name", input: "line,fill,fill\nL1,250.1,250.2\n", opt: CSVOptions{Value: "fill"},
			line: 1, is: ErrColumn, msg: []string{`"fill" matches 2 header columns (2, 3)`}},
		{name: "same column", input: "line,fill_g\nL1,250.1\n", opt: CSVOptions{Group: "line", Value: "1"},
			line: 1, col: 1, is: ErrColumn, msg: []string{`line 1, column 1 ("line"): selected by both --group and --value`}},
		{name: "wrong separator", input: "line;fill_g\nL1;250.1\n", opt: CSVOptions{Value: "fill_g"},
			line: 1, is: ErrColumn, msg: []string{`have "line;fill_g"`, "is the separator ';'?"}},
		{name: "wide header", input: "c1,c2,c3,c4,c5,c6,c7,c8,c9,c10,c11,c12,c13,c14,c15,c16,c17,c18,c19,c20,c21,c22,c23\nL1,1\n",
			opt: CSVOptions{Value: "fill_g"}, line: 1, is: ErrColumn, msg: []string{`"c19", "c20" and 3 more;`}},
		{name: "short row, unnamed column", input: ",\nL1,250.1\nL2\n", line: 3, is: ErrShortRow,
			msg: []string{"line 3: 1 field, need column 2; complete the row"}},
		{name: "short row", input: "line,fill_g\nL1,250.1\n\nL2\n", line: 4, is: ErrShortRow,
			msg: []string{`line 4: 1 field, need column 2 ("fill_g")`}},
		{name: "short row, group column", input: "fill_g,x,line\n250.1,a,L1\n250.2\n",
			opt: CSVOptions{Group: "line", Value: "fill_g"}, line: 3, is: ErrShortRow,
			msg: []string{`line 3: 1 field, need column 3 ("line")`}},
		{name: "empty group", input: "line,fill_g\nL1,250.1\n ,250.2\n", line: 3, col: 1, is: ErrEmptyField,
			msg: []string{`line 3, column 1 ("line"): empty group name`}},
		{name: "empty value", input: "line,fill_g\nL1,250.1\nL2,\n", line: 3, col: 2, is: ErrEmptyField,
			msg: []string{`line 3, column 2 ("fill_g"): empty value`}},
		{name: "decimal comma", input: "line;fill_g\nL1;250.1\nL2;12,5\n", opt: CSVOptions{Separator: ';'},
			line: 3, col: 2, is: stats.ErrSyntax,
			msg: []string{`line 3, column 2 ("fill_g"): "12,5" is not a number (use '.' as the decimal separator)`}},
		{name: "decimal comma quoted", input: "line,fill_g\nL1,\"250,1\"\n",
			line: 2, col: 2, is: stats.ErrSyntax, msg: []string{`"250,1" is not a number (use '.'`}},
		{name: "not a number", input: "line,fill_g\nL1,250.1\nL2,abc\n", line: 3, col: 2, is: stats.ErrSyntax,
			msg: []string{`line 3, column 2 ("fill_g"): "abc" is not a number`, "--value"}},
		{name: "first value not a number", input: "line,fill_g\nL1,n/a\n", line: 2, col: 2, is: stats.ErrSyntax,
			msg: []string{`line 2, column 2 ("fill_g"): "n/a" is not a number`}},
		{name: "NaN", input: "line,fill_g\nL1,250.1\nL2,NaN\n", line: 3, col: 2, is: stats.ErrNotFinite,
			msg: []string{`line 3, column 2 ("fill_g"): "NaN" is not a finite number`}},
		{name: "infinity", input: "line,fill_g\nL1,250.1\nL2,-Inf\n", line: 3, col: 2, is: stats.ErrNotFinite,
			msg: []string{`"-Inf" is not a finite number`}},
		{name: "first value infinite", input: "line,fill_g\nL1,+Inf\n", line: 2, col: 2, is: stats.ErrNotFinite,
			msg: []string{`"+Inf" is not a finite number`}},
		{name: "out of range", input: "line,fill_g\nL1,250.1\nL2,1e999999\n", line: 3, col: 2, is: stats.ErrOutOfRange,
			msg: []string{`line 3, column 2 ("fill_g"): "1e999999" is out of range`}},
		{name: "sums overflow", input: "line,fill_g\nL1,0\nL2,1e200\nL1,1\nL2,-1e200\n", line: 5, col: 2, is: stats.ErrOutOfRange,
			msg: []string{`line 5, column 2 ("fill_g"): "-1e200" is out of range: the sums of group "L2" overflow`}},
		{name: "bare quote", input: "line,fill_g\nL1,250.1\nL2,25\"0.2\n", line: 3, is: csv.ErrBareQuote,
			msg: []string{"line 3: malformed CSV", "double quotes"}},
		{name: "unclosed quote", input: "line,fill_g\nL1,250.1\nL2,\"250.2\nL3,250.3\n", line: 4, is: csv.ErrQuote,
			msg: []string{"line 4: malformed CSV", "starts on line 3"}},
		{name: "quote in header", input: "line,fi\"ll\nL1,250.1\n", line: 1, is: csv.ErrBareQuote,
			msg: []string{"line 1: malformed CSV"}},
		{name: "too many groups", input: "line,fill_g\nL1,1\nL2,2\nL1,3\nL3,4\nL4,5\n", opt: CSVOptions{MaxGroups: 3},
			line: 6, col: 1, is: ErrTooManyGroups,
			msg: []string{`line 6, column 1 ("line"): group "L4" would be group number 4, over the limit of 3`, "--group"}},
		{name: "read failure", reader: io.MultiReader(strings.NewReader("line,fill_g\nL1,250.1\n"), iotest.ErrReader(errBoom)),
			line: 2, is: errBoom, msg: []string{"line 2: cannot read past this line: disk gone"}},
		{name: "read failure at once", reader: iotest.ErrReader(errBoom), is: errBoom,
			msg: []string{"cannot read the input: disk gone"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			r := c.reader
			if r == nil {
				r = strings.NewReader(c.input)
			}
			res, err := ReadCSV(r, c.opt)
			if err == nil {
				t.Fatalf("no error; result %+v", res)
			}
			if res != nil {
				t.Errorf("result %+v returned with the error", res)
			}
			var ie *InputError
			if !errors.As(err, &ie) {
				t.Fatalf("%v is %T, not an *InputError", err, err)
			}
			if ie.Line != c.line || ie.Column != c.col {
				t.Errorf("line %d, column %d; want %d, %d (%v)", ie.Line, ie.Column, c.line, c.col, err)
			}
			if !errors.Is(err, c.is) {
				t.Errorf("%v does not wrap %v", err, c.is)
			}
			for _, m := range c.msg {
				if !strings.Contains(err.Error(), m) {
					t.Errorf("message %q does not contain %q", err, m)
				}
			}
			if strings.ContainsAny(err.Error(), "\r\n") {
				t.Errorf("message %q is not one line", err)
			}
		})
	}
}

func TestReadCSVOptionErrors(t *testing.T) {
	input := csvText("line,fill_g", ",", coffeeFills)
	for _, opt := range []CSVOptions{{Keep: -1}, {MaxGroups: -5}, {Separator: '"'}, {Separator: '\n'}, {Separator: utf8.RuneError}} {
		res, err := ReadCSV(strings.NewReader(input), opt)
		if res != nil || !errors.Is(err, ErrOption) {
			t.Errorf("options %+v: %v, %v; want an ErrOption error", opt, res, err)
		}
	}
}

func TestReadCSVLongTextShortened(t *testing.T) {
	long := "x" + strings.Repeat("é", 200) // byte 40 is inside a letter: the cut must move back
	_, err := ReadCSV(strings.NewReader("line,fill_g\nL1,"+long+"\n"), CSVOptions{})
	if !errors.Is(err, stats.ErrSyntax) {
		t.Fatalf("err = %v, want a syntax error", err)
	}
	if n := strings.Count(err.Error(), "é"); n != 19 || !strings.Contains(err.Error(), `"xé`) || !strings.Contains(err.Error(), "é…") {
		t.Errorf("message %q has %d of the 200 letters é; want the text cut to 40 bytes, between letters", err, n)
	}
}
