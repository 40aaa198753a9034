// Package errkind makes errors that a caller can tell apart with errors.Is
// without their messages changing: an error of a kind has its own message,
// and errors.Is(err, kind) holds.
package errkind

import "fmt"

// New is an error with the message fmt.Sprintf(format, args...) for which
// errors.Is(err, kind) holds. Errors among args that the format wraps
// with %w are wrapped as fmt.Errorf wraps them.
func New(kind error, format string, args ...any) error {
	return &kindError{kind: kind, err: fmt.Errorf(format, args...)}
}

type kindError struct {
	kind error
	err  error
}

func (e *kindError) Error() string { return e.err.Error() }

// Is makes errors.Is(e, kind) hold.
func (e *kindError) Is(target error) bool { return target == e.kind }

// Unwrap gives what the message wraps, so that errors.Is and errors.As see
// through it too.
func (e *kindError) Unwrap() error { return e.err }
