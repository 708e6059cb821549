package ingest

import (
	"math/rand/v2"
	"testing"
)

// idModel is the plain definition idMemory implements: an id is remembered
// while it was added among the last size additions and not forgotten since.
type idModel struct {
	last map[uint64]uint64 // hash → sequence number of its last addition
	next uint64
}

func (m *idModel) has(h uint64, size int) bool {
	s, ok := m.last[h]
	return ok && s+uint64(size) >= m.next
}

// TestIDMemoryAgainstModel drives idMemory and the model with the same
// random additions, lookups and forgets, on hashes chosen so that many
// share a home slot (long probe runs, wrap-around at the table's end,
// deletions inside runs), and compares every answer.
func TestIDMemoryAgainstModel(t *testing.T) {
	for _, size := range []int{1, 2, 3, 7, 64, 100, 1000} {
		rng := rand.New(rand.NewPCG(uint64(size), 1))
		var m idMemory
		model := idModel{last: map[uint64]uint64{}}
		full := idTableMin // the table of a full memory: a power of two ≥ 2·size
		for full < 2*size {
			full *= 2
		}
		// 3·size distinct hashes; the low bits take only a few values, and
		// some hashes sit at the top of the table so that runs wrap.
		pool := make([]uint64, 3*size+3)
		for i := range pool {
			pool[i] = uint64(i)<<32 | uint64(rng.IntN(4))
			if i%5 == 0 {
				pool[i] |= 0xffff_fff0 | uint64(rng.IntN(16))
			}
		}
		for step := range 20 * len(pool) {
			h := pool[rng.IntN(len(pool))]
			slot, got := m.lookup(h)
			want := model.has(h, size)
			if got != want {
				t.Fatalf("size %d, step %d: has(%#x) = %v, want %v", size, step, h, got, want)
			}
			switch op := rng.IntN(10); {
			case op < 7 && !got: // as Check does: add only what is not held
				if op < 2 {
					slot = -1 // as for a characteristic seen the first time
				}
				m.add(h, slot, size)
				model.last[h] = model.next
				model.next++
			case op == 9:
				m.forget(h)
				delete(model.last, h)
			}
			if 2*m.count > len(m.table) || m.count > size || len(m.table) > full {
				t.Fatalf("size %d, step %d: %d entries in %d slots (at most %d)", size, step, m.count, len(m.table), full)
			}
		}
		// Every pooled hash agrees at the end, and the count is exact.
		held := 0
		for _, h := range pool {
			if m.has(h) != model.has(h, size) {
				t.Fatalf("size %d, at the end: has(%#x) = %v", size, h, m.has(h))
			}
			if m.has(h) {
				held++
			}
		}
		if held != m.count {
			t.Errorf("size %d: %d hashes held, count %d", size, held, m.count)
		}
	}
}

// TestIDMemoryFullDoesNotAllocate: once the memory is full, adding an id
// (and expiring the oldest) allocates nothing.
func TestIDMemoryFullDoesNotAllocate(t *testing.T) {
	const size = 1000
	var m idMemory
	h := uint64(0)
	for range 2 * size {
		h += 0x9e3779b97f4a7c15
		m.add(h, -1, size)
	}
	if n := testing.AllocsPerRun(1000, func() {
		h += 0x9e3779b97f4a7c15
		if slot, ok := m.lookup(h); !ok {
			m.add(h, slot, size)
		}
	}); n != 0 {
		t.Errorf("%v allocations per id, want 0", n)
	}
}

// BenchmarkIDMemory looks up and adds ids in the steady state of a full
// memory of the default size (one in, one out), each id new. Baseline:
// BenchmarkIDMemoryMapBaseline, the same work on a Go map with a ring (the
// layout idMemory replaced), to be compared in the same run.
func BenchmarkIDMemory(b *testing.B) {
	var m idMemory
	k := uint64(0)
	for range 2 * DefaultIDMemory {
		k++
		h := mix64(k)
		m.add(h, -1, DefaultIDMemory)
	}
	for b.Loop() {
		k++
		h := mix64(k)
		if slot, ok := m.lookup(h); !ok {
			m.add(h, slot, DefaultIDMemory)
		}
	}
}

func BenchmarkIDMemoryMapBaseline(b *testing.B) {
	seq := map[uint64]uint64{}
	ring := make([]uint64, DefaultIDMemory)
	next := uint64(0)
	add := func(h uint64) {
		slot := next % DefaultIDMemory
		if next >= DefaultIDMemory {
			if s, ok := seq[ring[slot]]; ok && s == next-DefaultIDMemory {
				delete(seq, ring[slot])
			}
		}
		ring[slot] = h
		seq[h] = next
		next++
	}
	k := uint64(0)
	for range 2 * DefaultIDMemory {
		k++
		h := mix64(k)
		add(h)
	}
	for b.Loop() {
		k++
		h := mix64(k)
		if _, ok := seq[h]; !ok {
			add(h)
		}
	}
}

// mix64 is the finaliser of SplitMix64 (Steele, Lea & Flood 2014): ids'
// hashes as random as maphash makes them.
func mix64(x uint64) uint64 {
	x ^= x >> 30
	x *= 0xbf58476d1ce4e5b9
	x ^= x >> 27
	x *= 0x94d049bb133111eb
	return x ^ x>>31
}
