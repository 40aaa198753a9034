package transform

import (
	"errors"
	"fmt"
)

// Chain applies its steps in turn: in vivo → fixed slab → EM, say. Its
// Jacobian is the product of the steps' Jacobians by the chain rule and its
// inverse undoes the steps in reverse order. It has no predictor: each step
// was fitted to landmarks of its own, and their errors are not combined
// here, so a chain warps and exports but is not mapped with uncertainty
// (register refuses it; docs/formats.md, "Chains"). Build one with
// NewChain, which checks the steps.
type Chain struct {
	Steps []Transform
}

// NewChain joins steps of one dimension into a chain.
func NewChain(steps ...Transform) (*Chain, error) {
	if len(steps) == 0 {
		return nil, errors.New("a chain needs at least one transform")
	}
	dim := steps[0].Dim()
	for i, s := range steps {
		if s == nil {
			return nil, fmt.Errorf("chain step %d is missing", i+1)
		}
		if s.Dim() != dim {
			return nil, fmt.Errorf("chain step %d is %d-D but step 1 is %d-D", i+1, s.Dim(), dim)
		}
	}
	return &Chain{Steps: append([]Transform(nil), steps...)}, nil
}

// Kind is ChainKind.
func (c *Chain) Kind() Kind { return ChainKind }

// Dim is the dimension of every step.
func (c *Chain) Dim() int { return c.Steps[0].Dim() }

// Apply maps p through every step in turn.
func (c *Chain) Apply(p Vec) Vec {
	for _, s := range c.Steps {
		p = s.Apply(p)
	}
	return p
}

// Jacobian is J_n(…)·…·J_1(p), each step's Jacobian taken where that step
// sees the point.
func (c *Chain) Jacobian(p Vec) Mat {
	j := Identity()
	for _, s := range c.Steps {
		j = s.Jacobian(p).Mul(j)
		p = s.Apply(p)
	}
	return j
}

// Invert undoes the steps from the last to the first.
func (c *Chain) Invert(q Vec) (Vec, error) {
	for i := len(c.Steps) - 1; i >= 0; i-- {
		var err error
		q, err = c.Steps[i].Invert(q)
		if err != nil {
			return Vec{}, fmt.Errorf("chain step %d: %w", i+1, err)
		}
	}
	return q, nil
}
