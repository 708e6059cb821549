package ingest

import (
	"bytes"
	"errors"
	"math"
	"reflect"
	"strings"
	"testing"
)

// FuzzReadCSV reads arbitrary bytes with a small Keep and MaxGroups, so that
// sampling and the group limit are reached by short inputs. ReadCSV must not
// panic; a success must be consistent, and an error must be a one-line
// *InputError with no result.
func FuzzReadCSV(f *testing.F) {
	for _, seed := range []string{
		"line,fill_g\nL1,250.1\nL2,249.9\nL1,250.3\nL3,250.0\n",
		"\uFEFF\"line\",\"fill_g\"\r\nL1,250.1\r\nL2,\"249.9\"\r\n",
		"jaw;temp_c\nJ1;181.5\nJ2;182,0\n",
		"head\tnote\ttorque_nm\nH1\t\t2.35\nH2\tloose\t2.1e0\n",
		"line,fill_g\nL1,NaN\n",
		"line,fill_g\nL1,1e999999\nL2,-0.000000000000000000000000000001\n",
		"line,fill_g\nL1,\"250.1\nL2,250.2\n",
		"line,fill_g\nL1,25\"0.1\n",
		"line,fill_g\n,250.1\nL1,\n",
		"line,fill_g\nL1\n",
		"line,fill_g\n",
		"",
		"a,b\nx,1\nx,2\nx,3\nx,4\nx,5\nx,6\nx,7\nx,8\nx,9\nx,10\ny,-1\n",
	} {
		f.Add([]byte(seed), uint8(3), uint8(0))
	}
	f.Add([]byte("jaw;temp_c\nJ1;181.5\nJ2;182.0\n"), uint8(1), uint8(1))
	f.Add([]byte("head\ttorque_nm\nH1\t2.35\nH2\t2.1\n"), uint8(2), uint8(2))

	separators := []rune{',', ';', '\t', '|'}
	f.Fuzz(func(t *testing.T, data []byte, keep, sep uint8) {
		opt := CSVOptions{Keep: int(keep%8) + 1, MaxGroups: 16, Separator: separators[int(sep)%len(separators)]}
		res, err := ReadCSV(bytes.NewReader(data), opt)
		if err != nil {
			if res != nil {
				t.Fatalf("result returned with error %v", err)
			}
			var ie *InputError
			if !errors.As(err, &ie) {
				t.Fatalf("%v is %T, not an *InputError", err, err)
			}
			if strings.ContainsAny(err.Error(), "\r\n") {
				t.Fatalf("message %q is not one line", err)
			}
			return
		}

		var total int64
		names := map[string]bool{}
		for _, g := range res.Groups {
			if g.Name == "" || names[g.Name] {
				t.Fatalf("group name %q empty or repeated", g.Name)
			}
			names[g.Name] = true
			if g.Acc.N < 1 {
				t.Fatalf("group %q has N = %d", g.Name, g.Acc.N)
			}
			if len(g.Values) > opt.Keep || int64(len(g.Values)) != min(g.Acc.N, int64(opt.Keep)) {
				t.Fatalf("group %q: %d values kept of N %d with Keep %d", g.Name, len(g.Values), g.Acc.N, opt.Keep)
			}
			if g.Sampled != (g.Acc.N > int64(opt.Keep)) {
				t.Fatalf("group %q: Sampled %v with N %d, Keep %d", g.Name, g.Sampled, g.Acc.N, opt.Keep)
			}
			for _, v := range g.Values {
				if math.IsNaN(v) || v < g.Acc.Min || v > g.Acc.Max {
					t.Fatalf("group %q: kept value %v outside [%v, %v]", g.Name, v, g.Acc.Min, g.Acc.Max)
				}
			}
			total += g.Acc.N
		}
		if total != res.Rows || res.Rows < 1 {
			t.Fatalf("sum of N = %d, Rows = %d", total, res.Rows)
		}
		if res.Inexact < 0 || res.Inexact > res.Rows {
			t.Fatalf("Inexact = %d of %d rows", res.Inexact, res.Rows)
		}

		again, err := ReadCSV(bytes.NewReader(data), opt)
		if err != nil || !reflect.DeepEqual(again.Groups, res.Groups) {
			t.Fatalf("second read differs: %v", err)
		}
	})
}
