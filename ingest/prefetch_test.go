package ingest

import (
	"fmt"
	"strconv"
	"testing"
)

// TestPrefetchChangesNothing: the same messages, with duplicates, rejects
// and several characteristics, checked with and without Prefetch ahead of
// Check, give the same outcomes, and Prefetch does not allocate.
func TestPrefetchChangesNothing(t *testing.T) {
	cfg := func() ValidatorConfig {
		return ValidatorConfig{Characteristics: map[string]CharacteristicRules{"fill-weight": fillWeightRules(t)}, IDMemory: 50}
	}
	plain, pre := newValidator(t, cfg()), newValidator(t, cfg())
	type msg struct{ subject, data string }
	var msgs []msg
	for i := range 400 {
		char := []string{"fill-weight", "torque", "gap"}[i%3]
		id := i % 90 // ids repeat: duplicates within and beyond the memory
		msgs = append(msgs, msg{"meas." + char + ".L3", fmt.Sprintf(`{"value": 500.%d, "id": "x%d", "unit": "g"}`, i%10, id)})
		if i%37 == 0 {
			msgs = append(msgs, msg{"meas." + char + ".L3", `{"value": "n/a"}`}, msg{"other.subject", `1`})
		}
	}
	const ahead = 4
	var dp, dq [ahead]Decoder
	var m Measurement
	var sink uint64
	for lo := 0; lo < len(msgs); lo += ahead {
		group := msgs[lo:min(lo+ahead, len(msgs))]
		var ps [ahead][]Payload
		for j, g := range group {
			ps[j], _ = dq[j].Decode([]byte(g.data))
			pre.Prefetch([]byte(g.subject), ps[j])
		}
		sink += pre.LoadPrefetched()
		for j, g := range group {
			want, err := dp[j].Decode([]byte(g.data))
			if err != nil {
				continue
			}
			for k := range want {
				r1, e1 := plain.Check(testNow, []byte(g.subject), &want[k], &m)
				r2, e2 := pre.Check(testNow, []byte(g.subject), &ps[j][k], &m)
				if r1 != r2 || (e1 == nil) != (e2 == nil) {
					t.Fatalf("message %d %q: without Prefetch %v %v, with %v %v", lo+j, g.data, r1, e1, r2, e2)
				}
			}
		}
	}
	c1, c2 := plain.Counters(), pre.Counters()
	if c1.Accepted() != c2.Accepted() || c1.RejectedTotal() != c2.RejectedTotal() || c1.Rejected(ReasonDuplicateID) != c2.Rejected(ReasonDuplicateID) {
		t.Errorf("counters differ: accepted %d and %d, rejected %d and %d", c1.Accepted(), c2.Accepted(), c1.RejectedTotal(), c2.RejectedTotal())
	}
	if c1.Rejected(ReasonDuplicateID) == 0 || c1.Accepted() == 0 {
		t.Errorf("no duplicates (%d) or nothing accepted (%d): the test tests nothing", c1.Rejected(ReasonDuplicateID), c1.Accepted())
	}
	subject := []byte("meas.fill-weight.L3")
	ps, _ := dq[0].Decode([]byte(`{"value": 500.1, "id": "x1"}`))
	if n := testing.AllocsPerRun(100, func() {
		for range 40 { // beyond maxPrefetch places: the rest are dropped
			pre.Prefetch(subject, ps)
		}
		sink += pre.LoadPrefetched()
	}); n != 0 {
		t.Errorf("%v allocations per Prefetch, want 0", n)
	}
	_ = sink
}

// BenchmarkCheckPrefetch is BenchmarkCheck with Prefetch for groups of 8
// payloads ahead of their Checks, to compare with BenchmarkCheck in the
// same run.
func BenchmarkCheckPrefetch(b *testing.B) {
	for _, size := range []int{10000, 100000} {
		b.Run(fmt.Sprintf("mem%dk", size/1000), func(b *testing.B) {
			v, ps := checkBench(b, size)
			subject := []byte("meas.fill-weight.L3")
			var m Measurement
			var sink uint64
			b.ReportAllocs()
			i := 0
			for b.Loop() {
				if i%8 == 0 {
					for j := range 8 {
						v.Prefetch(subject, ps[(i+j)%len(ps):][:1])
					}
					sink += v.LoadPrefetched()
				}
				p := &ps[i%len(ps)]
				i++
				if r, err := v.Check(testNow, subject, p, &m); r != ReasonNone {
					b.Fatal(r, err)
				}
			}
			_ = sink
		})
	}
}

// BenchmarkCheckSteady checks measurements of 8 characteristics in turn,
// each with a full duplicate-id memory of the default size (so every
// accepted id also expires one: two lookups in tables of megabytes), in
// groups of 8 messages, without ("plain") and with Prefetch ahead of the
// Checks, to compare in the same run.
func BenchmarkCheckSteady(b *testing.B) {
	for _, prefetch := range []bool{false, true} {
		name := "plain"
		if prefetch {
			name = "prefetch"
		}
		b.Run(name, func(b *testing.B) {
			v, err := NewValidator(ValidatorConfig{})
			if err != nil {
				b.Fatal(err)
			}
			const chars, group = 8, 8
			var subjects [chars][]byte
			for c := range subjects {
				subjects[c] = fmt.Appendf(nil, "meas.char-%d.L3", c)
			}
			var ps [group]Payload
			var ids [group][24]byte
			next := uint64(0)
			fill := func() {
				for j := range ps {
					next++
					ps[j] = Payload{Value: []byte("500.25"), ID: strconv.AppendUint(ids[j][:0], mix64(next), 16)}
				}
			}
			var m Measurement
			run := func(c int) {
				for j := range ps {
					if r, err := v.Check(testNow, subjects[c], &ps[j], &m); r != ReasonNone {
						b.Fatal(r, err)
					}
				}
			}
			for i := range chars * (DefaultIDMemory + 1000) / group { // fill every memory
				fill()
				run(i % chars)
			}
			var sink uint64
			i := 0
			for b.Loop() {
				c := i % chars
				i++
				fill()
				if prefetch {
					for j := range ps {
						v.Prefetch(subjects[c], ps[j:j+1])
					}
					sink += v.LoadPrefetched()
				}
				run(c)
			}
			_ = sink
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*group), "ns/check")
		})
	}
}
