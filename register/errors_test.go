package register

import (
	"errors"
	"strings"
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

	// A pair far out of line is named for the caller's own advice, and its
	// message names no flag.
	var far Problem
	far.Dim = 3
	for i := range 12 {
		x := transform.Vec{float64(i%3) * 100, float64(i/3%2) * 100, float64(i/6) * 100}
		far.IDs = append(far.IDs, string(rune('A'+i)))
		far.Kinds = append(far.Kinds, landmarks.KindOther)
		far.Source = append(far.Source, x)
		far.Target = append(far.Target, x)
	}
	far.Source[5] = transform.Vec{1e9, 0, 0}
	_, err = Assess(&far, Settings{Model: transform.Affine})
	var pe *PairError
	if !errors.As(err, &pe) || pe.ID != "F" || pe.Affine || strings.Contains(err.Error(), "--") {
		t.Errorf("a pair 1 km out of line: %v, want a PairError naming F and no flag", err)
	}
}
