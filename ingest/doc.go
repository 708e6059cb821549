// Package ingest turns outside input into centred measurements, or rejects
// it with reasons: CSV files (ReadCSV) and measurement messages from NATS.
//
// CSV: each value is centred on a stats.Reference as it is read, in exact
// decimal arithmetic, and goes into the running sums of its group
// (stats.Accumulator) and into a bounded per-group sample for the tests that
// need the values themselves. Memory per group is therefore constant,
// however long the input. Input that cannot be used ends the read with an
// *InputError that says what is wrong, where (line, column) and what to do,
// and wraps a sentinel error (ErrNoData, ErrColumn, ErrShortRow,
// ErrEmptyField, ErrTooManyGroups, or one of stats.ErrSyntax,
// stats.ErrNotFinite, stats.ErrOutOfRange for values) so that errors.Is
// works. A read never returns partial results.
//
// Messages: a SubjectTemplate says which subject tokens name the
// characteristic and the group; Decoder.Decode turns a message into
// Payloads without allocating; Validator.Check turns each into a Measurement
// or a *RejectError whose Reason is counted in Counters; RejectMessage and
// DeadLetterSubject build the dead letter. Sources (core NATS and JetStream)
// deliver the messages in batches.
package ingest
