package stats

import (
	"errors"
	"fmt"
)

// ErrNotAvailable is wrapped by every error that reports a result as not
// defined for the data at hand (one group, no within-group variation, too few
// values). Callers print "not available" with the reason instead of a number.
var ErrNotAvailable = errors.New("not available")

// UnavailableError says which result is not available and why. It wraps
// ErrNotAvailable.
type UnavailableError struct {
	What   string // the result, e.g. "Welch F"
	Reason string // why, in words an engineer understands
}

func (e *UnavailableError) Error() string {
	return e.What + ": " + ErrNotAvailable.Error() + ": " + e.Reason
}

// Unwrap returns ErrNotAvailable.
func (e *UnavailableError) Unwrap() error { return ErrNotAvailable }

// notAvailable returns an *UnavailableError, e.g.
// `Welch F: not available: group 2 has zero variance`.
func notAvailable(what, format string, args ...any) error {
	return &UnavailableError{What: what, Reason: fmt.Sprintf(format, args...)}
}

// reason returns the reason of a not-available error from another
// computation, so that a result built on it can repeat why.
func reason(err error) string {
	var u *UnavailableError
	if errors.As(err, &u) {
		return u.Reason
	}
	if err == nil {
		return "unknown reason"
	}
	return err.Error()
}
