package store

import (
	"errors"
	"math/rand/v2"
	"reflect"
	"strings"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/stats"
)

// sealJaws is the sealing scenario: seal temperatures of three jaws, one
// bucket per minute, with a sample of the centred values.
func sealBuckets(start time.Time) []BucketState {
	acc := func(xs ...float64) stats.Accumulator {
		var a stats.Accumulator
		for _, x := range xs {
			a.Add(x)
		}
		return a
	}
	return []BucketState{
		{Characteristic: "seal-temp", Start: start, Group: "jaw-A", Acc: acc(0.4, -0.2, 0.1), Sample: []float64{0.4, -0.2, 0.1}},
		{Characteristic: "seal-temp", Start: start, Group: "jaw-B", Acc: acc(1.3, 1.1), Sample: []float64{1.3}},
		{Characteristic: "seal-temp", Start: start.Add(time.Minute), Group: "jaw-A", Acc: acc(0.0), Sample: nil},
		{Characteristic: "seal-temp", Start: start.Add(time.Minute), Group: "jaw-C", Acc: acc(-0.7, -0.5, -0.9, -0.6)},
	}
}

func sealTemp(t testing.TB) Characteristic {
	return Characteristic{Name: "seal-temp", Unit: "°C", Reference: mustDecimal(t, "182.5"), SettingsHash: 42}
}

func TestCommitRoundTrip(t *testing.T) {
	s, _ := openTest(t)
	rng := rand.New(rand.NewPCG(1, 1))
	buckets := sealBuckets(shiftStart())
	raw := fillWeights(rng, shiftStart(), 25*time.Millisecond, 40)
	commit(t, s, &Batch{
		Characteristics: []Characteristic{sealTemp(t), fillWeight(t)},
		Buckets:         buckets,
		Raw:             raw,
		Consumer:        "lockstep-fill", Cursor: 1234,
	})

	chars, err := s.Characteristics()
	if err != nil {
		t.Fatal(err)
	}
	want := []Characteristic{fillWeight(t), sealTemp(t)} // sorted by name
	for i := range want {
		want[i].Created = want[i].Created.UTC()
	}
	if !reflect.DeepEqual(chars, want) {
		t.Errorf("characteristics:\n got %+v\nwant %+v", chars, want)
	}

	got := allBuckets(t, s, "seal-temp", time.Time{}, time.Time{})
	if len(got) != len(buckets) {
		t.Fatalf("%d bucket states, want %d", len(got), len(buckets))
	}
	for i := range got {
		if !got[i].Start.Equal(buckets[i].Start) || got[i].Group != buckets[i].Group ||
			got[i].Acc != buckets[i].Acc || !reflect.DeepEqual(got[i].Sample, buckets[i].Sample) {
			t.Errorf("bucket state %d: got %+v, want %+v", i, got[i], buckets[i])
		}
	}
	if err := sameRaw(allRaw(t, s, "fill-weight", time.Time{}, time.Time{}), raw); err != nil {
		t.Error(err)
	}
	if c, err := s.Cursor("lockstep-fill"); err != nil || c != 1234 {
		t.Errorf("cursor = %d, %v; want 1234", c, err)
	}
}

func TestCommitBucketStatesTwiceIsHarmless(t *testing.T) {
	s, _ := openTest(t)
	b := &Batch{Characteristics: []Characteristic{sealTemp(t)}, Buckets: sealBuckets(shiftStart())}
	commit(t, s, b)
	first := allBuckets(t, s, "seal-temp", time.Time{}, time.Time{})
	commit(t, s, b)
	if again := allBuckets(t, s, "seal-temp", time.Time{}, time.Time{}); !reflect.DeepEqual(first, again) {
		t.Errorf("after the second commit:\n got %+v\nwant %+v", again, first)
	}

	// A later full state replaces the stored one.
	upd := sealBuckets(shiftStart())[1]
	upd.Acc.Add(1.2)
	upd.Sample = append(upd.Sample, 1.2)
	commit(t, s, &Batch{Buckets: []BucketState{upd}})
	got := allBuckets(t, s, "seal-temp", shiftStart(), shiftStart().Add(time.Second))
	if len(got) != 2 || got[1].Acc != upd.Acc || !reflect.DeepEqual(got[1].Sample, upd.Sample) {
		t.Errorf("after the update: %+v", got)
	}
}

func TestCommitCursorCatchesRedelivery(t *testing.T) {
	s, _ := openTest(t)
	rng := rand.New(rand.NewPCG(2, 2))
	b := &Batch{
		Characteristics: []Characteristic{fillWeight(t)},
		Raw:             fillWeights(rng, shiftStart(), time.Second, 12),
		Consumer:        "lockstep-fill", Cursor: 500,
	}
	commit(t, s, b)
	for _, cursor := range []uint64{500, 499, 1} {
		b.Cursor = cursor
		err := s.Commit(b)
		if !errors.Is(err, ErrApplied) {
			t.Errorf("commit with cursor %d after 500: %v, want ErrApplied", cursor, err)
		}
	}
	if n := len(allRaw(t, s, "fill-weight", time.Time{}, time.Time{})); n != 12 {
		t.Errorf("%d raw values after the redeliveries, want 12", n)
	}
	if c, _ := s.Cursor("lockstep-fill"); c != 500 {
		t.Errorf("cursor %d, want 500", c)
	}

	// The next batch moves on; another consumer has its own cursor.
	next := &Batch{Raw: fillWeights(rng, shiftStart().Add(time.Minute), time.Second, 4), Consumer: "lockstep-fill", Cursor: 504}
	commit(t, s, next)
	commit(t, s, &Batch{Consumer: "lockstep-cap", Cursor: 7})
	if c, _ := s.Cursor("lockstep-fill"); c != 504 {
		t.Errorf("cursor %d, want 504", c)
	}
	if c, _ := s.Cursor("lockstep-cap"); c != 7 {
		t.Errorf("cursor of the other consumer %d, want 7", c)
	}
	if c, err := s.Cursor("lockstep-seal"); c != 0 || err != nil {
		t.Errorf("cursor of an unknown consumer: %d, %v; want 0", c, err)
	}
	// Cursor 0 leaves the cursor as it is.
	commit(t, s, &Batch{Raw: fillWeights(rng, shiftStart().Add(2*time.Minute), time.Second, 4), Consumer: "lockstep-fill"})
	if c, _ := s.Cursor("lockstep-fill"); c != 504 {
		t.Errorf("cursor %d after a batch without one, want 504", c)
	}
}

func TestCommitRefusesInvalidBatchWhole(t *testing.T) {
	s, _ := openTest(t)
	commit(t, s, &Batch{Characteristics: []Characteristic{fillWeight(t)}})
	good := RawValue{Characteristic: "fill-weight", Group: "line-1", Time: shiftStart(), Text: "500.12"}
	with := func(f func(*RawValue)) RawValue { r := good; f(&r); return r }
	longText := strings.Repeat("5", 257)
	cases := []struct {
		name string
		b    Batch
		want string
	}{
		{"comma decimal", Batch{Raw: []RawValue{good, with(func(r *RawValue) { r.Text = "500,12" })}}, `raw value 1 ("fill-weight" "line-1"): parse decimal "500,12"`},
		{"NaN", Batch{Raw: []RawValue{with(func(r *RawValue) { r.Text = "NaN" })}}, "not a finite number"},
		{"long text", Batch{Raw: []RawValue{with(func(r *RawValue) { r.Text = longText })}}, "text of 257 bytes"},
		{"no group", Batch{Raw: []RawValue{with(func(r *RawValue) { r.Group = "" })}}, "group: empty name"},
		{"zero time", Batch{Raw: []RawValue{with(func(r *RawValue) { r.Time = time.Time{} })}}, "time 0001-01-01"},
		{"year 2300", Batch{Raw: []RawValue{with(func(r *RawValue) { r.Time = time.Date(2300, 1, 1, 0, 0, 0, 0, time.UTC) })}}, "outside the years"},
		{"unknown characteristic", Batch{Raw: []RawValue{good, with(func(r *RawValue) { r.Characteristic = "cap-torque" })}}, `"cap-torque" is not stored`},
		{"reference changed", Batch{Characteristics: []Characteristic{func() Characteristic {
			c := fillWeight(t)
			c.Reference = mustDecimal(t, "500.5")
			return c
		}()}, Raw: []RawValue{good}}, "reference 500.5 differs from the stored 500"},
		{"sample larger than count", Batch{Buckets: []BucketState{{Characteristic: "fill-weight", Start: shiftStart(), Group: "line-1",
			Acc: stats.Accumulator{N: 1}, Sample: []float64{0.1, 0.2}}}}, "sample of 2 values from a count of 1"},
		{"negative count", Batch{Buckets: []BucketState{{Characteristic: "fill-weight", Start: shiftStart(), Group: "line-1",
			Acc: stats.Accumulator{N: -3}}}}, "count -3 is negative"},
		{"cursor without consumer", Batch{Raw: []RawValue{good}, Cursor: 9}, "consumer of cursor 9: empty name"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			err := s.Commit(&tc.b)
			if !errors.Is(err, ErrInvalid) || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("commit: %v; want ErrInvalid with %q", err, tc.want)
			}
		})
	}
	if n := len(allRaw(t, s, "fill-weight", time.Time{}, time.Time{})); n != 0 {
		t.Errorf("%d raw values stored from refused batches", n)
	}
	if c, _ := s.Cursor(""); c != 0 {
		t.Errorf("cursor %d stored from a refused batch", c)
	}
	chars, _ := s.Characteristics()
	if len(chars) != 1 || chars[0].Reference.String() != "500" {
		t.Errorf("characteristics after refused batches: %+v", chars)
	}
}

func TestCommitKeepsCreated(t *testing.T) {
	s, _ := openTest(t)
	c := fillWeight(t)
	commit(t, s, &Batch{Characteristics: []Characteristic{c}})
	again := c
	again.Created = shiftStart()
	again.SettingsHash = 0xbeef
	again.Unit = "gram"
	commit(t, s, &Batch{Characteristics: []Characteristic{again}})
	chars, err := s.Characteristics()
	if err != nil {
		t.Fatal(err)
	}
	if len(chars) != 1 || !chars[0].Created.Equal(c.Created) || chars[0].SettingsHash != 0xbeef || chars[0].Unit != "gram" {
		t.Errorf("got %+v; want the new settings and unit with the first created time %v", chars, c.Created)
	}
}

func TestReadUnknownCharacteristic(t *testing.T) {
	s, _ := openTest(t)
	if err := s.Raw("cap-torque", time.Time{}, time.Time{}, func(RawValue) error { return nil }); !errors.Is(err, ErrNotFound) {
		t.Errorf("raw: %v, want ErrNotFound", err)
	}
	if err := s.Buckets("cap-torque", time.Time{}, time.Time{}, func(BucketState) error { return nil }); !errors.Is(err, ErrNotFound) {
		t.Errorf("buckets: %v, want ErrNotFound", err)
	}
	if _, err := s.Retain("cap-torque", shiftStart(), shiftStart()); !errors.Is(err, ErrNotFound) {
		t.Errorf("retain: %v, want ErrNotFound", err)
	}
}

func TestBucketsRange(t *testing.T) {
	s, _ := openTest(t)
	commit(t, s, &Batch{Characteristics: []Characteristic{sealTemp(t)}, Buckets: sealBuckets(shiftStart())})
	m := shiftStart().Add(time.Minute)
	cases := []struct {
		name     string
		from, to time.Time
		want     int
	}{
		{"all", time.Time{}, time.Time{}, 4},
		{"first minute", shiftStart(), m, 2},
		{"from the second minute", m, time.Time{}, 2},
		{"to the second minute", time.Time{}, m, 2},
		{"one nanosecond past the first start", shiftStart().Add(1), time.Time{}, 2},
		{"empty", m, m, 0},
		{"reversed", m, shiftStart(), 0},
		{"before", time.Date(1950, 1, 1, 0, 0, 0, 0, time.UTC), shiftStart(), 0},
		{"from far past to far future", time.Date(1, 1, 2, 0, 0, 0, 0, time.UTC), time.Date(9999, 1, 1, 0, 0, 0, 0, time.UTC), 4},
	}
	for _, tc := range cases {
		if got := allBuckets(t, s, "seal-temp", tc.from, tc.to); len(got) != tc.want {
			t.Errorf("%s: %d bucket states, want %d", tc.name, len(got), tc.want)
		}
	}
	stop := errors.New("enough")
	n := 0
	err := s.Buckets("seal-temp", time.Time{}, time.Time{}, func(BucketState) error { n++; return stop })
	if err != stop || n != 1 {
		t.Errorf("stopping: %v after %d calls; want the callback's error after 1", err, n)
	}
}
