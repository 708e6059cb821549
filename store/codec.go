package store

import (
	"encoding/binary"
	"fmt"
	"math"
	"strconv"
	"unicode/utf8"

	"github.com/lockstep-project/lockstep/stats"
)

// Record codecs. Every value starts with a version byte for its kind, so a
// later schema can change one kind at a time. Decoders check every length
// against the limits in schema.go and the remaining bytes, refuse trailing
// bytes, and return errors wrapping ErrCorrupt that name the key; they never
// panic and never allocate more than the input's size suggests.

const (
	characteristicV1 = 1
	bucketStateV1    = 1
	chunkV1          = 1
)

// Characteristic record, version 1 (key: the name):
//
//	byte     version = 1
//	byte     flags: bit 0 set when Created is stored
//	uvarint  len(Unit), Unit
//	uvarint  len(reference text), reference text (stats.Decimal.String)
//	uint64   SettingsHash, big-endian
//	varint   Created as Unix nanoseconds, when flag bit 0 is set
func appendCharacteristic(dst []byte, c *Characteristic) []byte {
	var flags byte
	created, hasCreated := nanos(c.Created)
	if hasCreated {
		flags |= 1
	}
	dst = append(dst, characteristicV1, flags)
	dst = appendBytes(dst, c.Unit)
	dst = appendBytes(dst, c.Reference.String())
	dst = binary.BigEndian.AppendUint64(dst, c.SettingsHash)
	if hasCreated {
		dst = binary.AppendVarint(dst, created)
	}
	return dst
}

func decodeCharacteristic(key, val []byte) (Characteristic, error) {
	c := Characteristic{Name: string(key)}
	if err := checkName(key); err != nil {
		return c, corrupt("characteristic", strconv.Quote(string(key)), err)
	}
	d := decoder{b: val}
	if v := d.byte(); d.err == nil && v != characteristicV1 {
		d.fail("unknown version %d", v)
	}
	flags := d.byte()
	if d.err == nil && flags&^1 != 0 {
		d.fail("unknown flags %#x", flags)
	}
	c.Unit = string(d.bytes(maxName, "unit"))
	ref := d.bytes(maxText, "reference")
	c.SettingsHash = d.uint64()
	if flags&1 != 0 {
		c.Created = fromNanos(d.varint())
	}
	d.end()
	if d.err == nil {
		r, err := stats.ParseDecimal(string(ref))
		if err != nil {
			d.err = err
		}
		c.Reference = r
	}
	if d.err != nil {
		return Characteristic{}, corrupt("characteristic", strconv.Quote(string(key)), d.err)
	}
	return c, nil
}

// Bucket state, version 1 (key: bucket start as a time key, then the group):
//
//	byte     version = 1
//	uvarint  Acc.N
//	float64  Acc.Mean, Acc.M2, Acc.Min, Acc.Max: IEEE-754 bits, big-endian
//	uvarint  len(Sample), then each value as IEEE-754 bits, big-endian
func appendBucketState(dst []byte, b *BucketState) []byte {
	dst = append(dst, bucketStateV1)
	dst = binary.AppendUvarint(dst, uint64(b.Acc.N))
	for _, f := range [...]float64{b.Acc.Mean, b.Acc.M2, b.Acc.Min, b.Acc.Max} {
		dst = binary.BigEndian.AppendUint64(dst, math.Float64bits(f))
	}
	dst = binary.AppendUvarint(dst, uint64(len(b.Sample)))
	for _, f := range b.Sample {
		dst = binary.BigEndian.AppendUint64(dst, math.Float64bits(f))
	}
	return dst
}

func bucketKey(start int64, group string) []byte {
	return append(appendTimeKey(make([]byte, 0, 8+len(group)), start), group...)
}

// decodeBucketState decodes a bucket state of characteristic char.
func decodeBucketState(char string, key, val []byte) (BucketState, error) {
	name := func() string {
		if len(key) < 8 {
			return fmt.Sprintf("%q key %x", char, key)
		}
		return fmt.Sprintf("%q %s %q", char, fromNanos(timeFromKey(key)).Format(timeLayout), key[8:])
	}
	if len(key) < 9 {
		return BucketState{}, corrupt("bucket state", name(), fmt.Errorf("key of %d bytes", len(key)))
	}
	if err := checkName(key[8:]); err != nil {
		return BucketState{}, corrupt("bucket state", name(), fmt.Errorf("group: %w", err))
	}
	b := BucketState{Characteristic: char, Start: fromNanos(timeFromKey(key)), Group: string(key[8:])}
	d := decoder{b: val}
	if v := d.byte(); d.err == nil && v != bucketStateV1 {
		d.fail("unknown version %d", v)
	}
	n := d.uvarint()
	if d.err == nil && n > math.MaxInt64 {
		d.fail("count %d out of range", n)
	}
	b.Acc.N = int64(n)
	b.Acc.Mean, b.Acc.M2, b.Acc.Min, b.Acc.Max = d.float64(), d.float64(), d.float64(), d.float64()
	ns := d.uvarint()
	switch {
	case d.err != nil:
	case ns > maxSample:
		d.fail("sample of %d values, more than %d", ns, maxSample)
	case ns > n:
		d.fail("sample of %d values from %d", ns, n)
	case ns*8 > uint64(d.left()):
		d.fail("sample of %d values in %d bytes", ns, d.left())
	case ns > 0:
		b.Sample = make([]float64, ns)
		for i := range b.Sample {
			b.Sample[i] = d.float64()
		}
	}
	d.end()
	if d.err != nil {
		return BucketState{}, corrupt("bucket state", name(), d.err)
	}
	return b, nil
}

// Cursor, (key: the consumer name): the stream sequence as uint64
// big-endian.
func decodeCursor(key, val []byte) (uint64, error) {
	if err := checkName(key); err != nil {
		return 0, corrupt("cursor", strconv.Quote(string(key)), err)
	}
	if len(val) != 8 {
		return 0, corrupt("cursor", strconv.Quote(string(key)), fmt.Errorf("%d bytes, not 8", len(val)))
	}
	return binary.BigEndian.Uint64(val), nil
}

// timeLayout formats times in error messages.
const timeLayout = "2006-01-02T15:04:05.999999999Z07:00"

// checkName checks a characteristic, group or consumer name.
func checkName(b []byte) error {
	switch {
	case len(b) == 0:
		return fmt.Errorf("empty name")
	case len(b) > maxName:
		return fmt.Errorf("name of %d bytes, more than %d", len(b), maxName)
	case !utf8.Valid(b):
		return fmt.Errorf("name %q is not UTF-8", b)
	}
	return nil
}

// checkNameString is checkName for a string, without copying it.
func checkNameString(s string) error {
	switch {
	case len(s) == 0:
		return fmt.Errorf("empty name")
	case len(s) > maxName:
		return fmt.Errorf("name of %d bytes, more than %d", len(s), maxName)
	case !utf8.ValidString(s):
		return fmt.Errorf("name %q is not UTF-8", s)
	}
	return nil
}

func corrupt(kind, name string, err error) error {
	return fmt.Errorf("decode %s %s: %w: %w", kind, name, ErrCorrupt, err)
}

func appendBytes(dst []byte, s string) []byte {
	return append(binary.AppendUvarint(dst, uint64(len(s))), s...)
}

// decoder reads a value; the first failure sticks in err, and every later
// read returns zero.
type decoder struct {
	b   []byte
	off int
	err error
}

func (d *decoder) fail(format string, args ...any) {
	if d.err == nil {
		d.err = fmt.Errorf(format+" at byte %d", append(args, d.off)...)
	}
}

func (d *decoder) left() int { return len(d.b) - d.off }

func (d *decoder) byte() byte {
	if d.err != nil {
		return 0
	}
	if d.left() < 1 {
		d.fail("truncated")
		return 0
	}
	d.off++
	return d.b[d.off-1]
}

func (d *decoder) uvarint() uint64 {
	if d.err != nil {
		return 0
	}
	v, n := binary.Uvarint(d.b[d.off:])
	if n <= 0 {
		if n == 0 {
			d.fail("truncated")
		} else {
			d.fail("varint overflow")
		}
		return 0
	}
	d.off += n
	return v
}

func (d *decoder) varint() int64 {
	if d.err != nil {
		return 0
	}
	v, n := binary.Varint(d.b[d.off:])
	if n <= 0 {
		if n == 0 {
			d.fail("truncated")
		} else {
			d.fail("varint overflow")
		}
		return 0
	}
	d.off += n
	return v
}

func (d *decoder) uint64() uint64 {
	if d.err != nil {
		return 0
	}
	if d.left() < 8 {
		d.fail("truncated")
		return 0
	}
	d.off += 8
	return binary.BigEndian.Uint64(d.b[d.off-8:])
}

func (d *decoder) float64() float64 { return math.Float64frombits(d.uint64()) }

// bytes reads a uvarint length and that many bytes, at most max. The result
// aliases the input.
func (d *decoder) bytes(max int, what string) []byte {
	n := d.uvarint()
	if d.err != nil {
		return nil
	}
	if n > uint64(max) {
		d.fail("%s of %d bytes, more than %d", what, n, max)
		return nil
	}
	if n > uint64(d.left()) {
		d.fail("%s of %d bytes truncated", what, n)
		return nil
	}
	d.off += int(n)
	return d.b[d.off-int(n) : d.off]
}

// end checks that the whole value was read.
func (d *decoder) end() {
	if d.err == nil && d.left() != 0 {
		d.fail("%d trailing bytes", d.left())
	}
}
