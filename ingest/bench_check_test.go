package ingest

import (
	"fmt"
	"testing"

	"github.com/lockstep-project/lockstep/stats"
)

// BenchmarkCheck checks payloads decoded beforehand (no decoding in the
// loop) with every check active (unit, range, time, duplicate id); the ids
// cycle through three times more than the duplicate memory holds, so that
// every accepted id also expires one. mem10k keeps the memory in cache;
// mem100k, the default size, does not.
func BenchmarkCheck(b *testing.B) {
	for _, size := range []int{10000, 100000} {
		b.Run(fmt.Sprintf("mem%dk", size/1000), func(b *testing.B) {
			v, ps := checkBench(b, size)
			subject := []byte("meas.fill-weight.L3")
			var m Measurement
			b.ReportAllocs()
			i := 0
			for b.Loop() {
				p := &ps[i%len(ps)]
				i++
				if r, err := v.Check(testNow, subject, p, &m); r != ReasonNone {
					b.Fatal(r, err)
				}
			}
		})
	}
}

// checkBench returns a Validator with every check active on fill-weight
// and a duplicate-id memory of size ids, and three times size payloads with
// distinct ids, decoded beforehand (views into their messages: no escapes).
func checkBench(b *testing.B, size int) (*Validator, []Payload) {
	b.Helper()
	ref, _ := stats.ParseDecimal("500")
	r := stats.NewReference(ref)
	v, err := NewValidator(ValidatorConfig{
		Characteristics: map[string]CharacteristicRules{"fill-weight": {Unit: "g", Min: ptr(400), Max: ptr(600), Reference: &r}},
		IDMemory:        size,
	})
	if err != nil {
		b.Fatal(err)
	}
	msgs := idMessages(3 * size)
	ps := make([]Payload, len(msgs))
	var d Decoder
	for i, msg := range msgs {
		got, err := d.Decode(msg)
		if err != nil || len(got) != 1 {
			b.Fatal(i, err)
		}
		ps[i] = got[0]
	}
	return v, ps
}

// BenchmarkMatch matches a subject against the default template and
// against one with two labels.
func BenchmarkMatch(b *testing.B) {
	for _, c := range []struct{ name, tmpl, subject string }{
		{"default", DefaultSubjectTemplate, "meas.fill-weight.L3"},
		{"labels", "plant.<site>.<cell>.<characteristic>.<group>", "plant.north.c7.fill-weight.L3"},
	} {
		b.Run(c.name, func(b *testing.B) {
			t, err := ParseSubjectTemplate(c.tmpl)
			if err != nil {
				b.Fatal(err)
			}
			subject := []byte(c.subject)
			n := 0
			for b.Loop() {
				m, ok := t.Match(subject)
				if !ok {
					b.Fatal("no match")
				}
				n += len(m.Characteristic)
			}
			if n == 0 {
				b.Fatal("empty characteristic")
			}
		})
	}
}
