package ingest

// idMemory remembers the hashes of the last ids accepted for a
// characteristic, first in, first out. Ids are held as 64-bit hashes
// (hash/maphash, with a seed per Validator): two distinct ids among the
// 100 000 remembered collide, and the later one is wrongly rejected as a
// duplicate, with a probability of about n²/2⁶⁵ ≈ 3·10⁻¹⁰.
//
// Layout: a ring of the hashes in the order they were added (its slot is
// the id's sequence number modulo the size), and a set of the same hashes:
// an open-addressing table with linear probing, kept at most half full,
// with backward-shift deletion (no tombstones). At the default size the
// table is a few megabytes and every lookup is a cache miss, so the layout
// keeps them few: a lookup reads one slot run of one flat array, adding an
// id writes into the same run, and expiring the oldest id is one more
// lookup. Nothing is allocated per id once the memory is full. The table
// starts small and quadruples as ids arrive, up to what a full memory
// needs: memory is 8 bytes per remembered id in the ring plus 8 bytes per
// table slot, 2 to 4 slots per id once full (about 24 to 40 bytes per id in
// all), up to 8 while it grows. Hash 0 marks an empty slot, so an id
// hashing to 0 is held as 1 (it then collides with ids hashing to 1:
// another 2⁻⁶⁴).
//
// An id that was forgotten stays in the ring until its slot comes round;
// stale counts such ring entries by hash, so that the expiry of one of them
// does not remove the same id added again later.
type idMemory struct {
	ring []uint64 // hashes (see key), by sequence number modulo the size
	next uint64   // sequence number of the next id

	table []uint64 // the set: a hash (see key), or 0 for an empty slot
	count int      // occupied table slots

	stale map[uint64]int // forgotten ids still in the ring; nil when none
}

// idTableMin is the initial number of table slots (a power of two).
const idTableMin = 64

// key is how the memory holds hash h: never 0, which marks empty slots.
func key(h uint64) uint64 { return max(h, 1) }

// find returns the table slot holding key k, or the empty slot where it
// would go, and whether it holds k.
func (m *idMemory) find(k uint64) (int, bool) {
	mask := uint64(len(m.table) - 1)
	for i := k & mask; ; i = (i + 1) & mask {
		switch m.table[i] {
		case 0:
			return int(i), false
		case k:
			return int(i), true
		}
	}
}

func (m *idMemory) has(h uint64) bool {
	_, ok := m.lookup(h)
	return ok
}

// lookup returns whether h is held and, when it is not, the slot where add
// may put it (-1 when the table is empty), so that the id costs one probe
// run, not two: give it to add unless the memory changed in between.
func (m *idMemory) lookup(h uint64) (int, bool) {
	if len(m.table) == 0 {
		return -1, false
	}
	return m.find(key(h))
}

// slots appends to ps the table slots where a lookup of h starts and, when
// the memory is full, where the expiry of the id at sequence number seq
// starts (the oldest when seq is next): the reads that miss the cache. See
// Validator.Prefetch.
func (m *idMemory) slots(ps []*uint64, h, seq uint64, size int) []*uint64 {
	if len(m.table) == 0 {
		return ps
	}
	mask := uint64(len(m.table) - 1)
	ps = append(ps, &m.table[key(h)&mask])
	if n := uint64(size); uint64(len(m.ring)) == n {
		ps = append(ps, &m.table[m.ring[seq%n]&mask])
	}
	return ps
}

// add remembers h, which it does not hold yet, forgetting the oldest id when
// size are remembered. slot is where lookup said h goes, or -1.
func (m *idMemory) add(h uint64, slot, size int) {
	k := key(h)
	// Once full, the count exceeds size by one between the insertion and
	// the expiry below; the table keeps at least 2·size slots anyway.
	if 2*min(m.count+1, size) > len(m.table) {
		m.grow(size)
		slot = -1
	}
	if slot < 0 {
		slot, _ = m.find(k)
	}
	m.table[slot] = k
	m.count++
	// Expire the oldest after inserting: backward-shift deletion keeps
	// every entry reachable, the new one included.
	n := uint64(size)
	if m.next < n {
		m.ring = append(m.ring, k)
	} else {
		i := m.next % n
		m.expire(m.ring[i])
		m.ring[i] = k
	}
	m.next++
}

// expire removes key k, whose ring entry is the oldest and leaves, from the
// set, unless that entry is a stale one of an id forgotten since.
func (m *idMemory) expire(k uint64) {
	if c, ok := m.stale[k]; ok {
		if c == 1 {
			delete(m.stale, k)
		} else {
			m.stale[k] = c - 1
		}
		return
	}
	if i, ok := m.find(k); ok {
		m.remove(i)
	}
}

// grow enlarges the table (or creates it) and reinserts every entry. It
// quadruples it, which halves the reinsertions of doubling while ids
// arrive, but never beyond the size a full memory of size ids needs (the
// smallest power of two at least twice size, which it may then just
// double to reach).
func (m *idMemory) grow(size int) {
	old := m.table
	full := idTableMin
	for full < 2*size {
		full *= 2
	}
	n := max(idTableMin, 2*len(old), min(4*len(old), full))
	m.table = make([]uint64, n)
	for _, k := range old {
		if k != 0 {
			j, _ := m.find(k)
			m.table[j] = k
		}
	}
}

// remove empties table slot i, moving later entries of its probe run back
// so that every entry stays reachable from its home slot.
func (m *idMemory) remove(i int) {
	mask := len(m.table) - 1
	for j := (i + 1) & mask; m.table[j] != 0; j = (j + 1) & mask {
		home := int(m.table[j]) & mask
		// The entry at j stays when its home lies cyclically in (i, j].
		if i <= j {
			if i < home && home <= j {
				continue
			}
		} else if i < home || home <= j {
			continue
		}
		m.table[i] = m.table[j]
		i = j
	}
	m.table[i] = 0
	m.count--
}

// forget removes h, if held; its ring entry becomes stale.
func (m *idMemory) forget(h uint64) {
	if m.count == 0 {
		return
	}
	k := key(h)
	if i, ok := m.find(k); ok {
		m.remove(i)
		if m.stale == nil {
			m.stale = make(map[uint64]int)
		}
		m.stale[k]++
	}
}
