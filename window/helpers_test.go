package window

import (
	"fmt"
	"math"
	"reflect"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/stats"
)

// shift is the start of the invented morning shift the tests run in: coffee
// bags filled on lines L1–L4 against a nominal of 500 g, values centred on
// it (so +0.4 is a 500.4 g bag).
var shift = time.Date(2026, 3, 2, 6, 0, 0, 0, time.UTC)

// at returns shift + d.
func at(d time.Duration) time.Time { return shift.Add(d) }

func newWindow(t testing.TB, cfg Config, groups ...string) *Window {
	t.Helper()
	w, err := New(cfg)
	if err != nil {
		t.Fatalf("New(%+v): %v", cfg, err)
	}
	for i, g := range groups {
		if got := w.Group(g); got != i {
			t.Fatalf("Group(%q) = %d, want %d", g, got, i)
		}
	}
	return w
}

// mustAdd adds a value and fails the test unless the result is want.
func mustAdd(t testing.TB, w *Window, g int, tm time.Time, v float64, want Result) {
	t.Helper()
	if got := w.Add(g, tm, v); got != want {
		t.Fatalf("Add(%s, %v, %v) = %v, want %v", w.Groups()[g], tm.Sub(shift), v, got, want)
	}
}

// record is one entry of Buckets' output, sample copied.
type record struct {
	start  time.Time
	group  int
	acc    stats.Accumulator
	sample []float64
}

func buckets(w *Window) []record {
	var out []record
	w.Buckets(func(start time.Time, g int, acc stats.Accumulator, sample []float64) {
		out = append(out, record{start, g, acc, append([]float64(nil), sample...)})
	})
	return out
}

// twoPass is an independent mean and M2: the mean first, then the squared
// deviations from it.
func twoPass(xs []float64) (mean, m2 float64) {
	for _, x := range xs {
		mean += x
	}
	mean /= float64(len(xs))
	for _, x := range xs {
		m2 += (x - mean) * (x - mean)
	}
	return mean, m2
}

// bitsDiff returns the path of the first difference between a and b,
// comparing floating-point numbers by their bits, or "" if there is none.
func bitsDiff(path string, a, b reflect.Value) string {
	if a.Kind() != b.Kind() || a.Type() != b.Type() {
		return path + ": types differ"
	}
	switch a.Kind() {
	case reflect.Float32, reflect.Float64:
		if math.Float64bits(a.Float()) != math.Float64bits(b.Float()) {
			return fmt.Sprintf("%s: %v != %v", path, a.Float(), b.Float())
		}
	case reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64:
		if a.Int() != b.Int() {
			return fmt.Sprintf("%s: %v != %v", path, a.Int(), b.Int())
		}
	case reflect.Uint, reflect.Uint8, reflect.Uint16, reflect.Uint32, reflect.Uint64, reflect.Uintptr:
		if a.Uint() != b.Uint() {
			return fmt.Sprintf("%s: %v != %v", path, a.Uint(), b.Uint())
		}
	case reflect.Bool:
		if a.Bool() != b.Bool() {
			return fmt.Sprintf("%s: %v != %v", path, a.Bool(), b.Bool())
		}
	case reflect.String:
		if a.String() != b.String() {
			return fmt.Sprintf("%s: %q != %q", path, a.String(), b.String())
		}
	case reflect.Pointer, reflect.Interface:
		if a.IsNil() || b.IsNil() {
			if a.IsNil() != b.IsNil() {
				return path + ": nil and not nil"
			}
			return ""
		}
		return bitsDiff(path, a.Elem(), b.Elem())
	case reflect.Slice, reflect.Array:
		if a.Len() != b.Len() {
			return fmt.Sprintf("%s: length %d != %d", path, a.Len(), b.Len())
		}
		for i := range a.Len() {
			if d := bitsDiff(fmt.Sprintf("%s[%d]", path, i), a.Index(i), b.Index(i)); d != "" {
				return d
			}
		}
	case reflect.Struct:
		for i := range a.NumField() {
			if d := bitsDiff(path+"."+a.Type().Field(i).Name, a.Field(i), b.Field(i)); d != "" {
				return d
			}
		}
	default:
		return fmt.Sprintf("%s: cannot compare a %v", path, a.Kind())
	}
	return ""
}

func sameBits(a, b any) string { return bitsDiff("", reflect.ValueOf(a), reflect.ValueOf(b)) }
