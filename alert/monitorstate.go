package alert

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"slices"
	"time"
)

// monitorStateVersion is the first byte of State's encoding.
const monitorStateVersion = 1

// Bounds the state decoder enforces, so that a corrupt or hostile record
// cannot claim memory.
const (
	maxStateGroups  = 1 << 16
	maxStateName    = 1 << 12
	maxStateDetects = 64
)

// ErrMonitorState is wrapped by every error Restore returns.
var ErrMonitorState = errors.New("bad monitor state")

// State returns the monitor's state in a compact, versioned binary form,
// for the daemon to persist with each commit: the confirmation and clearing
// counters of every condition, and per group its CUSUM sums and the latest
// time it was seen. The rule is not part of it.
//
// Layout (integers as unsigned varints unless said otherwise): version
// byte 1; the means, spread and reject trackers; the number of CUSUM
// detectors c with each one's k (float64 bits, little-endian); the number of
// groups, and for each its name (length, bytes), last seen (signed varint,
// ns since the Unix epoch, 0 for never), its silent tracker, and its c pairs
// of sums S⁺, S⁻ (float64 bits). A tracker is hold, quiet and a raised byte.
func (m *Monitor) State() ([]byte, error) {
	b := []byte{monitorStateVersion}
	b = appendTracker(b, m.means)
	b = appendTracker(b, m.spread)
	b = appendTracker(b, m.reject)
	b = binary.AppendUvarint(b, uint64(len(m.rule.CUSUMs)))
	for _, c := range m.rule.CUSUMs {
		b = binary.LittleEndian.AppendUint64(b, math.Float64bits(c.K))
	}
	names := make([]string, 0, len(m.group))
	for n := range m.group {
		names = append(names, n)
	}
	slices.Sort(names)
	if len(names) > maxStateGroups {
		return nil, fmt.Errorf("encode monitor state: %d groups, more than %d", len(names), maxStateGroups)
	}
	b = binary.AppendUvarint(b, uint64(len(names)))
	for _, n := range names {
		g := m.group[n]
		if len(n) > maxStateName {
			return nil, fmt.Errorf("encode monitor state: group name of %d bytes, more than %d", len(n), maxStateName)
		}
		b = binary.AppendUvarint(b, uint64(len(n)))
		b = append(b, n...)
		var ns int64
		if !g.lastSeen.IsZero() {
			ns = g.lastSeen.UnixNano()
		}
		b = binary.AppendVarint(b, ns)
		b = appendTracker(b, g.silent)
		for j := range m.rule.CUSUMs {
			var hi, lo float64
			if j < len(g.hi) {
				hi, lo = g.hi[j], g.lo[j]
			}
			b = binary.LittleEndian.AppendUint64(b, math.Float64bits(hi))
			b = binary.LittleEndian.AppendUint64(b, math.Float64bits(lo))
		}
	}
	return b, nil
}

func appendTracker(b []byte, t tracker) []byte {
	b = binary.AppendUvarint(b, uint64(t.hold))
	b = binary.AppendUvarint(b, uint64(t.quiet))
	if t.raised {
		return append(b, 1)
	}
	return append(b, 0)
}

// Restore replaces the monitor's state with one State returned, possibly by
// another process. CUSUM sums are kept only for the detectors whose k
// matches the rule's at the same position; the others start from zero (the
// rule changed). An error wraps ErrMonitorState, says what is wrong, and
// leaves the monitor as it was.
func (m *Monitor) Restore(data []byte) error {
	d := stateDecoder{b: data}
	if v := d.byte(); d.err == nil && v != monitorStateVersion {
		return fmt.Errorf("restore monitor state: %w: version %d, this build reads version %d", ErrMonitorState, v, monitorStateVersion)
	}
	means, spread, reject := d.tracker(), d.tracker(), d.tracker()
	nc := d.count(maxStateDetects, "CUSUM detectors")
	keep := make([]bool, nc)
	for j := range nc {
		k := math.Float64frombits(d.u64())
		keep[j] = j < len(m.rule.CUSUMs) && m.rule.CUSUMs[j].K == k
	}
	ng := d.count(maxStateGroups, "groups")
	groups := make(map[string]*groupState, min(ng, 1024))
	for range ng {
		if d.err != nil {
			break
		}
		n := d.count(maxStateName, "bytes of a group name")
		name := string(d.bytes(n))
		ns := d.varint()
		g := &groupState{name: name, silent: d.tracker(),
			hi: make([]float64, len(m.rule.CUSUMs)), lo: make([]float64, len(m.rule.CUSUMs))}
		if ns != 0 {
			g.lastSeen = time.Unix(0, ns).UTC()
		}
		for j := range nc {
			hi, lo := math.Float64frombits(d.u64()), math.Float64frombits(d.u64())
			if d.err == nil && !(hi >= 0 && lo >= 0 && !math.IsInf(hi, 0) && !math.IsInf(lo, 0)) {
				d.fail("CUSUM sum of group %q is not a finite number ≥ 0", name)
			}
			if keep[j] {
				g.hi[j], g.lo[j] = hi, lo
			}
		}
		if _, dup := groups[name]; dup && d.err == nil {
			d.fail("group %q appears twice", name)
		}
		groups[name] = g
	}
	if d.err == nil && len(d.b) > 0 {
		d.fail("%d bytes after the end", len(d.b))
	}
	if d.err != nil {
		return fmt.Errorf("restore monitor state: %w", d.err)
	}
	m.means, m.spread, m.reject = means, spread, reject
	m.group = groups
	m.names, m.gs = nil, nil
	return nil
}

// stateDecoder reads State's encoding; the first failure sticks.
type stateDecoder struct {
	b   []byte
	err error
}

func (d *stateDecoder) fail(format string, args ...any) {
	if d.err == nil {
		d.err = fmt.Errorf("%w: "+format, append([]any{ErrMonitorState}, args...)...)
	}
}

func (d *stateDecoder) byte() byte {
	if d.err != nil {
		return 0
	}
	if len(d.b) == 0 {
		d.fail("truncated")
		return 0
	}
	v := d.b[0]
	d.b = d.b[1:]
	return v
}

func (d *stateDecoder) uvarint() uint64 {
	if d.err != nil {
		return 0
	}
	v, n := binary.Uvarint(d.b)
	if n <= 0 {
		d.fail("truncated or overlong number")
		return 0
	}
	d.b = d.b[n:]
	return v
}

func (d *stateDecoder) varint() int64 {
	if d.err != nil {
		return 0
	}
	v, n := binary.Varint(d.b)
	if n <= 0 {
		d.fail("truncated or overlong number")
		return 0
	}
	d.b = d.b[n:]
	return v
}

func (d *stateDecoder) u64() uint64 {
	if d.err != nil {
		return 0
	}
	if len(d.b) < 8 {
		d.fail("truncated")
		return 0
	}
	v := binary.LittleEndian.Uint64(d.b)
	d.b = d.b[8:]
	return v
}

func (d *stateDecoder) bytes(n int) []byte {
	if d.err != nil {
		return nil
	}
	if len(d.b) < n {
		d.fail("truncated")
		return nil
	}
	v := d.b[:n]
	d.b = d.b[n:]
	return v
}

// count reads a count and checks it against limit.
func (d *stateDecoder) count(limit int, what string) int {
	v := d.uvarint()
	if v > uint64(limit) {
		d.fail("%d %s, more than %d", v, what, limit)
		return 0
	}
	return int(v)
}

// counter bounds the trackers' counters: no rule confirms or clears after
// more evaluations than this.
const maxStateCounter = 1 << 30

func (d *stateDecoder) tracker() tracker {
	hold := d.count(maxStateCounter, "evaluations held")
	quiet := d.count(maxStateCounter, "quiet evaluations")
	raised := d.byte()
	if raised > 1 {
		d.fail("raised flag %d is not 0 or 1", raised)
	}
	return tracker{hold: hold, quiet: quiet, raised: raised == 1}
}
