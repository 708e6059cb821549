// Package ingest turns outside input into centred measurements, or rejects
// it with reasons. Today that input is a CSV file (ReadCSV); messages from a
// broker will follow.
//
// Each value is centred on a stats.Reference as it is read, in exact decimal
// arithmetic, and goes into the running sums of its group (stats.Accumulator)
// and into a bounded per-group sample for the tests that need the values
// themselves. Memory per group is therefore constant, however long the input.
//
// Input that cannot be used ends the read with an *InputError that says what
// is wrong, where (line, column) and what to do, and wraps a sentinel error
// (ErrNoData, ErrColumn, ErrShortRow, ErrEmptyField, ErrTooManyGroups, or one
// of stats.ErrSyntax, stats.ErrNotFinite, stats.ErrOutOfRange for values) so
// that errors.Is works. A read never returns partial results.
package ingest
