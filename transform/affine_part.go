package transform

import (
	"fmt"
	"math"
)

// AffinePart returns the affine part of t in micrometres, f(p) ≈ A·p + b:
// for a linear model the model itself; for a thin-plate spline the a₀ + A·p
// of the micrometre form of docs/methods.md ("The spline"), so that the
// spline is exactly A·p + b + Σ_j w_j φ(|p − p_j|); for a chain of linear
// steps their composition. A chain holding a spline has no single affine
// part and is refused.
func AffinePart(t Transform) (Mat, Vec, error) {
	switch t := t.(type) {
	case *Linear:
		return t.A, t.T, nil
	case *Spline:
		b := t.Offset
		if t.Dimension == 2 && t.Scale > 0 {
			// φ(s·ρ) = s²·φ(ρ) + s² log s·ρ² moves log(s)·Σ_j W_j |u_j|²
			// from the kernel sum into the constant.
			logS := math.Log(t.Scale)
			for j, node := range t.Nodes {
				u := node.Sub(t.Centre).Scale(1 / t.Scale)
				u[2] = 0
				b = b.Sub(t.Weights[j].Scale(logS * u.Dot(u)))
			}
			b[2] = 0
		}
		return t.Matrix, b, nil
	case *Chain:
		a, b := Identity(), Vec{}
		for i, s := range t.Steps {
			l, ok := s.(*Linear)
			if !ok {
				return Mat{}, Vec{}, fmt.Errorf("step %d of the chain is a %s: a chain holding a spline has no single affine part", i+1, s.Kind())
			}
			a, b = l.A.Mul(a), l.A.MulVec(b).Add(l.T)
		}
		return a, b, nil
	default:
		return Mat{}, Vec{}, fmt.Errorf("a transform of type %T has no affine part ferry knows", t)
	}
}
