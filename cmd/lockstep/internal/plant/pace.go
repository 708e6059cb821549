package plant

import (
	"math"
	"time"
)

// Pacer maps simulated time to wall time for live publishing: at Speed s,
// a simulated span d takes d/s of wall time, so Speed 1 is real time and
// Speed 60 plays an hour in a minute.
type Pacer struct {
	// Speed is simulated seconds per wall second; 0 (or less) means as
	// fast as possible: nothing waits.
	Speed float64
	// Start is the simulated time at which the wall clock starts.
	Start time.Time
}

// Due returns how long after the wall clock's start a message of simulated
// time t is due: (t − Start)/Speed, never negative; 0 when Speed is 0.
func (p Pacer) Due(t time.Time) time.Duration {
	if !(p.Speed > 0) {
		return 0
	}
	d := float64(t.Sub(p.Start)) / p.Speed
	switch {
	case d <= 0:
		return 0
	case d >= math.MaxInt64:
		return math.MaxInt64
	}
	return time.Duration(d)
}
