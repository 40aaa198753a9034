package errkind

import (
	"errors"
	"io"
	"testing"
)

func TestNew(t *testing.T) {
	tooFew := errors.New("too few")
	other := errors.New("other")
	err := New(tooFew, "need %d, have %d: %w", 4, 2, io.ErrUnexpectedEOF)
	if err.Error() != "need 4, have 2: unexpected EOF" {
		t.Errorf("message %q", err)
	}
	if !errors.Is(err, tooFew) || errors.Is(err, other) || !errors.Is(err, io.ErrUnexpectedEOF) {
		t.Error("errors.Is does not tell the kind")
	}
	if wrapped := errorsWrap(err); !errors.Is(wrapped, tooFew) {
		t.Error("the kind is lost when wrapped again")
	}
}

func errorsWrap(err error) error { return errors.Join(errors.New("context"), err) }
