package plant_test

import (
	"fmt"
	"testing"

	"github.com/lockstep-project/lockstep/cmd/lockstep/internal/plant"
)

// BenchmarkGenerator measures the coffee plant's messages per second,
// bad messages included (at 0.1 %), payloads formatted.
func BenchmarkGenerator(b *testing.B) {
	sc := coffee(0) // endless
	g, err := plant.New(sc)
	if err != nil {
		b.Fatal(err)
	}
	var n int
	b.ReportAllocs()
	for b.Loop() {
		m, ok := g.Next()
		if !ok {
			b.Fatal("ended")
		}
		n += len(m.Payload)
	}
	b.ReportMetric(float64(b.N)/b.Elapsed().Seconds(), "msgs/s")
	b.ReportMetric(float64(n)/float64(b.N), "B/msg")
}

// BenchmarkGeneratorManyStreams is a plant of 1000 groups, where the heap
// is deeper.
func BenchmarkGeneratorManyStreams(b *testing.B) {
	sc := coffee(0)
	c := &sc.Characteristics[0]
	c.Groups, c.Events = nil, nil
	for i := range 1000 {
		c.Groups = append(c.Groups, fmt.Sprintf("G%04d", i))
	}
	g, err := plant.New(sc)
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	for b.Loop() {
		if _, ok := g.Next(); !ok {
			b.Fatal("ended")
		}
	}
	b.ReportMetric(float64(b.N)/b.Elapsed().Seconds(), "msgs/s")
}
