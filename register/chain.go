package register

import (
	"strings"

	"ferry/internal/errkind"
	"ferry/transform"
)

// chainUncertainty is the refusal to map with uncertainty through a chain
// of transforms. A chain applies, inverts, has a Jacobian and, of linear
// steps, an affine part (package transform), so it warps and exports; but
// a mapped cell's uncertainty rests on the landmarks of the fit (their
// positions, weights and the calibrated scale of the leave-one-out
// errors), and a transform file holds those of one fit only. Propagating
// each step's error through the later steps' Jacobians would need every
// step's own uncertainty model, which neither the file nor a chain carries;
// rather than give a covariance that leaves all but one step's error out,
// the mapper refuses (docs/formats.md, "Chains").
func chainUncertainty(c *transform.Chain) error {
	kinds := make([]string, len(c.Steps))
	for i, s := range c.Steps {
		kinds[i] = string(s.Kind())
	}
	return errkind.New(ErrChainUncertainty, "the transform is a chain of %d steps (%s), and the uncertainty of a mapped point through a chain cannot be given: a transform file holds the uncertainty model of one fit, and each step of a chain was fitted to landmarks of its own; fit one transform from the source landmarks to the target ones to map with uncertainty",
		len(c.Steps), strings.Join(kinds, ", "))
}
