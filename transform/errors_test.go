package transform

import (
	"errors"
	"testing"
)

// A fit given too few pairs and the inverse of a singular linear map are
// told apart by errors.Is.
func TestSentinelErrors(t *testing.T) {
	src := []Vec{{0, 0, 0}, {1, 0, 0}, {0, 1, 0}}
	_, err := Fit(Affine, 3, src, src, Options{})
	if !errors.Is(err, ErrTooFewPairs) || errors.Is(err, ErrSingular) {
		t.Errorf("an affine fit of 3 pairs in 3-D: %v, want ErrTooFewPairs", err)
	}
	flat := &Linear{Model: Affine, A: Mat{{1, 0, 0}, {0, 1, 0}, {0, 0, 0}}}
	_, err = flat.Invert(Vec{1, 2, 3})
	if !errors.Is(err, ErrSingular) || errors.Is(err, ErrNoConvergence) || errors.Is(err, ErrTooFewPairs) {
		t.Errorf("the inverse of a singular map: %v, want ErrSingular", err)
	}
}
