package store

import (
	"time"

	"github.com/lockstep-project/lockstep/stats"
)

// Characteristic is the stored record of one characteristic: what its values
// mean and what they are centred on.
type Characteristic struct {
	Name string // unique; 1 to 255 bytes of UTF-8
	Unit string // "g", "°C", "N·m"; may be empty

	// Reference is the exact decimal the characteristic's values are centred
	// on before they are summed. Stored bucket states are centred on it, so
	// Commit refuses to change it once stored (ErrInvalid).
	Reference stats.Decimal

	// SettingsHash identifies the settings (window, rules) the stored state
	// was built with, so that a restart can tell that they changed.
	SettingsHash uint64

	// Created is when the characteristic was first stored. Commit keeps the
	// stored time when the characteristic is committed again. May be zero.
	Created time.Time
}

// BucketState is the full state of one group in one time bucket of one
// characteristic: its accumulator and a small sample of its (centred)
// values. It is written whole, replacing what was stored for the same
// characteristic, start and group, so committing the same state twice
// leaves the store as committing it once.
type BucketState struct {
	Characteristic string
	Start          time.Time // the bucket's start; comes back in UTC
	Group          string    // 1 to 255 bytes of UTF-8
	Acc            stats.Accumulator
	Sample         []float64 // at most 4096 values, and at most Acc.N
}

// RawValue is one measurement as it arrived: its exact decimal text, its
// group, its event time and its optional id. Raw values are kept for replay
// and export; they are appended, never replaced.
type RawValue struct {
	Characteristic string
	Group          string
	Time           time.Time // event time; comes back in UTC
	Text           string    // exact decimal text as received, up to 256 bytes
	ID             string    // optional measurement id, up to 255 bytes
}
