package store

import (
	"encoding/binary"
	"fmt"
	"math/rand/v2"
	"path/filepath"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"

	"github.com/lockstep-project/lockstep/stats"
)

// Benchmarks of the commit path, with fsync on (Options{}), since one fsync
// per commit is what a batch buys. Baseline: commitPerKey, the same raw
// values in the same transaction size stored as one bbolt key per value
// (key: time and sequence; value: group, text and id), keys put in time
// order as the chunked path does; BenchmarkRawCommit reports the ratio.
//
//	go test -run '^$' -bench 'RawCommit|CommitBatch|RawRead' -benchtime 3s ./store/

const benchBatch = 1000

// benchValues is a batch of fill weights from four lines, 25 ms apart.
func benchValues(b *testing.B) []RawValue {
	return fillWeights(rand.New(rand.NewPCG(10, 10)), shiftStart(), 25*time.Millisecond, benchBatch)
}

// shift moves the batch to its i-th slot in time.
func shift(vals []RawValue, i int) {
	base := shiftStart().Add(time.Duration(i) * benchBatch * 25 * time.Millisecond)
	for j := range vals {
		vals[j].Time = base.Add(time.Duration(j) * 25 * time.Millisecond)
	}
}

func openBench(b *testing.B, opt Options) *Store {
	b.Helper()
	s, err := Open(filepath.Join(b.TempDir(), "lockstep.db"), opt)
	if err != nil {
		b.Fatal(err)
	}
	b.Cleanup(func() { s.Close() })
	if err := s.Commit(&Batch{Characteristics: []Characteristic{fillWeight(b)}}); err != nil {
		b.Fatal(err)
	}
	return s
}

// BenchmarkRawCommit alternates a chunked commit and a key-per-value commit
// of the same 1 000 values, each into its own store, so that the two see the
// same machine load, and reports both rates and their ratio: with fsync (the
// case that matters), and without (the CPU and page-writing part alone).
func BenchmarkRawCommit(b *testing.B) {
	for _, mode := range []struct {
		name string
		opt  Options
	}{{"fsync", Options{}}, {"nosync", Options{NoSync: true}}} {
		b.Run(mode.name, func(b *testing.B) {
			chunked, perKey := openBench(b, mode.opt), openBench(b, mode.opt)
			vals := benchValues(b)
			var tChunked, tPerKey time.Duration
			i := 0
			for b.Loop() {
				shift(vals, i)
				i++
				t0 := time.Now()
				if err := chunked.Commit(&Batch{Raw: vals}); err != nil {
					b.Fatal(err)
				}
				t1 := time.Now()
				if err := commitPerKey(perKey, vals); err != nil {
					b.Fatal(err)
				}
				tChunked, tPerKey = tChunked+t1.Sub(t0), tPerKey+time.Since(t1)
			}
			n := float64(i * benchBatch)
			b.ReportMetric(n/tChunked.Seconds(), "chunked-records/s")
			b.ReportMetric(n/tPerKey.Seconds(), "per-key-records/s")
			b.ReportMetric(tPerKey.Seconds()/tChunked.Seconds(), "ratio")
		})
	}
}

// commitPerKey is the baseline layout: one key per raw value. It checks and
// converts the values as Commit does, so the two differ only in layout.
func commitPerKey(s *Store, vals []RawValue) error {
	recs := make([]rawRec, len(vals))
	for i := range vals {
		t, err := checkRaw(&vals[i])
		if err != nil {
			return err
		}
		recs[i] = rawRec{t: t, group: vals[i].Group, text: vals[i].Text, id: vals[i].ID}
	}
	return s.db.Update(func(tx *bolt.Tx) error {
		b, err := tx.CreateBucketIfNotExists([]byte("bench-key-per-value"))
		if err != nil {
			return err
		}
		for _, r := range recs {
			seq, err := b.NextSequence()
			if err != nil {
				return err
			}
			v := appendBytes(appendBytes(appendBytes(nil, r.group), r.text), r.id)
			if err := b.Put(binary.BigEndian.AppendUint64(appendTimeKey(nil, r.t), seq), v); err != nil {
				return err
			}
		}
		return nil
	})
}

// BenchmarkCommitBatch commits what the daemon commits every 25 s of a
// four-line filling machine at 40 values/s: 1 000 raw values, the full
// states of the four lines' current one-minute buckets with samples of 250
// values, and the cursor.
func BenchmarkCommitBatch(b *testing.B) {
	s := openBench(b, Options{})
	vals := benchValues(b)
	rng := rand.New(rand.NewPCG(11, 11))
	states := make([]BucketState, 4)
	for g := range states {
		var acc stats.Accumulator
		sample := make([]float64, 250)
		for k := range 1500 {
			x := 0.8 * rng.NormFloat64()
			acc.Add(x)
			if k < len(sample) {
				sample[k] = x
			}
		}
		states[g] = BucketState{Characteristic: "fill-weight", Group: fmt.Sprintf("line-%d", g+1), Acc: acc, Sample: sample}
	}
	i := 0
	for b.Loop() {
		shift(vals, i)
		for g := range states {
			states[g].Start = vals[0].Time.Truncate(time.Minute)
		}
		i++
		if err := s.Commit(&Batch{Raw: vals, Buckets: states, Consumer: "lockstep-fill", Cursor: uint64(i * benchBatch)}); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(i*benchBatch)/b.Elapsed().Seconds(), "records/s")
}

// BenchmarkRawRead reads 100 000 stored values back in time order: from
// chunks committed in time order, and from chunks of which every one
// overlaps the next by half (each batch holding values of the previous
// batch's period), which keeps two to three chunks open in the merge.
func BenchmarkRawRead(b *testing.B) {
	const batches = 100
	for _, overlap := range []bool{false, true} {
		name := "in-order"
		if overlap {
			name = "overlapping"
		}
		b.Run(name, func(b *testing.B) {
			s := openBench(b, Options{NoSync: true})
			vals := benchValues(b)
			for i := range batches {
				shift(vals, i)
				if overlap {
					for j := 0; j < len(vals); j += 2 {
						vals[j].Time = vals[j].Time.Add(-benchBatch * 25 * time.Millisecond / 2)
					}
				}
				if err := s.Commit(&Batch{Raw: vals}); err != nil {
					b.Fatal(err)
				}
			}
			n := 0
			for b.Loop() {
				if err := s.Raw("fill-weight", time.Time{}, time.Time{}, func(RawValue) error { n++; return nil }); err != nil {
					b.Fatal(err)
				}
			}
			if n != b.N*batches*benchBatch {
				b.Fatalf("read %d values in %d loops", n, b.N)
			}
			b.ReportMetric(float64(n)/b.Elapsed().Seconds(), "values/s")
		})
	}
}
