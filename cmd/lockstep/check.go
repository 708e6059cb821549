package main

import (
	"bufio"
	"context"
	"fmt"
	"io"
	"os"
	"unicode/utf8"

	"github.com/lockstep-project/lockstep/ingest"
	"github.com/lockstep-project/lockstep/stats"
)

// CheckCommand analyses a CSV file of measurements from several groups.
type CheckCommand struct {
	Stdin          io.Reader
	Stdout, Stderr io.Writer
}

// Usage returns the help text of lockstep check.
func (c *CheckCommand) Usage() string {
	return `Usage: lockstep check [options] FILE|-

Analyses a CSV file with a header row, one measurement per row: which column
names the group (line, machine, head, cavity) and which holds the value.
"-" reads standard input. Prints the one-way analysis of variance, a table of
the groups, Welch's F, spread tests (Bartlett, Levene, Brown–Forsythe), the
Kruskal–Wallis rank test, every pair (Tukey–Kramer intervals, Games–Howell
p-values), the analysis of means, effect sizes, the minimum detectable shift
and one verdict line naming the group that differs and by how much.

Values are centred on an exact decimal reference (the first value, or
--reference) before they become binary numbers, so data at large offsets
(1000000.2 mm, 107.8681 g) keep their digits.

Options:
  --group COLUMN       column naming the group: header name or 1-based number (default 1)
  --value COLUMN       column holding the value: header name or number (default 2)
  --separator C        field separator: ',' (default), ';' or 'tab'
  --unit U             unit of the values, used in the verdict (e.g. g, °C, N·m)
  --alpha A            significance level of tests, limits and the verdict (default 0.05)
  --confidence C       confidence level of intervals (default 0.95)
  --power P            power for the minimum detectable shift (default 0.9)
  --reference X        exact decimal to centre values on, e.g. the nominal (default: first value)
  --keep N             values kept per group for Levene, Brown–Forsythe and
                       Kruskal–Wallis; beyond it a reproducible random sample (default 100000)
  --json               print one JSON object instead of the text report

Exit status: 0 when the analysis ran (whatever it found), 1 on bad input,
2 on a usage mistake.
`
}

// Run parses the options, reads the file and prints the report.
func (c *CheckCommand) Run(ctx context.Context, args []string) error {
	fs := newFlagSet("check")
	group := fs.String("group", "1", "")
	value := fs.String("value", "2", "")
	sep := fs.String("separator", ",", "")
	unit := fs.String("unit", "", "")
	alpha := fs.Float64("alpha", 0.05, "")
	confidence := fs.Float64("confidence", 0.95, "")
	power := fs.Float64("power", 0.9, "")
	refText := fs.String("reference", "", "")
	keep := fs.Int("keep", 100000, "")
	asJSON := fs.Bool("json", false, "")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) != 1 {
		return fmt.Errorf("%w: need exactly one FILE (or - for standard input), have %d", errUsage, len(pos))
	}
	opt := stats.Options{Alpha: *alpha, Confidence: *confidence, Power: *power}
	if err := checkLevel("--alpha", opt.Alpha); err != nil {
		return err
	}
	if err := checkLevel("--confidence", opt.Confidence); err != nil {
		return err
	}
	if err := checkLevel("--power", opt.Power); err != nil {
		return err
	}
	if *keep < 3 {
		return fmt.Errorf("%w: --keep %d: need at least 3 values per group", errUsage, *keep)
	}
	sepRune, err := parseSeparator(*sep)
	if err != nil {
		return err
	}
	csvOpt := ingest.CSVOptions{Group: *group, Value: *value, Separator: sepRune, Keep: *keep}
	if *refText != "" {
		d, err := stats.ParseDecimal(*refText)
		if err != nil {
			return fmt.Errorf("%w: --reference: %v", errUsage, err)
		}
		ref := stats.NewReference(d)
		csvOpt.Reference = &ref
	}

	name := pos[0]
	in := c.Stdin
	if name != "-" {
		f, err := os.Open(name)
		if err != nil {
			return fmt.Errorf("open data: %w", err)
		}
		defer f.Close()
		in = f
	} else {
		name = "standard input"
	}
	data, err := ingest.ReadCSV(bufio.NewReaderSize(in, 1<<16), csvOpt)
	if err != nil {
		return fmt.Errorf("read %s: %w", name, err)
	}
	if err := ctx.Err(); err != nil {
		return err
	}
	if len(data.Groups) < 2 {
		return fmt.Errorf("read %s: only one group (%q) in column %q: need at least two groups to compare; is --group the right column?",
			name, data.Groups[0].Name, data.GroupColumn)
	}
	groups := make([]stats.Group, len(data.Groups))
	for i, g := range data.Groups {
		groups[i] = stats.Group{Name: g.Name, Acc: g.Acc, Values: g.Values}
	}
	rep := stats.Analyse(data.Reference, groups, opt)
	info := checkInfo{Source: name, Unit: *unit, Data: data}
	// Build the whole output before writing it, so nothing is half-printed.
	var out []byte
	if *asJSON {
		out, err = marshalReport(rep, info)
		if err != nil {
			return fmt.Errorf("encode report: %w", err)
		}
	} else {
		out = formatReport(rep, info)
	}
	_, err = c.Stdout.Write(out)
	return err
}

// checkInfo is what the output says about the input besides the report.
type checkInfo struct {
	Source string
	Unit   string
	Data   *ingest.CSVResult
}

func checkLevel(flagName string, v float64) error {
	if !(v > 0 && v < 1) {
		return fmt.Errorf("%w: %s %g: must be between 0 and 1 (exclusive)", errUsage, flagName, v)
	}
	return nil
}

func parseSeparator(s string) (rune, error) {
	switch s {
	case "tab", `\t`:
		return '\t', nil
	}
	r, size := utf8.DecodeRuneInString(s)
	if size == 0 || size != len(s) || r == '"' || r == '\r' || r == '\n' || r == utf8.RuneError {
		return 0, fmt.Errorf("%w: --separator %q: give one character such as ',', ';' or 'tab'", errUsage, s)
	}
	return r, nil
}
