package register

import (
	"errors"
	"testing"

	"ferry/landmarks"
	"ferry/transform"
)

// The conditions a caller must tell apart are told apart by errors.Is, and
// no other error matches them.
func TestSentinelErrors(t *testing.T) {
	auto := Settings{Smoothing: Smoothing{Auto: true}}
	big := EstimateJob(&Problem{Dim: 3, IDs: make([]string, 100000)}, auto)
	if err := big.CheckMemory(16e9); !errors.Is(err, ErrTooLarge) || errors.Is(err, transform.ErrTooFewPairs) {
		t.Errorf("a job of 100 000 landmarks on 16 GB: %v, want ErrTooLarge", err)
	}

	few := &Problem{Dim: 3, IDs: []string{"a", "b", "c"},
		Source: []transform.Vec{{0, 0, 0}, {1, 0, 0}, {0, 1, 0}},
		Target: []transform.Vec{{0, 0, 0}, {1, 0, 0}, {0, 1, 0}}}
	few.Kinds = []landmarks.Kind{landmarks.KindOther, landmarks.KindOther, landmarks.KindOther}
	_, err := Assess(few, Settings{Model: transform.Affine})
	if !errors.Is(err, transform.ErrTooFewPairs) || errors.Is(err, ErrTooLarge) {
		t.Errorf("an affine check of 3 pairs: %v, want ErrTooFewPairs", err)
	}
}
