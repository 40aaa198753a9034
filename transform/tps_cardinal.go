package transform

import (
	"fmt"

	"gonum.org/v1/gonum/mat"
)

// CardinalWeights returns the weights by which the spline's prediction at
// each of xs combines the landmarks' targets: f(x) = Σ_j A[j][i]·q_j, where
// column i of A (N×len(xs)) is the top block of M⁻¹·[k(x_i); p(x_i)] (see
// splineSystem). Each column reproduces affine maps exactly (Σ_j A_ji = 1,
// Σ_j A_ji·p_j = x_i), so the error of the prediction does not depend on the
// affine part of the true map, and its variance under any model of the
// remaining displacement follows from A alone (register's error model).
//
// The fitted function is the same in normalised coordinates as in
// micrometres (see the top of tps.go), hence so are its cardinal functions:
// they are computed in the normalised system. It costs a factorisation and
// O(N²) a point.
func (s *Spline) CardinalWeights(xs []Vec) (*mat.Dense, error) {
	c, err := s.Cardinal()
	if err != nil {
		return nil, err
	}
	return c.Weights(xs), nil
}

// Cardinal holds the factorised fit of a spline for computing cardinal
// weights at many points: the factorisation is paid once. It is safe for
// concurrent use.
type Cardinal struct {
	sys *splineSystem
}

// Cardinal factorises the spline's fit for CardinalWeights.
func (s *Spline) Cardinal() (*Cardinal, error) {
	sys, err := s.system()
	if err != nil {
		return nil, fmt.Errorf("thin-plate spline: %w", err)
	}
	return &Cardinal{sys: sys}, nil
}

// Weights returns the cardinal weights at xs (N×len(xs); nil for no
// points), as Spline.CardinalWeights.
func (c *Cardinal) Weights(xs []Vec) *mat.Dense {
	if len(xs) == 0 {
		return nil
	}
	sys := c.sys
	N, m := len(sys.nodes), sys.m
	f := mat.NewDense(N, len(xs), nil)
	g := mat.NewDense(m, len(xs), nil)
	k := make([]float64, N)
	for i, x := range xs {
		u := x.Sub(sys.centre).Scale(1 / sys.scale)
		sys.kernelVector(u, k)
		for j := range N {
			f.Set(j, i, k[j])
		}
		g.Set(0, i, 1)
		for l := range sys.dim {
			g.Set(1+l, i, u[l])
		}
	}
	w, _ := sys.solve(f, g)
	return w
}

// LeaveOneOutWeights returns B (N×N) whose row i gives the spline's exact
// leave-one-out error at landmark i as a combination of the targets:
// e_i = Σ_j B_ij·q_j, q_i minus the prediction at node i of the spline
// fitted to the other nodes with the same smoothing and weights. Row i is
// row i of G, the top-left N×N block of the bordered system's inverse,
// divided by G_ii (the identity behind Result.LOO), and so it annihilates
// affine maps. Its scale does not matter, so the normalised system serves.
func (s *Spline) LeaveOneOutWeights() (*mat.Dense, error) {
	sys, err := s.system()
	if err != nil {
		return nil, fmt.Errorf("thin-plate spline: %w", err)
	}
	N := len(sys.nodes)
	id := mat.NewDense(N, N, nil)
	for i := range N {
		id.Set(i, i, 1)
	}
	g, _ := sys.solve(id, nil)
	for i := range N {
		d := g.At(i, i)
		if !(d > 0) {
			return nil, fmt.Errorf("thin-plate spline: node %d has no leave-one-out error", i)
		}
		row := g.RawRowView(i)
		for j := range row {
			row[j] /= d
		}
	}
	return g, nil
}
