package plant_test

import (
	"fmt"
	"time"

	"github.com/lockstep-project/lockstep/cmd/lockstep/internal/plant"
)

// The first messages of the built-in coffee plant with its seed, from a
// fixed start. The same seed gives the same bytes on every run.
func Example() {
	sc := plant.Coffee()
	sc.Start = time.Date(2026, 12, 1, 6, 0, 0, 0, time.UTC)
	g, err := plant.New(sc)
	if err != nil {
		fmt.Println(err)
		return
	}
	for range 4 {
		m, _ := g.Next()
		fmt.Printf("%s\t%s\n", m.Subject, m.Payload)
	}
	// Output:
	// meas.fill-weight.L1	{"value":"499.11","time":"2026-12-01T06:00:00.014Z","id":"L1-000001","unit":"g"}
	// meas.seal-temperature.J6	{"value":"181.8","time":"2026-12-01T06:00:00.052Z","id":"J6-000001","unit":"°C"}
	// meas.seal-temperature.J4	{"value":"183.3","time":"2026-12-01T06:00:00.116Z","id":"J4-000001","unit":"°C"}
	// meas.cap-torque.H3	{"value":"2.12","time":"2026-12-01T06:00:00.149Z","id":"H3-000001","unit":"N·m"}
}
