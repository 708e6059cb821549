package ingest

import (
	"bufio"
	"encoding/csv"
	"errors"
	"fmt"
	"hash/fnv"
	"io"
	"math"
	"math/rand/v2"
	"strconv"
	"strings"
	"unicode"
	"unicode/utf8"

	"github.com/lockstep-project/lockstep/stats"
)

// Defaults of CSVOptions.
const (
	DefaultKeep      = 100000
	DefaultMaxGroups = 5000
)

// sampleSeed is the fixed first seed word of every group's sampling
// generator; the second word is a hash of the group name. Changing it changes
// which values a sampled group keeps.
const sampleSeed uint64 = 0x6c6f636b73746570

// utf8BOM is the byte order mark that spreadsheet programs put at the start
// of a UTF-8 CSV file.
const utf8BOM = "\uFEFF"

// Sentinel errors wrapped by *InputError (values also wrap stats.ErrSyntax,
// stats.ErrNotFinite or stats.ErrOutOfRange, and malformed CSV wraps the
// *csv.ParseError of encoding/csv).
var (
	ErrNoData        = errors.New("no data")         // empty input, or a header without data rows
	ErrColumn        = errors.New("no such column")  // a group or value column the header does not have
	ErrShortRow      = errors.New("row too short")   // a row without the group or value column
	ErrEmptyField    = errors.New("empty field")     // an empty group name or value
	ErrTooManyGroups = errors.New("too many groups") // more groups than CSVOptions.MaxGroups
	ErrOption        = errors.New("invalid option")  // a CSVOptions field out of its domain
)

// InputError reports input that cannot be used: where it is and what is
// wrong. Its message is one line, e.g.
//
//	line 17, column 2 ("fill_g"): "12,5" is not a number (use '.' as the decimal separator)
type InputError struct {
	Line       int    // 1-based line of the input; 0 when the error concerns the input as a whole
	Column     int    // 1-based field number; 0 when the error concerns a whole row or the header
	ColumnName string // header name of Column, if it has one
	Msg        string // what is wrong and what to do
	Err        error  // sentinel or underlying error, for errors.Is and errors.As
}

func (e *InputError) Error() string {
	var b strings.Builder
	if e.Line > 0 {
		fmt.Fprintf(&b, "line %d", e.Line)
	}
	if e.Column > 0 {
		if b.Len() > 0 {
			b.WriteString(", ")
		}
		fmt.Fprintf(&b, "column %d", e.Column)
		b.WriteString(quotedName(e.ColumnName))
	}
	if b.Len() > 0 {
		b.WriteString(": ")
	}
	b.WriteString(e.Msg)
	return b.String()
}

// Unwrap returns the sentinel or underlying error.
func (e *InputError) Unwrap() error { return e.Err }

// CSVOptions says how to read a table of measurements.
type CSVOptions struct {
	// Group and Value select the column of group names and the column of
	// measurements: by header name (exact match first, then case-insensitive)
	// or by 1-based column number. Defaults "1" and "2".
	Group, Value string
	// Separator between fields; default ','. ';' and '\t' are common in plant
	// exports.
	Separator rune
	// Keep is how many values per group are kept in GroupData.Values for the
	// tests that need them (Levene, Brown–Forsythe, Kruskal–Wallis); 0 means
	// DefaultKeep. A larger group keeps a uniform random sample of Keep
	// values (reservoir sampling, Vitter 1985, Algorithm R), drawn with a
	// fixed seed so that runs are reproducible.
	Keep int
	// MaxGroups is the most distinct group names accepted; 0 means
	// DefaultMaxGroups. More usually means the group column is the wrong one.
	MaxGroups int
	// Reference is what values are centred on; nil means the first value read.
	Reference *stats.Reference
}

// GroupData is one group read from the file.
type GroupData struct {
	Name    string
	Acc     stats.Accumulator // every value, centred on the reference
	Values  []float64         // centred values kept: all of them, or the sample
	Sampled bool              // true when Values is a sample of Acc.N values
}

// CSVResult is what ReadCSV found.
type CSVResult struct {
	GroupColumn, ValueColumn string      // header names of the columns used
	Groups                   []GroupData // in order of first appearance
	Reference                stats.Reference
	Rows                     int64 // data rows read, one value each
	Inexact                  int64 // values that could not be centred exactly (binary arithmetic was used)
}

// ReadCSV reads a header row and data rows of group name and value from r.
//
// Fields are trimmed of surrounding white space, blank lines are skipped and
// a UTF-8 byte order mark at the start is ignored. Every value is centred on
// the reference and added to its group; memory per group is bounded by
// opt.Keep values. The sample a group keeps depends only on that group's
// values in file order, not on the rows of other groups.
//
// The first row that cannot be used ends the read: ReadCSV then returns nil
// and an *InputError. Fewer than two groups is not an error here.
func ReadCSV(r io.Reader, opt CSVOptions) (*CSVResult, error) {
	opt, err := opt.withDefaults()
	if err != nil {
		return nil, err
	}

	br := bufio.NewReader(r)
	if b, err := br.Peek(len(utf8BOM)); err == nil && string(b) == utf8BOM {
		_, _ = br.Discard(len(utf8BOM)) // cannot fail: Peek has buffered the bytes
	}
	cr := csv.NewReader(br)
	cr.Comma = opt.Separator
	cr.FieldsPerRecord = -1
	cr.ReuseRecord = true
	// With a white-space separator, trimming leading space in the reader
	// would swallow empty fields; fields are trimmed below in any case.
	cr.TrimLeadingSpace = !unicode.IsSpace(opt.Separator)

	header, err := cr.Read()
	if err == io.EOF {
		return nil, &InputError{Msg: "file is empty: expected a header row and data rows", Err: ErrNoData}
	}
	if err != nil {
		return nil, readError(err, 0)
	}
	headerLine, _ := cr.FieldPos(0)
	names := make([]string, len(header))
	for i, h := range header {
		names[i] = strings.TrimSpace(h)
	}
	gi, err := findColumn(names, opt.Group, "--group", headerLine, opt.Separator)
	if err != nil {
		return nil, err
	}
	vi, err := findColumn(names, opt.Value, "--value", headerLine, opt.Separator)
	if err != nil {
		return nil, err
	}
	if gi == vi {
		return nil, &InputError{Line: headerLine, Column: gi + 1, ColumnName: names[gi],
			Msg: "selected by both --group and --value; choose two different columns", Err: ErrColumn}
	}

	res := &CSVResult{GroupColumn: names[gi], ValueColumn: names[vi]}
	var ref stats.Reference
	haveRef := opt.Reference != nil
	if haveRef {
		ref = *opt.Reference
	}
	index := make(map[string]int)
	var rngs []*rand.Rand // sampling generator of each group, parallel to res.Groups
	lastLine := headerLine
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, readError(err, lastLine)
		}
		line, _ := cr.FieldPos(0)
		lastLine = line
		if need := max(gi, vi); len(rec) <= need {
			missing := min(gi, vi)
			if missing < len(rec) {
				missing = need
			}
			return nil, &InputError{Line: line,
				Msg: fmt.Sprintf("%s, need column %d%s; complete the row or remove it",
					plural(len(rec), "field"), missing+1, quotedName(names[missing])),
				Err: ErrShortRow}
		}

		name := strings.TrimSpace(rec[gi])
		if name == "" {
			return nil, fieldError(cr, gi, names, "empty group name; fill in the group or remove the row", ErrEmptyField)
		}
		text := strings.TrimSpace(rec[vi])
		if text == "" {
			return nil, fieldError(cr, vi, names, "empty value; fill in the measurement or remove the row", ErrEmptyField)
		}
		if !haveRef {
			d, err := stats.ParseDecimal(text)
			if err != nil {
				return nil, valueError(cr, vi, names, text, err)
			}
			ref, haveRef = stats.NewReference(d), true
		}
		v, exact, err := ref.CentreString(text)
		if err != nil {
			return nil, valueError(cr, vi, names, text, err)
		}

		// The sums are updated on a copy first, so that a value that makes
		// them overflow is refused before anything is changed.
		g, ok := index[name]
		var acc stats.Accumulator
		if ok {
			acc = res.Groups[g].Acc
		}
		acc.Add(v)
		if !finite(acc.Mean) || !finite(acc.M2) {
			return nil, fieldError(cr, vi, names, fmt.Sprintf(
				"%q is out of range: the sums of group %q overflow with it; check the value and its unit",
				short(text), short(name)), stats.ErrOutOfRange)
		}
		if !ok {
			if len(res.Groups) == opt.MaxGroups {
				return nil, fieldError(cr, gi, names, fmt.Sprintf(
					"group %q would be group number %d, over the limit of %d; check that --group names the column that identifies the production group",
					short(name), opt.MaxGroups+1, opt.MaxGroups), ErrTooManyGroups)
			}
			name = strings.Clone(name) // do not keep the whole line alive
			g = len(res.Groups)
			index[name] = g
			res.Groups = append(res.Groups, GroupData{Name: name})
			rngs = append(rngs, rand.New(rand.NewPCG(sampleSeed, nameHash(name))))
		}
		res.Groups[g].add(acc, v, opt.Keep, rngs[g])
		res.Rows++
		if !exact {
			res.Inexact++
		}
	}
	if res.Rows == 0 {
		return nil, &InputError{Line: headerLine,
			Msg: "header only, no data rows; expected rows with a group and a value below the header", Err: ErrNoData}
	}
	res.Reference = ref
	return res, nil
}

// withDefaults fills in the defaults and checks the options.
func (o CSVOptions) withDefaults() (CSVOptions, error) {
	o.Group, o.Value = strings.TrimSpace(o.Group), strings.TrimSpace(o.Value)
	if o.Group == "" {
		o.Group = "1"
	}
	if o.Value == "" {
		o.Value = "2"
	}
	if o.Separator == 0 {
		o.Separator = ','
	}
	switch {
	case o.Keep < 0:
		return o, fmt.Errorf("ingest: Keep is %d: %w: use 0 for the default of %d, or a positive number", o.Keep, ErrOption, DefaultKeep)
	case o.Keep == 0:
		o.Keep = DefaultKeep
	}
	switch {
	case o.MaxGroups < 0:
		return o, fmt.Errorf("ingest: MaxGroups is %d: %w: use 0 for the default of %d, or a positive number", o.MaxGroups, ErrOption, DefaultMaxGroups)
	case o.MaxGroups == 0:
		o.MaxGroups = DefaultMaxGroups
	}
	if s := o.Separator; s == '"' || s == '\r' || s == '\n' || s == utf8.RuneError || !utf8.ValidRune(s) {
		return o, fmt.Errorf("ingest: separator %q: %w: use a character such as ',', ';' or a tab", s, ErrOption)
	}
	return o, nil
}

// add adds the centred value x to g: acc is g.Acc with x added, and x goes
// to the kept values while fewer than keep are held. After that, Algorithm R:
// the n-th value replaces a random kept one with probability keep/n, which
// leaves every value seen so far in the sample with the same probability
// keep/n.
func (g *GroupData) add(acc stats.Accumulator, x float64, keep int, rng *rand.Rand) {
	g.Acc = acc
	if len(g.Values) < keep {
		if len(g.Values) == cap(g.Values) {
			// Grow by doubling, but never beyond keep.
			grown := make([]float64, len(g.Values), min(max(2*cap(g.Values), 64), keep))
			copy(grown, g.Values)
			g.Values = grown
		}
		g.Values = append(g.Values, x)
		return
	}
	g.Sampled = true
	if j := rng.Int64N(g.Acc.N); j < int64(keep) {
		g.Values[j] = x
	}
}

func finite(x float64) bool { return !math.IsInf(x, 0) && !math.IsNaN(x) }

// nameHash is the second seed word of a group's sampling generator, so that
// each group draws its own stream whatever order the groups appear in.
func nameHash(name string) uint64 {
	h := fnv.New64a()
	_, _ = io.WriteString(h, name)
	return h.Sum64()
}

// findColumn returns the 0-based index of the column that sel names: a header
// name (exact, then case-insensitive) or a 1-based column number. flag is the
// option's name for messages.
func findColumn(names []string, sel, flag string, line int, sep rune) (int, error) {
	fail := func(msg string) error {
		return &InputError{Line: line, Msg: msg + separatorHint(names, sep), Err: ErrColumn}
	}
	for _, match := range []func(string) bool{
		func(n string) bool { return n == sel },
		func(n string) bool { return strings.EqualFold(n, sel) },
	} {
		var found []int
		for i, n := range names {
			if match(n) {
				found = append(found, i)
			}
		}
		switch len(found) {
		case 0:
			continue
		case 1:
			return found[0], nil
		}
		cols := make([]string, len(found))
		for i, c := range found {
			cols[i] = strconv.Itoa(c + 1)
		}
		return 0, fail(fmt.Sprintf("%q matches %d header columns (%s); give %s a column number instead",
			short(sel), len(found), strings.Join(cols, ", "), flag))
	}
	if n, err := strconv.Atoi(sel); err == nil {
		switch {
		case n < 1:
			return 0, fail(fmt.Sprintf("%s %d: column numbers start at 1", flag, n))
		case n > len(names):
			return 0, fail(fmt.Sprintf("no column %d: the header has %s: %s; give %s a name or number from these",
				n, plural(len(names), "column"), headerList(names), flag))
		}
		return n - 1, nil
	}
	return 0, fail(fmt.Sprintf("no column %q in header: have %s; give %s one of these names or a column number",
		short(sel), headerList(names), flag))
}

// separatorHint suggests another separator when the header is one field that
// contains a common one.
func separatorHint(names []string, sep rune) string {
	if len(names) != 1 {
		return ""
	}
	for _, s := range []rune{',', ';', '\t', '|'} {
		if s != sep && strings.ContainsRune(names[0], s) {
			return fmt.Sprintf(" (the header is a single field: is the separator %q? set it with --separator)", s)
		}
	}
	return ""
}

// headerList returns the header names quoted and comma-separated, at most
// maxListed of them.
func headerList(names []string) string {
	const maxListed = 20
	var b strings.Builder
	for i, n := range names {
		if i == maxListed {
			fmt.Fprintf(&b, " and %d more", len(names)-maxListed)
			break
		}
		if i > 0 {
			b.WriteString(", ")
		}
		fmt.Fprintf(&b, "%q", short(n))
	}
	return b.String()
}

// fieldError returns an *InputError at field col of the current record.
func fieldError(cr *csv.Reader, col int, names []string, msg string, err error) error {
	line, _ := cr.FieldPos(col)
	return &InputError{Line: line, Column: col + 1, ColumnName: names[col], Msg: msg, Err: err}
}

// valueError explains why text in field col is not a usable value.
func valueError(cr *csv.Reader, col int, names []string, text string, err error) error {
	q := strconv.Quote(short(text))
	var msg string
	switch {
	case errors.Is(err, stats.ErrNotFinite):
		msg = q + " is not a finite number; replace it with a measured value or remove the row"
	case errors.Is(err, stats.ErrOutOfRange):
		msg = q + " is out of range; check the value and its unit"
	case errors.Is(err, stats.ErrSyntax) && strings.Contains(text, ","):
		msg = q + " is not a number (use '.' as the decimal separator)"
	case errors.Is(err, stats.ErrSyntax):
		msg = q + " is not a number; check that --value names the column of measurements"
	default:
		msg = fmt.Sprintf("%s cannot be read as a number: %v", q, err)
	}
	return fieldError(cr, col, names, msg, err)
}

// readError turns an error of csv.Reader.Read into an *InputError. after is
// the last line read successfully, for errors without a line of their own.
func readError(err error, after int) error {
	var pe *csv.ParseError
	if !errors.As(err, &pe) {
		if after == 0 {
			return &InputError{Msg: fmt.Sprintf("cannot read the input: %v", err), Err: err}
		}
		return &InputError{Line: after, Msg: fmt.Sprintf("cannot read past this line: %v", err), Err: err}
	}
	msg := fmt.Sprintf("malformed CSV at character %d: %v", pe.Column, pe.Err)
	if pe.StartLine != pe.Line {
		msg += fmt.Sprintf(" (in a quoted field that starts on line %d)", pe.StartLine)
	}
	if errors.Is(pe.Err, csv.ErrBareQuote) || errors.Is(pe.Err, csv.ErrQuote) {
		msg += `; enclose a field that contains quotes in double quotes and double each quote inside it`
	}
	return &InputError{Line: pe.Line, Msg: msg, Err: err}
}

// quotedName returns ` ("name")`, or "" for a column without a name.
func quotedName(name string) string {
	if name == "" {
		return ""
	}
	return fmt.Sprintf(" (%q)", short(name))
}

// plural returns e.g. "1 field" or "3 fields".
func plural(n int, noun string) string {
	if n == 1 {
		return "1 " + noun
	}
	return strconv.Itoa(n) + " " + noun + "s"
}

// short shortens s to at most about 40 bytes for messages, at a rune
// boundary.
func short(s string) string {
	const limit = 40
	if len(s) <= limit {
		return s
	}
	cut := limit
	for cut > 0 && !utf8.RuneStart(s[cut]) {
		cut--
	}
	return s[:cut] + "…"
}
