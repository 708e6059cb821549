package stats

// Shared helpers for tests against the scenario data in testdata/scenarios
// and the reference values that testdata/reference/make.R computes with R.

import (
	"encoding/csv"
	"errors"
	"maps"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"
)

// rSource names where the reference values come from, for test messages.
const rSource = "R 4.2.2, testdata/reference/make.R"

// readScenario reads testdata/scenarios/NAME.csv (header `group,value`) and
// returns the group names in order of first appearance and each group's
// values in file order.
func readScenario(t testing.TB, name string) (groups []string, values [][]float64) {
	t.Helper()
	rows := readCSVFile(t, filepath.Join("..", "testdata", "scenarios", name+".csv"), "group", "value")
	index := map[string]int{}
	for i, r := range rows {
		x, err := strconv.ParseFloat(r[1], 64)
		if err != nil {
			t.Fatalf("scenario %s, row %d: %v", name, i+2, err)
		}
		j, ok := index[r[0]]
		if !ok {
			j = len(groups)
			index[r[0]] = j
			groups = append(groups, r[0])
			values = append(values, nil)
		}
		values[j] = append(values[j], x)
	}
	if len(groups) == 0 {
		t.Fatalf("scenario %s has no values", name)
	}
	return groups, values
}

// groupAccumulators returns one Accumulator per group, built by Add.
func groupAccumulators(values [][]float64) []Accumulator {
	acc := make([]Accumulator, len(values))
	for i, xs := range values {
		for _, x := range xs {
			acc[i].Add(x)
		}
	}
	return acc
}

// refKey identifies one reference value in oneway.csv.
type refKey struct{ scenario, quantity, a, b string }

// refValues holds testdata/reference/oneway.csv. R's NA is kept as NaN.
type refValues struct{ m map[refKey]float64 }

// readReference reads testdata/reference/oneway.csv.
func readReference(t testing.TB) refValues {
	t.Helper()
	rows := readCSVFile(t, filepath.Join("..", "testdata", "reference", "oneway.csv"),
		"scenario", "quantity", "a", "b", "value")
	ref := refValues{m: make(map[refKey]float64, len(rows))}
	for i, r := range rows {
		v := math.NaN()
		if r[4] != "NA" {
			var err error
			if v, err = strconv.ParseFloat(r[4], 64); err != nil {
				t.Fatalf("oneway.csv, row %d: %v", i+2, err)
			}
		}
		k := refKey{r[0], r[1], r[2], r[3]}
		if _, dup := ref.m[k]; dup {
			t.Fatalf("oneway.csv, row %d: %v appears twice", i+2, k)
		}
		ref.m[k] = v
	}
	return ref
}

// get returns the reference value of quantity in scenario; a and b name the
// group or the pair ("" when the quantity is not per group). It fails the
// test when the value is missing or R gave NA.
func (r refValues) get(t testing.TB, scenario, quantity, a, b string) float64 {
	t.Helper()
	v, ok := r.m[refKey{scenario, quantity, a, b}]
	switch {
	case !ok:
		t.Fatalf("oneway.csv has no %s for scenario %s (a=%q, b=%q); regenerate with `Rscript testdata/reference/make.R`",
			quantity, scenario, a, b)
	case math.IsNaN(v):
		t.Fatalf("oneway.csv: R gives NA for %s in scenario %s (a=%q, b=%q)", quantity, scenario, a, b)
	}
	return v
}

// readNumbers reads a CSV file of numbers under testdata/reference whose
// header must be exactly columns.
func readNumbers(t testing.TB, name string, columns ...string) [][]float64 {
	t.Helper()
	rows := readCSVFile(t, filepath.Join("..", "testdata", "reference", name), columns...)
	out := make([][]float64, len(rows))
	for i, r := range rows {
		out[i] = make([]float64, len(r))
		for j, s := range r {
			x, err := strconv.ParseFloat(s, 64)
			if err != nil {
				t.Fatalf("%s, row %d: %v", name, i+2, err)
			}
			out[i][j] = x
		}
	}
	return out
}

// readCSVFile reads a CSV file, checks its header against columns and
// returns the rows after the header.
func readCSVFile(t testing.TB, path string, columns ...string) [][]string {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatalf("%v (the reference data are made by `Rscript testdata/reference/make.R`)", err)
	}
	defer f.Close()
	r := csv.NewReader(f)
	r.FieldsPerRecord = len(columns)
	rows, err := r.ReadAll()
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	if len(rows) == 0 || !slices.Equal(rows[0], columns) {
		t.Fatalf("%s: header is not %v", path, columns)
	}
	return rows[1:]
}

// refRelErr returns |got − want| / |want|, or |got| when want is 0, and +Inf
// when got is NaN or infinite where want is a number.
func refRelErr(got, want float64) float64 {
	var e float64
	if want == 0 {
		e = math.Abs(got)
	} else {
		e = math.Abs(got-want) / math.Abs(want)
	}
	if math.IsNaN(e) {
		return math.Inf(1)
	}
	return e
}

// allScenarios returns the names of the scenarios in testdata/scenarios.
func allScenarios() []string {
	return []string{"fill_weight", "seal_temperature", "cap_torque", "wall_thickness", "nozzle_flow", "small_df"}
}

// errorLog checks values against references and keeps the largest relative
// error seen per quantity, so that a test can log how close it came.
type errorLog struct {
	against string             // where the wanted values come from
	max     map[string]float64 // quantity → largest relative error
}

// newErrorLog returns an errorLog for references from against (e.g. rSource).
func newErrorLog(against string) errorLog {
	return errorLog{against: against, max: map[string]float64{}}
}

// check fails the test when got differs from want by more than tol relative
// and records the error under quantity; where says which case it is.
func (e errorLog) check(t testing.TB, quantity, where string, got, want, tol float64) {
	t.Helper()
	r := refRelErr(got, want)
	e.max[quantity] = math.Max(e.max[quantity], r)
	if !(r <= tol) {
		t.Errorf("%s, %s: got %.17g, want %.17g (%s): relative error %.3g > %.3g",
			where, quantity, got, want, e.against, r, tol)
	}
}

// report logs the largest relative error per quantity.
func (e errorLog) report(t testing.TB) {
	t.Helper()
	for _, q := range slices.Sorted(maps.Keys(e.max)) {
		t.Logf("max relative error against %s: %-22s %.3g", e.against, q, e.max[q])
	}
}

// checkUnavailable checks a result that must not be available: err wraps
// ErrNotAvailable, its text starts with "what: not available: " and says
// want, and the result is the zero value. where names the case.
func checkUnavailable[T comparable](t testing.TB, where, what string, got T, err error, want string) {
	t.Helper()
	if !errors.Is(err, ErrNotAvailable) {
		t.Errorf("%s: err = %v, want one wrapping ErrNotAvailable", where, err)
		return
	}
	if !strings.HasPrefix(err.Error(), what+": not available: ") || !strings.Contains(err.Error(), want) {
		t.Errorf("%s: err = %q, want it to say %q", where, err, want)
	}
	var zero T
	if got != zero {
		t.Errorf("%s: result %+v with an error, want the zero value", where, got)
	}
}
