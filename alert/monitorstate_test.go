package alert

import (
	"bytes"
	"errors"
	"fmt"
	"math/rand/v2"
	"reflect"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/stats"
)

// randomInputs returns n evaluations of four groups, D shifted from the
// 20th on and C silent from the 30th, with some rejects.
func randomInputs(n int, seed uint64) []Input {
	rng := rand.New(rand.NewPCG(seed, 1))
	groups := []string{"A", "B", "C", "D"}
	var ins []Input
	for e := range n {
		span := make([]stats.Accumulator, 4)
		recent := make([]stats.Accumulator, 4)
		for g := range 4 {
			mu := 0.0
			if g == 3 && e >= 20 {
				mu = 0.8
			}
			if g == 2 && e >= 30 {
				continue
			}
			for range 30 {
				x := mu + rng.NormFloat64()
				recent[g].Add(x)
				span[g].Add(x)
			}
		}
		in := inputAt(e, groups, span, recent)
		if e >= 30 {
			in.LastSeen[2] = mt0.Add(30 * time.Minute)
		}
		in.Accepted, in.Rejected = 100, uint64(rng.IntN(10))
		ins = append(ins, in)
	}
	return ins
}

func TestMonitorStateRoundTrip(t *testing.T) {
	r := DefaultRule()
	r.Windows[0].Length = time.Minute
	r.Reject.MinCount = 50
	ins := randomInputs(60, 9)
	for _, cut := range []int{0, 5, 21, 25, 35, 45} {
		a, _ := NewMonitor(r)
		for _, in := range ins[:cut] {
			a.Step(in)
		}
		st, err := a.State()
		if err != nil {
			t.Fatal(err)
		}
		b, _ := NewMonitor(r)
		if err := b.Restore(st); err != nil {
			t.Fatalf("cut %d: restore: %v", cut, err)
		}
		st2, _ := b.State()
		if !bytes.Equal(st, st2) {
			t.Errorf("cut %d: state changed by a round trip", cut)
		}
		for e, in := range ins[cut:] {
			ga, gb := a.Step(in), b.Step(in)
			if !reflect.DeepEqual(ga, gb) {
				t.Fatalf("cut %d, evaluation %d: restored monitor says %+v, original %+v", cut, cut+e, gb, ga)
			}
		}
	}
}

func TestMonitorStateSawSomething(t *testing.T) {
	// The round trip above means something only if the inputs raise.
	m, _ := NewMonitor(DefaultRule())
	kinds := map[Kind]bool{}
	for _, in := range randomInputs(60, 9) {
		for _, c := range m.Step(in) {
			kinds[c.Kind] = true
		}
	}
	for _, k := range []Kind{KindMeansDiverge, KindGroupSilent} {
		if !kinds[k] {
			t.Errorf("no %v condition in the test inputs", k)
		}
	}
}

func TestMonitorRestoreErrors(t *testing.T) {
	m, _ := NewMonitor(DefaultRule())
	for _, in := range randomInputs(25, 2) {
		m.Step(in)
	}
	good, _ := m.State()
	tests := []struct {
		name string
		data []byte
	}{
		{"empty", nil},
		{"version", append([]byte{9}, good[1:]...)},
		{"truncated", good[:len(good)-3]},
		{"trailing", append(append([]byte(nil), good...), 0)},
		{"raised flag", []byte{1, 0, 0, 7}},
		{"huge group count", []byte{1, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0xff, 0xff, 0xff, 0xff, 0x0f}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			before, _ := m.State()
			err := m.Restore(tt.data)
			if !errors.Is(err, ErrMonitorState) {
				t.Errorf("error %v does not wrap ErrMonitorState", err)
			}
			after, _ := m.State()
			if !bytes.Equal(before, after) {
				t.Error("a failed Restore changed the monitor")
			}
		})
	}
}

func TestMonitorRestoreChangedRule(t *testing.T) {
	m, _ := NewMonitor(DefaultRule())
	for _, in := range randomInputs(25, 2) {
		m.Step(in)
	}
	st, _ := m.State()
	r := DefaultRule()
	r.CUSUMs[1].K = 0.3
	m2, _ := NewMonitor(r)
	if err := m2.Restore(st); err != nil {
		t.Fatal(err)
	}
	for n, g := range m2.group {
		if g.hi[1] != 0 || g.lo[1] != 0 {
			t.Errorf("group %s: sums of a CUSUM whose k changed were kept", n)
		}
		if g.hi[0] != m.group[n].hi[0] || g.lo[0] != m.group[n].lo[0] {
			t.Errorf("group %s: sums of an unchanged CUSUM were lost", n)
		}
	}
}

func FuzzMonitorRestore(f *testing.F) {
	m, _ := NewMonitor(DefaultRule())
	for _, in := range randomInputs(40, 4) {
		m.Step(in)
	}
	good, _ := m.State()
	f.Add(good)
	f.Add([]byte{1})
	f.Add([]byte{1, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0})
	f.Fuzz(func(t *testing.T, data []byte) {
		m, _ := NewMonitor(DefaultRule())
		if err := m.Restore(data); err != nil {
			return
		}
		st, err := m.State()
		if err != nil {
			t.Fatalf("State after a good Restore: %v", err)
		}
		m2, _ := NewMonitor(DefaultRule())
		if err := m2.Restore(st); err != nil {
			t.Fatalf("re-encoded state does not restore: %v", err)
		}
		st2, _ := m2.State()
		if !bytes.Equal(st, st2) {
			t.Fatal("state not stable under a round trip")
		}
		m2.Step(randomInputs(1, 1)[0])
	})
}

func benchmarkStep(b *testing.B, groups int) {
	rng := rand.New(rand.NewPCG(1, 2))
	names := make([]string, groups)
	var ins []Input
	for e := range 64 {
		recent := make([]stats.Accumulator, groups)
		span1 := make([]stats.Accumulator, groups)
		span30 := make([]stats.Accumulator, groups)
		for g := range groups {
			names[g] = string(rune('A'+g%26)) + string(rune('a'+g/26))
			for range 60 {
				x := rng.NormFloat64()
				recent[g].Add(x)
				span1[g].Add(x)
			}
			span30[g] = span1[g]
			for range 29 {
				span30[g].Merge(accOf(60, rng.NormFloat64()/8, 1))
			}
		}
		in := inputAt(e, names, nil, recent)
		in.Spans = []Span{{Length: time.Minute, Groups: span1}, {Length: 30 * time.Minute, Groups: span30}}
		in.Accepted = 60 * uint64(groups)
		ins = append(ins, in)
	}
	m, _ := NewMonitor(DefaultRule())
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; b.Loop(); i++ {
		m.Step(ins[i%len(ins)])
	}
}

// BenchmarkMonitorStep measures one evaluation of the default rule for one
// characteristic: two window F tests, two contrast CUSUMs, silent and
// reject checks (no report, so no spread condition). The oneway
// sub-benchmarks time one stats.OneWay of the same groups, the unit to
// read the Step figures against.
func BenchmarkMonitorStep(b *testing.B) {
	for _, g := range []int{4, 16} {
		b.Run(fmt.Sprintf("groups=%d", g), func(b *testing.B) { benchmarkStep(b, g) })
		b.Run(fmt.Sprintf("oneway/groups=%d", g), func(b *testing.B) {
			accs := make([]stats.Accumulator, g)
			for i := range accs {
				accs[i] = accOf(1800, float64(i)/100, 1)
			}
			b.ReportAllocs()
			for b.Loop() {
				if _, err := stats.OneWay(accs); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
