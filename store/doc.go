// Package store keeps lockstep's durable state in one bbolt file: the
// characteristics, the per-group bucket states the windows are rebuilt from,
// every raw measurement for replay and export, and the JetStream cursor, so
// that a commit holds a batch of measurements and the stream position after
// it in one transaction and a restart neither loses nor double-counts.
//
// The core types are Store (Open, OpenReadOnly, Commit, the readers
// Characteristics, Buckets, Raw and Cursor, Retain, Backup, Verify), Batch
// (what one commit writes) and the records Characteristic, BucketState and
// RawValue; alert records and monitor states ride in the same batches as
// opaque bytes (alerts.go: AlertRecord, MonitorState, Alerts, MonitorState,
// RetainAlerts), so the store knows no alert types. The layout is described in schema.go, the record codecs in
// codec.go and chunk.go; each record kind carries its own version byte, and
// the file its schema version.
//
// Caveats:
//   - Byte slices from bbolt are valid only inside the transaction that
//     returned them. The package copies everything it hands out (names,
//     texts, samples), and the callbacks of Buckets and Raw run inside a
//     read transaction: they must not call Commit or Retain, and a long
//     one holds old pages from reuse until it returns.
//   - Bucket states are full states: committing one replaces the stored
//     state, so committing it twice is harmless. Raw values are appended:
//     committing them twice stores them twice, unless the batch carries a
//     cursor, which Commit checks (ErrApplied).
//   - Raw values are stored in time-sorted chunks that may overlap between
//     commits; Raw merges them (see Raw for the cost).
//   - Times are stored as Unix nanoseconds (about the years 1678 to 2262)
//     and come back in UTC.
//   - One process at a time opens a file with Open; it holds the file's
//     lock until Close. Readers of a stopped daemon's file or of a backup use
//     OpenReadOnly, which never writes.
//   - Options.NoSync trades durability for speed: for tests and benchmarks.
package store
