package window_test

import (
	"fmt"
	"time"

	"github.com/lockstep-project/lockstep/stats"
	"github.com/lockstep-project/lockstep/window"
)

// Four lines fill 500 g coffee bags; line L3 fills about 1.2 g heavy. A
// ten-minute window of one-minute buckets, evaluated at 06:10, names it.
// Line L4 sent two bags at the start of the shift and then stopped: by
// 06:10 its bucket has left the window, so it is silent and left out of the
// analysis.
func Example() {
	w, err := window.New(window.Config{Bucket: time.Minute, Length: 10 * time.Minute, SilentAfter: 5 * time.Minute})
	if err != nil {
		fmt.Println(err)
		return
	}
	d, _ := stats.ParseDecimal("500.0")
	ref := stats.NewReference(d)
	start := time.Date(2026, 3, 2, 6, 0, 0, 0, time.UTC)
	// Deviations from 500.0 g, as ingest would centre them.
	spread := []float64{-0.3, 0.1, 0.4, -0.1, 0.2, -0.2, 0.0, 0.3, -0.4, 0.1}
	lines := []string{"L1", "L2", "L3", "L4"}
	for _, line := range lines {
		w.Group(line)
	}
	// A bag from each line every ten seconds; L4 stops after two.
	for k := range 60 {
		for g, line := range lines {
			if line == "L4" && k >= 2 {
				continue
			}
			v := spread[(k+3*g)%len(spread)]
			if line == "L3" {
				v += 1.2
			}
			t := start.Add(time.Duration(k)*10*time.Second + time.Duration(g)*time.Second)
			if r := w.Add(g, t, v); r != window.Added {
				fmt.Println(line, t.Format("15:04:05"), r)
			}
		}
	}

	ev := w.Evaluate(start.Add(10*time.Minute), stats.Options{}, ref)
	fmt.Printf("window %s–%s, %d buckets\n", ev.From.Format("15:04"), ev.To.Format("15:04"), ev.Buckets)
	for _, c := range ev.Counts {
		fmt.Printf("%s: %d bags, silent %v\n", c.Name, c.N, c.Silent)
	}
	for _, dv := range ev.Report.Verdict.Divergent {
		fmt.Printf("%s differs by %+.1f g\n", dv.Name, dv.Shift)
	}
	// Output:
	// window 06:01–06:11, 9 buckets
	// L1: 54 bags, silent false
	// L2: 54 bags, silent false
	// L3: 54 bags, silent false
	// L4: 0 bags, silent true
	// L3 differs by +1.2 g
}
