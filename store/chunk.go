package store

import (
	"encoding/binary"
	"fmt"
	"math"
	"slices"
	"strconv"
	"time"
)

// Raw values are stored in chunks: one bbolt key per run of up to
// maxChunkRecords values of one characteristic, so that a commit of a
// thousand values is one put of a few kilobytes instead of a thousand puts.
//
// Commit sorts a batch's values by time (keeping arrival order among equal
// times) and cuts them into chunks that never cross a boundary of the raw
// slot, a fixed hour of Unix time. Chunks from different commits may overlap
// in time (late values, values from a slow group); Raw merges them as it
// reads. The slot bounds how far back a read must start to find every chunk
// that holds values at or after its start: the chunks of one slot.
//
// Key: the first value's time as a time key, then the uint64 big-endian
// sequence from the characteristic's sub-bucket (NextSequence), so keys are
// unique and equal first times sort in commit order.
//
// Value, version 1:
//
//	byte     version = 1
//	uvarint  n, the number of values, 1 to maxChunkRecords
//	uvarint  span: last value's time − first value's time, in nanoseconds
//	uvarint  number of groups g, 1 to n; then g times: uvarint length, name
//	n times:
//	  uvarint  time − previous value's time (the first: 0), nanoseconds
//	  uvarint  index into the group table
//	  uvarint  len(text), the decimal text (1 to maxText bytes)
//	  uvarint  len(id), the id (0 to maxID bytes)

const (
	maxChunkRecords = 1000
	rawSlot         = int64(time.Hour)
)

// slotStart is the start of the raw slot holding t (clamped at the start of
// int64 time).
func slotStart(t int64) int64 {
	m := t % rawSlot
	if m < 0 {
		m += rawSlot
	}
	if t < math.MinInt64+m {
		return math.MinInt64
	}
	return t - m
}

// rawRec is a raw value ready to encode: validated, time in nanoseconds.
type rawRec struct {
	t               int64
	group, text, id string
	gi              uint64 // appendChunk's index of group
}

// appendChunk encodes recs, which must be sorted by time, number 1 to
// maxChunkRecords, lie in one raw slot, and be valid. It sets their gi.
func appendChunk(dst []byte, recs []rawRec) []byte {
	var groups []string
	index := make(map[string]uint64, 8)
	for i := range recs {
		gi, ok := index[recs[i].group]
		if !ok {
			gi = uint64(len(groups))
			index[recs[i].group] = gi
			groups = append(groups, recs[i].group)
		}
		recs[i].gi = gi
	}
	first, last := recs[0].t, recs[len(recs)-1].t
	size := 1 + 3*binary.MaxVarintLen64
	for _, g := range groups {
		size += 2 + len(g)
	}
	for i := range recs {
		size += binary.MaxVarintLen64 + 4 + len(recs[i].text) + len(recs[i].id)
	}
	dst = slices.Grow(dst, size)
	dst = append(dst, chunkV1)
	dst = binary.AppendUvarint(dst, uint64(len(recs)))
	dst = binary.AppendUvarint(dst, uint64(last-first))
	dst = binary.AppendUvarint(dst, uint64(len(groups)))
	for _, g := range groups {
		dst = appendBytes(dst, g)
	}
	prev := first
	for i := range recs {
		r := &recs[i]
		dst = binary.AppendUvarint(dst, uint64(r.t-prev))
		prev = r.t
		dst = binary.AppendUvarint(dst, r.gi)
		dst = appendBytes(dst, r.text)
		dst = appendBytes(dst, r.id)
	}
	return dst
}

func chunkKey(start int64, seq uint64) []byte {
	return binary.BigEndian.AppendUint64(appendTimeKey(make([]byte, 0, 16), start), seq)
}

// chunkReader decodes one chunk value by value, without copying: its slices
// alias the bbolt value and are valid only inside the transaction.
type chunkReader struct {
	char       string
	start, end int64
	seq        uint64
	n, i       int
	groups     []string
	d          decoder

	// The current value, after next returned true.
	t     int64
	group string
	text  []byte
	id    []byte
}

// openChunk decodes the key and the header of a chunk of characteristic
// char.
func openChunk(char string, key, val []byte) (*chunkReader, error) {
	c := &chunkReader{char: char, d: decoder{b: val}}
	if len(key) != 16 {
		return nil, c.corrupt(key, fmt.Errorf("key of %d bytes, not 16", len(key)))
	}
	c.start = timeFromKey(key)
	c.seq = binary.BigEndian.Uint64(key[8:])
	d := &c.d
	if v := d.byte(); d.err == nil && v != chunkV1 {
		d.fail("unknown version %d", v)
	}
	n, sp := d.uvarint(), d.uvarint()
	switch {
	case d.err != nil:
	case n == 0 || n > maxChunkRecords:
		d.fail("%d values, not 1 to %d", n, maxChunkRecords)
	case sp >= uint64(rawSlot) || c.start > math.MaxInt64-int64(sp):
		d.fail("span %d ns out of range", sp)
	default:
		c.n, c.end = int(n), c.start+int64(sp)
		if slotStart(c.end) != slotStart(c.start) {
			d.fail("span %d ns crosses a raw slot", sp)
		}
	}
	g := d.uvarint()
	if d.err == nil && (g == 0 || g > n) {
		d.fail("%d groups for %d values", g, n)
	}
	if d.err == nil {
		c.groups = make([]string, 0, g)
		for range g {
			b := d.bytes(maxName, "group")
			if d.err != nil {
				break
			}
			if err := checkName(b); err != nil {
				d.fail("group: %v", err)
				break
			}
			c.groups = append(c.groups, string(b))
		}
	}
	if d.err != nil {
		return nil, c.corrupt(key, d.err)
	}
	c.t = c.start
	return c, nil
}

// next decodes the next value; false at the end of the chunk.
func (c *chunkReader) next() (bool, error) {
	d := &c.d
	if c.i == c.n {
		d.end()
		if d.err == nil && c.t != c.end {
			d.fail("last value %d ns before the end the header says", c.end-c.t)
		}
		return false, c.corrupt(nil, d.err)
	}
	dt := d.uvarint()
	switch {
	case d.err != nil:
	case c.i == 0 && dt != 0:
		d.fail("first value %d ns after the chunk's start", dt)
	case dt > uint64(c.end-c.t):
		d.fail("value past the chunk's end")
	}
	c.t += int64(dt)
	gi := d.uvarint()
	if d.err == nil && gi >= uint64(len(c.groups)) {
		d.fail("group index %d of %d", gi, len(c.groups))
	}
	c.text = d.bytes(maxText, "text")
	if d.err == nil && len(c.text) == 0 {
		d.fail("empty text")
	}
	c.id = d.bytes(maxID, "id")
	if d.err != nil {
		return false, c.corrupt(nil, d.err)
	}
	c.group = c.groups[gi]
	c.i++
	return true, nil
}

// value returns the current value as a RawValue, copying its text and id.
func (c *chunkReader) value() RawValue {
	return RawValue{Characteristic: c.char, Group: c.group, Time: fromNanos(c.t),
		Text: string(c.text), ID: string(c.id)}
}

func (c *chunkReader) corrupt(key []byte, err error) error {
	if err == nil {
		return nil
	}
	name := fmt.Sprintf("%s %s #%d", strconv.Quote(c.char), fromNanos(c.start).Format(timeLayout), c.seq)
	if key != nil && len(key) != 16 {
		name = fmt.Sprintf("%s key %x", strconv.Quote(c.char), key)
	}
	return corrupt("raw chunk", name, err)
}

// decodeChunk decodes a whole chunk; for Verify, Retain and tests.
func decodeChunk(char string, key, val []byte) ([]RawValue, error) {
	c, err := openChunk(char, key, val)
	if err != nil {
		return nil, err
	}
	out := make([]RawValue, 0, c.n)
	for {
		ok, err := c.next()
		if err != nil {
			return nil, err
		}
		if !ok {
			return out, nil
		}
		out = append(out, c.value())
	}
}
