package plant

import (
	"fmt"
	"hash/fnv"
	"iter"
	"math"
	"math/rand/v2"
	"slices"
	"time"
)

// SubjectPrefix is the first token of every subject:
// SubjectPrefix.<characteristic>.<group>, lockstep's default subject
// template.
const SubjectPrefix = "meas"

// Message is one generated message.
type Message struct {
	// Subject is "meas.<characteristic>.<group>".
	Subject string
	// Payload is the message body, a fresh slice for each message. A good
	// payload is one JSON object:
	//
	//	{"value":"500.12","time":"2026-12-01T06:00:00.123Z","id":"L3-000042","unit":"g"}
	//
	// with the value at the instrument resolution, as a string or a number
	// (Characteristic.ValueFormat), the time as RFC 3339 in UTC with
	// milliseconds or as Unix milliseconds (Characteristic.TimeFormat), and
	// an id of the group's name and a sequence number that counts every
	// message of the group from 1.
	Payload []byte
	// Time is the simulated arrival time, in UTC, to the millisecond. It
	// is the payload's time for every message but a from_future one (whose
	// payload time lies FutureOffset ahead) and a duplicate_id one (a
	// repeat of an earlier message).
	Time time.Time
	// Bad is the kind of a deliberately bad message; "" for a good one.
	Bad BadKind
	// Characteristic and Group name the message's stream.
	Characteristic, Group string
}

// Stream is one (characteristic, group) pair of a Generator.
type Stream struct {
	Characteristic, Group, Subject string
}

// Generator yields a scenario's messages in event-time order.
//
// Every (characteristic, group) stream has its arrival times drawn ahead by
// one message; a binary min-heap over the streams' next arrival times (ties
// broken by scenario order: characteristics, then groups, as listed) picks
// the next message, so that each message costs O(log streams). Each stream
// has three PCG generators, seeded from the scenario's Seed and the two
// names: one for arrival gaps, one for values and one for bad messages, so
// that turning bad messages on or off changes neither the arrival times nor
// the values of the other messages.
//
// A Generator is not safe for concurrent use.
type Generator struct {
	start   time.Time
	end     int64 // offset from start in ns; messages at offsets ≥ end are not generated
	streams []stream
	heap    []int32 // indices into streams (at most MaxCharacteristics·MaxGroups), a min-heap by (next, index)
	chars   []charSpec
	clock   secondCache
	badRate float64
	kinds   []BadKind
}

// charSpec is what a characteristic's streams share.
type charSpec struct {
	name       string
	nominal    float64
	sd         float64
	lo, hi     float64 // plausible range
	resolution int
	arrivals   Arrivals
	vf         ValueFormat
	tf         TimeFormat
	unitJSON   string // the unit as a JSON string, quotes included
	wrongJSON  string // another unit as a JSON string
	unit       string
}

// stream is one (characteristic, group) pair.
type stream struct {
	ch       *charSpec
	clock    *secondCache // the Generator's
	group    string
	subject  string
	idPrefix string // "L3-"
	arr, val *rand.Rand
	bad      *rand.Rand
	gap      float64 // mean gap between arrivals, ns
	phase    float64 // Regular: offset of the first arrival, ns
	k        float64 // Regular: arrivals scheduled so far, less one
	next     int64   // offset of the next arrival from the start, ns
	seq      uint64  // messages sent
	shifts   []ramp  // shifts of this group and drifts of all
	spreads  []ramp  // by = factor − 1
	silences []span  // sorted by from

	hasLast bool // a good message was sent: the duplicate_id source
	lastV   float64
	lastT   time.Time
	lastSeq uint64
}

// ramp is a change of size by that grows linearly from offset from over dur
// nanoseconds (a step when dur is 0) and then stays.
type ramp struct {
	from, dur int64
	by        float64
}

func (r *ramp) at(t int64) float64 {
	if t < r.from {
		return 0
	}
	if r.dur == 0 || t-r.from >= r.dur {
		return r.by
	}
	return float64(r.by * (float64(t-r.from) / float64(r.dur)))
}

// span is a silence: offsets [from, to) in ns.
type span struct{ from, to int64 }

// Salts of a stream's three random generators.
const (
	saltArrivals = 1
	saltValues   = 2
	saltBad      = 3
)

// New validates sc and returns a Generator of its messages from sc.Start.
// It fails when sc does not validate (see Scenario.Validate) or has no Start.
func New(sc Scenario) (*Generator, error) {
	if err := sc.Validate(); err != nil {
		return nil, err
	}
	if sc.Start.IsZero() {
		return nil, fmt.Errorf("%w: no start time", ErrInvalid)
	}
	g := &Generator{
		start:   sc.Start.UTC(),
		end:     math.MaxInt64,
		badRate: sc.Bad.Rate,
		kinds:   slices.Clone(sc.Bad.Kinds),
	}
	if sc.Duration > 0 {
		g.end = int64(sc.Duration)
	}
	if len(g.kinds) == 0 {
		g.kinds = AllBadKinds()
	}
	n := 0
	for i := range sc.Characteristics {
		n += len(sc.Characteristics[i].Groups)
	}
	g.chars = make([]charSpec, len(sc.Characteristics))
	g.streams = make([]stream, 0, n)
	for ci := range sc.Characteristics {
		c := &sc.Characteristics[ci]
		spec := &g.chars[ci]
		*spec = newCharSpec(c)
		for _, name := range c.Groups {
			s := newStream(sc.Seed, spec, c, name)
			s.clock = &g.clock
			g.streams = append(g.streams, s)
		}
	}
	g.heap = make([]int32, len(g.streams))
	for i := range g.heap {
		g.heap[i] = int32(i)
	}
	for i := len(g.heap)/2 - 1; i >= 0; i-- {
		g.down(i)
	}
	return g, nil
}

func newCharSpec(c *Characteristic) charSpec {
	nominal, _ := parseDecimal(c.Nominal) // checked by Validate
	half := DefaultRangeSDs * c.SD
	if half == 0 {
		half = 1
	}
	lo, hi := nominal-half, nominal+half
	if c.Min != "" {
		lo, _ = parseDecimal(c.Min)
	}
	if c.Max != "" {
		hi, _ = parseDecimal(c.Max)
	}
	if lo >= hi { // only one side given, on the wrong side of the default
		if c.Min != "" {
			hi = lo + 2*half
		} else {
			lo = hi - 2*half
		}
	}
	return charSpec{
		name:       c.Name,
		nominal:    nominal,
		sd:         c.SD,
		lo:         lo,
		hi:         hi,
		resolution: c.Resolution,
		arrivals:   c.Arrivals,
		vf:         c.ValueFormat,
		tf:         c.TimeFormat,
		unit:       c.Unit,
		unitJSON:   string(appendJSONString(nil, c.Unit)),
		wrongJSON:  string(appendJSONString(nil, wrongUnit(c.Unit))),
	}
}

func newStream(seed uint64, spec *charSpec, c *Characteristic, group string) stream {
	s := stream{
		ch:       spec,
		group:    group,
		subject:  SubjectPrefix + "." + c.Name + "." + group,
		idPrefix: group + "-",
		arr:      rand.New(rand.NewPCG(streamSeed(seed, c.Name, group, saltArrivals))),
		val:      rand.New(rand.NewPCG(streamSeed(seed, c.Name, group, saltValues))),
		bad:      rand.New(rand.NewPCG(streamSeed(seed, c.Name, group, saltBad))),
		gap:      1e9 / c.Rate,
	}
	for _, e := range c.Events {
		switch {
		case e.Kind == Drift || e.Kind == Shift && e.Group == group:
			s.shifts = append(s.shifts, ramp{from: int64(e.At), dur: int64(e.Duration), by: e.By})
		case e.Kind == Spread && e.Group == group:
			s.spreads = append(s.spreads, ramp{from: int64(e.At), dur: int64(e.Duration), by: e.Factor - 1})
		case e.Kind == Silence && e.Group == group:
			s.silences = append(s.silences, span{from: int64(e.At), to: addSat(int64(e.At), int64(e.Duration))})
		}
	}
	slices.SortStableFunc(s.silences, func(a, b span) int {
		switch {
		case a.from < b.from:
			return -1
		case a.from > b.from:
			return 1
		}
		return 0
	})
	if spec.arrivals == Regular {
		s.phase = float64(s.arr.Float64() * s.gap)
		s.next = int64(s.phase)
	} else {
		s.next = addSat(0, int64(float64(s.arr.ExpFloat64()*s.gap)))
	}
	s.skipSilences()
	return s
}

// streamSeed derives the two PCG seed words of one generator of a stream.
func streamSeed(seed uint64, characteristic, group string, salt uint64) (uint64, uint64) {
	h := fnv.New64a()
	h.Write([]byte(characteristic))
	h.Write([]byte{0})
	h.Write([]byte(group))
	a := mix64(seed ^ mix64(h.Sum64()^salt))
	return a, mix64(a ^ 0x9e3779b97f4a7c15)
}

// mix64 is the finaliser of SplitMix64 (Steele, Lea and Flood, 2014).
func mix64(x uint64) uint64 {
	x ^= x >> 30
	x *= 0xbf58476d1ce4e5b9
	x ^= x >> 27
	x *= 0x94d049bb133111eb
	return x ^ x>>31
}

// addSat returns a+b for b ≥ 0, saturating at math.MaxInt64.
func addSat(a, b int64) int64 {
	if b < 0 {
		b = 0
	}
	if a > math.MaxInt64-b {
		return math.MaxInt64
	}
	return a + b
}

// advance draws the stream's next arrival.
func (s *stream) advance() {
	if s.ch.arrivals == Regular {
		s.k++
		s.next = regularAt(s.phase, s.k, s.gap)
	} else {
		s.next = addSat(s.next, int64(float64(s.arr.ExpFloat64()*s.gap)))
	}
	s.skipSilences()
}

// regularAt returns the offset of regular arrival k.
func regularAt(phase, k, gap float64) int64 {
	t := phase + float64(k*gap)
	if t >= math.MaxInt64 {
		return math.MaxInt64
	}
	return int64(t)
}

// skipSilences moves the next arrival past the silences it falls in: a
// Poisson stream starts afresh at the end of the silence (which is the same
// in distribution as dropping the arrivals inside it), a regular one keeps
// its phase.
func (s *stream) skipSilences() {
	for len(s.silences) > 0 && s.silences[0].to <= s.next {
		s.silences = s.silences[1:] // passed for good
	}
	for _, sp := range s.silences {
		if s.next < sp.from || s.next >= sp.to {
			continue
		}
		if s.ch.arrivals == Regular {
			s.k = math.Ceil((float64(sp.to) - s.phase) / s.gap)
			s.next = regularAt(s.phase, s.k, s.gap)
			if s.next < sp.to { // rounding
				s.k++
				s.next = regularAt(s.phase, s.k, s.gap)
			}
		} else {
			s.next = addSat(sp.to, int64(float64(s.arr.ExpFloat64()*s.gap)))
		}
	}
}

// value draws the value at offset t: the nominal plus the shifts and drifts,
// plus normal noise with the standard deviation changed by the spreads.
func (s *stream) value(t int64) float64 {
	mean := s.ch.nominal
	for i := range s.shifts {
		mean += s.shifts[i].at(t)
	}
	sd := s.ch.sd
	for i := range s.spreads {
		sd = float64(sd * (1 + s.spreads[i].at(t)))
	}
	return mean + float64(sd*s.val.NormFloat64())
}

// less orders streams by next arrival, then by scenario order.
func (g *Generator) less(a, b int32) bool {
	na, nb := g.streams[a].next, g.streams[b].next
	return na < nb || na == nb && a < b
}

// down restores the heap below position i.
func (g *Generator) down(i int) {
	h := g.heap
	for {
		l := 2*i + 1
		if l >= len(h) {
			return
		}
		m := l
		if r := l + 1; r < len(h) && g.less(h[r], h[l]) {
			m = r
		}
		if !g.less(h[m], h[i]) {
			return
		}
		h[i], h[m] = h[m], h[i]
		i = m
	}
}

// Next returns the next message in event-time order, or false when the
// scenario's Duration is over (never, for a Duration of 0).
func (g *Generator) Next() (Message, bool) {
	if len(g.heap) == 0 {
		return Message{}, false
	}
	s := &g.streams[g.heap[0]]
	off := s.next
	if off >= g.end {
		g.heap = g.heap[:0]
		return Message{}, false
	}
	at := g.start.Add(time.Duration(off)).Truncate(time.Millisecond)
	v := s.value(off)
	s.seq++
	kind := g.drawBad(s)
	if kind == BadDuplicateID && !s.hasLast {
		kind = ""
	}
	payload := g.payload(s, kind, at, v)
	if kind == "" {
		s.hasLast, s.lastV, s.lastT, s.lastSeq = true, v, at, s.seq
	}
	m := Message{
		Subject:        s.subject,
		Payload:        payload,
		Time:           at,
		Bad:            kind,
		Characteristic: s.ch.name,
		Group:          s.group,
	}
	s.advance()
	g.down(0)
	return m, true
}

// All returns an iterator over the remaining messages (see Next).
func (g *Generator) All() iter.Seq[Message] {
	return func(yield func(Message) bool) {
		for {
			m, ok := g.Next()
			if !ok || !yield(m) {
				return
			}
		}
	}
}

// Streams returns the generator's streams in scenario order.
func (g *Generator) Streams() []Stream {
	out := make([]Stream, len(g.streams))
	for i := range g.streams {
		s := &g.streams[i]
		out[i] = Stream{Characteristic: s.ch.name, Group: s.group, Subject: s.subject}
	}
	return out
}

// drawBad decides whether the stream's current message is bad, and of which
// kind.
func (g *Generator) drawBad(s *stream) BadKind {
	if g.badRate == 0 || s.bad.Float64() >= g.badRate {
		return ""
	}
	return g.kinds[s.bad.IntN(len(g.kinds))]
}
