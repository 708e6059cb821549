package store

import (
	"encoding/binary"
	"errors"
	"math"
	"reflect"
	"strings"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/stats"
)

func characteristicCases(t testing.TB) []Characteristic {
	return []Characteristic{
		fillWeight(t),
		sealTemp(t), // no created time
		{Name: "spindle-runout", Unit: "µm", Reference: mustDecimal(t, "-0.0005"), SettingsHash: math.MaxUint64,
			Created: time.Date(1969, 7, 20, 20, 17, 40, 123, time.UTC)},
		{Name: "nozzle-flow", Reference: mustDecimal(t, "1000000000001.3")},
	}
}

func bucketCases() []BucketState {
	out := sealBuckets(shiftStart())
	out = append(out,
		BucketState{Characteristic: "seal-temp", Start: time.Date(1970, 1, 1, 0, 0, 0, -1, time.UTC), Group: "jaw-Ω"},
		BucketState{Characteristic: "seal-temp", Start: shiftStart(), Group: "jaw-A",
			Acc: stats.Accumulator{N: math.MaxInt64, Mean: math.Inf(-1), M2: math.NaN(), Min: math.Copysign(0, -1), Max: math.SmallestNonzeroFloat64}},
	)
	return out
}

func chunkCases() [][]rawRec {
	t0 := shiftStart().UnixNano()
	many := make([]rawRec, maxChunkRecords)
	for i := range many {
		many[i] = rawRec{t: t0 + int64(i)*int64(time.Second), group: []string{"line-1", "line-2", "line-3", "line-4"}[i%4], text: "500.25"}
	}
	return [][]rawRec{
		{{t: t0, group: "line-1", text: "500.12", id: "B7-1"}},
		many,
		{ // the whole of a slot, before 1970, equal times, long text
			{t: -int64(time.Hour), group: "head-1", text: "-2.2e-3"},
			{t: -int64(time.Hour), group: "head-2", text: "2." + strings.Repeat("0", 200) + "1", id: strings.Repeat("x", maxID)},
			{t: -1, group: "head-1", text: "+.5"},
		},
	}
}

func TestCodecRoundTrip(t *testing.T) {
	for _, c := range characteristicCases(t) {
		got, err := decodeCharacteristic([]byte(c.Name), appendCharacteristic(nil, &c))
		if err != nil {
			t.Errorf("%s: %v", c.Name, err)
			continue
		}
		if got.Name != c.Name || got.Unit != c.Unit || got.Reference != c.Reference ||
			got.SettingsHash != c.SettingsHash || !got.Created.Equal(c.Created) {
			t.Errorf("characteristic: got %+v, want %+v", got, c)
		}
	}
	for _, b := range bucketCases() {
		start, _ := nanos(b.Start)
		got, err := decodeBucketState(b.Characteristic, bucketKey(start, b.Group), appendBucketState(nil, &b))
		if err != nil {
			t.Errorf("%s: %v", b.Group, err)
			continue
		}
		if !sameBucket(got, b) {
			t.Errorf("bucket state: got %+v, want %+v", got, b)
		}
	}
	for i, recs := range chunkCases() {
		got, err := decodeChunk("c", chunkKey(recs[0].t, 9), appendChunk(nil, recs))
		if err != nil {
			t.Errorf("chunk %d: %v", i, err)
			continue
		}
		if err := sameRaw(got, toRaw("c", recs)); err != nil {
			t.Errorf("chunk %d: %v", i, err)
		}
	}
}

// sameBucket compares bucket states, floats by their bits.
func sameBucket(a, b BucketState) bool {
	bits := func(a stats.Accumulator) [4]uint64 {
		return [4]uint64{math.Float64bits(a.Mean), math.Float64bits(a.M2), math.Float64bits(a.Min), math.Float64bits(a.Max)}
	}
	if a.Characteristic != b.Characteristic || !a.Start.Equal(b.Start) || a.Group != b.Group ||
		a.Acc.N != b.Acc.N || bits(a.Acc) != bits(b.Acc) || len(a.Sample) != len(b.Sample) {
		return false
	}
	for i := range a.Sample {
		if math.Float64bits(a.Sample[i]) != math.Float64bits(b.Sample[i]) {
			return false
		}
	}
	return true
}

func toRaw(char string, recs []rawRec) []RawValue {
	out := make([]RawValue, len(recs))
	for i, r := range recs {
		out[i] = RawValue{Characteristic: char, Group: r.group, Time: fromNanos(r.t), Text: r.text, ID: r.id}
	}
	return out
}

// TestDecodeTruncated: every proper prefix of a valid value, and the value
// with a byte more, is refused with ErrCorrupt.
func TestDecodeTruncated(t *testing.T) {
	type dec func(val []byte) error
	var cases []struct {
		name string
		val  []byte
		dec  dec
	}
	add := func(name string, val []byte, d dec) {
		cases = append(cases, struct {
			name string
			val  []byte
			dec  dec
		}{name, val, d})
	}
	for _, c := range characteristicCases(t) {
		add("characteristic "+c.Name, appendCharacteristic(nil, &c), func(v []byte) error {
			_, err := decodeCharacteristic([]byte(c.Name), v)
			return err
		})
	}
	for _, b := range bucketCases() {
		start, _ := nanos(b.Start)
		add("bucket "+b.Group, appendBucketState(nil, &b), func(v []byte) error {
			_, err := decodeBucketState(b.Characteristic, bucketKey(start, b.Group), v)
			return err
		})
	}
	for _, recs := range chunkCases() {
		add("chunk", appendChunk(nil, recs), func(v []byte) error {
			_, err := decodeChunk("c", chunkKey(recs[0].t, 1), v)
			return err
		})
	}
	for _, tc := range cases {
		if err := tc.dec(tc.val); err != nil {
			t.Fatalf("%s: whole value refused: %v", tc.name, err)
		}
		// Every prefix of the small values, every seventh of the large.
		step := 1
		if len(tc.val) > 2048 {
			step = 7
		}
		for n := 0; n < len(tc.val); n += step {
			if err := tc.dec(tc.val[:n]); !errors.Is(err, ErrCorrupt) {
				t.Errorf("%s: prefix of %d of %d bytes: %v, want ErrCorrupt", tc.name, n, len(tc.val), err)
			}
		}
		if err := tc.dec(append(tc.val[:len(tc.val):len(tc.val)], 0)); !errors.Is(err, ErrCorrupt) {
			t.Errorf("%s: trailing byte: %v, want ErrCorrupt", tc.name, err)
		}
	}
}

func TestDecodeChunkRefuses(t *testing.T) {
	t0 := shiftStart().UnixNano()
	key := chunkKey(t0, 3)
	// Build values by hand: header fields, then records.
	chunk := func(n, span uint64, groups []string, recs ...[]byte) []byte {
		v := []byte{chunkV1}
		v = appendUvarints(v, n, span, uint64(len(groups)))
		for _, g := range groups {
			v = appendBytes(v, g)
		}
		for _, r := range recs {
			v = append(v, r...)
		}
		return v
	}
	rec := func(dt, gi uint64, text, id string) []byte {
		return appendBytes(appendBytes(appendUvarints(nil, dt, gi), text), id)
	}
	ok := chunk(2, 5, []string{"line-1"}, rec(0, 0, "1", ""), rec(5, 0, "2", ""))
	if _, err := decodeChunk("c", key, ok); err != nil {
		t.Fatalf("hand-built chunk refused: %v", err)
	}
	cases := []struct {
		name string
		key  []byte
		val  []byte
		want string
	}{
		{"version 2", key, append([]byte{2}, ok[1:]...), "unknown version 2"},
		{"short key", key[:15], ok, "key of 15 bytes"},
		{"no values", key, chunk(0, 0, []string{"line-1"}), "0 values"},
		{"too many values", key, chunk(1001, 0, []string{"line-1"}), "1001 values"},
		{"no groups", key, chunk(1, 0, nil, rec(0, 0, "1", "")), "0 groups"},
		{"empty group", key, chunk(1, 0, []string{""}, rec(0, 0, "1", "")), "empty name"},
		{"group index", key, chunk(1, 0, []string{"line-1"}, rec(0, 1, "1", "")), "group index 1 of 1"},
		{"crosses slot", chunkKey(slotStart(t0)+int64(time.Hour)-2, 1), chunk(2, 5, []string{"line-1"}, rec(0, 0, "1", ""), rec(5, 0, "2", "")), "crosses a raw slot"},
		{"span of an hour", key, chunk(1, uint64(time.Hour), []string{"line-1"}, rec(0, 0, "1", "")), "out of range"},
		{"first after start", key, chunk(1, 4, []string{"line-1"}, rec(4, 0, "1", "")), "first value 4 ns after"},
		{"past the end", key, chunk(2, 5, []string{"line-1"}, rec(0, 0, "1", ""), rec(6, 0, "2", "")), "past the chunk's end"},
		{"short of the end", key, chunk(2, 5, []string{"line-1"}, rec(0, 0, "1", ""), rec(4, 0, "2", "")), "1 ns before the end"},
		{"empty text", key, chunk(1, 0, []string{"line-1"}, rec(0, 0, "", "")), "empty text"},
		{"long text", key, chunk(1, 0, []string{"line-1"}, rec(0, 0, strings.Repeat("1", maxText+1), "")), "text of 257 bytes, more than 256"},
		{"long id", key, chunk(1, 0, []string{"line-1"}, rec(0, 0, "1", strings.Repeat("i", maxID+1))), "id of 256 bytes"},
		{"missing record", key, chunk(2, 0, []string{"line-1"}, rec(0, 0, "1", "")), "truncated"},
		{"varint overflow", key, append([]byte{chunkV1}, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0x01), "varint overflow"},
	}
	for _, tc := range cases {
		_, err := decodeChunk("fill-weight", tc.key, tc.val)
		if !errors.Is(err, ErrCorrupt) || !strings.Contains(err.Error(), tc.want) || !strings.Contains(err.Error(), `"fill-weight"`) {
			t.Errorf("%s: %v\nwant ErrCorrupt naming the chunk with %q", tc.name, err, tc.want)
		}
	}
}

func appendUvarints(dst []byte, xs ...uint64) []byte {
	for _, x := range xs {
		dst = binary.AppendUvarint(dst, x)
	}
	return dst
}

func TestDecodeBucketRefuses(t *testing.T) {
	b := sealBuckets(shiftStart())[0]
	start, _ := nanos(b.Start)
	key := bucketKey(start, b.Group)
	val := appendBucketState(nil, &b)
	cases := []struct {
		name     string
		key, val []byte
		want     string
	}{
		{"no group", key[:8], val, "key of 8 bytes"},
		{"version 0", key, append([]byte{0}, val[1:]...), "unknown version 0"},
		{"huge count", key, append(append([]byte{1}, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0x01), val[2:]...), "out of range"},
		{"sample above count", key, append(val[:1+1+32:1+1+32], 4), "sample of 4 values from 3"},
		{"huge sample", key, appendUvarints(append(appendUvarints([]byte{1}, 1<<40), make([]byte, 32)...), 1<<40), "sample of 1099511627776 values, more than 4096"},
	}
	for _, tc := range cases {
		_, err := decodeBucketState("seal-temp", tc.key, tc.val)
		if !errors.Is(err, ErrCorrupt) || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: %v\nwant ErrCorrupt with %q", tc.name, err, tc.want)
		}
	}
	// A sample count far beyond the bytes left is refused before allocating.
	v := appendUvarints(append(appendUvarints([]byte{1}, 5000), make([]byte, 32)...), 4000)
	if _, err := decodeBucketState("seal-temp", key, v); !errors.Is(err, ErrCorrupt) || !strings.Contains(err.Error(), "sample of 4000 values in 0 bytes") {
		t.Errorf("sample beyond the value: %v", err)
	}
}

func TestSpan(t *testing.T) {
	d := func(y int) time.Time { return time.Date(y, 1, 1, 0, 0, 0, 0, time.UTC) }
	cases := []struct {
		from, to time.Time
		lo, hi   int64
		ok       bool
	}{
		{time.Time{}, time.Time{}, math.MinInt64, math.MaxInt64, true},
		{d(2026), d(2027), d(2026).UnixNano(), d(2027).UnixNano() - 1, true},
		{d(2027), d(2026), 0, 0, false},
		{d(1000), d(3000), math.MinInt64, math.MaxInt64, true},
		{d(3000), time.Time{}, 0, 0, false},
		{time.Time{}, d(1000), 0, 0, false},
		{time.Time{}, time.Unix(0, math.MinInt64), 0, 0, false},
	}
	for _, tc := range cases {
		lo, hi, ok := span(tc.from, tc.to)
		if ok != tc.ok || (ok && (lo != tc.lo || hi != tc.hi)) {
			t.Errorf("span(%v, %v) = %d, %d, %v; want %d, %d, %v", tc.from, tc.to, lo, hi, ok, tc.lo, tc.hi, tc.ok)
		}
	}
}

func TestSlotStart(t *testing.T) {
	h := int64(time.Hour)
	for _, tc := range []struct{ t, want int64 }{
		{0, 0}, {1, 0}, {h - 1, 0}, {h, h}, {-1, -h}, {-h, -h}, {-h - 1, -2 * h},
		{math.MinInt64, math.MinInt64}, {math.MinInt64 + 5, math.MinInt64},
		{math.MaxInt64, math.MaxInt64 - math.MaxInt64%h},
	} {
		if got := slotStart(tc.t); got != tc.want {
			t.Errorf("slotStart(%d) = %d, want %d", tc.t, got, tc.want)
		}
	}
}

func TestTimeKeyOrder(t *testing.T) {
	times := []int64{math.MinInt64, -int64(time.Hour), -1, 0, 1, shiftStart().UnixNano(), math.MaxInt64}
	for i := 1; i < len(times); i++ {
		a, b := appendTimeKey(nil, times[i-1]), appendTimeKey(nil, times[i])
		if string(a) >= string(b) {
			t.Errorf("key of %d (%x) not below key of %d (%x)", times[i-1], a, times[i], b)
		}
		if got := timeFromKey(b); got != times[i] {
			t.Errorf("timeFromKey(%x) = %d, want %d", b, got, times[i])
		}
	}
	if !reflect.DeepEqual(fromNanos(shiftStart().UnixNano()), shiftStart()) {
		t.Error("fromNanos does not give back the UTC time")
	}
}
