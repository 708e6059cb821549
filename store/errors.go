package store

import "errors"

// Sentinel errors. The errors returned by the package wrap them, so test with
// errors.Is; their messages say more (the file, the key, the process).
var (
	// ErrInUse: another process (or another Store in this one) holds the
	// file. The returned error names the process when its sidecar file
	// FILE.pid tells it.
	ErrInUse = errors.New("store is in use")

	// ErrSchema: the file is not a lockstep store, or it was written by a
	// newer lockstep with a schema this one does not know. Nothing is written
	// to such a file.
	ErrSchema = errors.New("store schema not supported")

	// ErrCorrupt: a stored record does not decode. The error names the key.
	ErrCorrupt = errors.New("corrupt record")

	// ErrInvalid: a batch holds a record that cannot be stored (an empty
	// name, a time outside the years 1678–2262, text that is not a decimal
	// number, a changed reference). Nothing of the batch is written.
	ErrInvalid = errors.New("invalid record")

	// ErrApplied: the batch's cursor is not past the cursor stored for its
	// consumer, so the batch was applied before (a redelivery after a
	// crash, say). Nothing of the batch is written; a caller acks the
	// messages as it would after a successful commit.
	ErrApplied = errors.New("batch already applied")

	// ErrNotFound: the store holds no characteristic of that name.
	ErrNotFound = errors.New("characteristic not found")

	// ErrReadOnly: a write on a store opened with OpenReadOnly.
	ErrReadOnly = errors.New("store is read-only")
)

// storeError is an error about the store file at path: its message is
// "store PATH: MSG" (or the whole of MSG when whole is set), and it wraps
// the sentinel and, if there is one, the underlying cause.
type storeError struct {
	path     string
	msg      string
	whole    bool
	sentinel error
	cause    error
}

func (e *storeError) Error() string {
	if e.whole {
		return e.msg
	}
	return "store " + e.path + ": " + e.msg
}

func (e *storeError) Unwrap() []error {
	if e.cause == nil {
		return []error{e.sentinel}
	}
	return []error{e.sentinel, e.cause}
}
