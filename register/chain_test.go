package register

import (
	"errors"
	"strings"
	"testing"

	"ferry/transform"
)

// A chain of transforms is refused by the mapper's first check
// (plausible, which NewMapper calls before it reads the uncertainty
// model), with ErrChainUncertainty and a message naming the steps; its
// steps alone are not.
func TestChainRefusedForMapping(t *testing.T) {
	shift := &transform.Linear{Model: transform.Translation, D: 3, A: transform.Identity(), T: transform.Vec{5, 0, 0}, Scale: 1}
	src := []transform.Vec{{0, 0, 0}, {100, 0, 0}, {0, 100, 0}, {0, 0, 100}, {100, 100, 50}}
	dst := make([]transform.Vec, len(src))
	for i, p := range src {
		dst[i] = transform.Vec{1.1 * p[0], p[1] + 0.05*p[2], p[2] - 3}
	}
	aff, err := transform.Fit(transform.Affine, 3, src, dst, transform.Options{})
	if err != nil {
		t.Fatal(err)
	}
	for _, step := range []transform.Transform{shift, aff.Transform} {
		if err := plausible(step); err != nil {
			t.Fatalf("a %s step alone: %v", step.Kind(), err)
		}
	}
	chain, err := transform.NewChain(aff.Transform, shift)
	if err != nil {
		t.Fatal(err)
	}
	err = plausible(chain)
	if !errors.Is(err, ErrChainUncertainty) {
		t.Fatalf("chain: %v, want ErrChainUncertainty", err)
	}
	for _, want := range []string{"chain of 2 steps (affine, translation)", "fit one transform from the source landmarks to the target ones"} {
		if !strings.Contains(err.Error(), want) {
			t.Errorf("message %q lacks %q", err, want)
		}
	}
}
