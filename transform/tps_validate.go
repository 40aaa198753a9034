package transform

import (
	"errors"
	"fmt"
	"math"
)

// Validate checks s — dimension, lengths, finite numbers, the 2-D shape,
// the side conditions Σ w_j = 0 and Σ w_j u_j = 0 that every fitted spline
// meets — and derives from its nodes what Apply reads. Fit and the
// transform-file reader return splines that have passed it; a Spline built
// from its fields is validated on its first use, and its methods refuse it
// (Apply and Jacobian by panicking, the others with this error) if it
// fails. Validate lets such a caller see the error first. The fields must
// not change after the first use.
func (s *Spline) Validate() error {
	if s == nil {
		return errors.New("thin-plate spline is missing")
	}
	return s.ready().err
}

// clone returns a Spline with s's fields and its own, not yet built, nodal
// copies: a value copy would share s's verdict even after a field changes.
func (s *Spline) clone() *Spline {
	return &Spline{
		Dimension: s.Dimension, Centre: s.Centre, Scale: s.Scale,
		Nodes: s.Nodes, Weights: s.Weights, Matrix: s.Matrix, Offset: s.Offset,
		Smoothing: s.Smoothing, PairWeights: s.PairWeights,
	}
}

// check is Validate's verdict on the fields, with the nodal copies when
// they pass.
func (s *Spline) check() *splineNodal {
	c, err := s.nodalCopies()
	if err != nil {
		return &splineNodal{err: err}
	}
	return c
}

// nodalCopies checks the fields and builds the struct-of-arrays copies.
func (s *Spline) nodalCopies() (*splineNodal, error) {
	dim := s.Dimension
	if dim != 2 && dim != 3 {
		return nil, fmt.Errorf("thin-plate spline has dimension %d: want 2 or 3", dim)
	}
	n := len(s.Nodes)
	if n < dim+1 {
		return nil, fmt.Errorf("thin-plate spline in %d-D has %d nodes: want at least %d", dim, n, dim+1)
	}
	if len(s.Weights) != n {
		return nil, fmt.Errorf("thin-plate spline has %d nodes but %d kernel weights", n, len(s.Weights))
	}
	if !(s.Scale > 0) || math.IsInf(s.Scale, 0) {
		return nil, fmt.Errorf("thin-plate spline has scale %v µm: want a positive finite number", s.Scale)
	}
	if !s.Centre.IsFinite() || !s.Offset.IsFinite() {
		return nil, fmt.Errorf("thin-plate spline centre %v µm or offset %v µm is not finite", s.Centre, s.Offset)
	}
	for i := range 3 {
		for j := range 3 {
			if !finite(s.Matrix[i][j]) {
				return nil, fmt.Errorf("thin-plate spline: matrix entry (%d,%d) is %v", i, j, s.Matrix[i][j])
			}
		}
	}
	if !(s.Smoothing >= 0) || math.IsInf(s.Smoothing, 0) {
		return nil, fmt.Errorf("thin-plate spline has smoothing %v: want a finite number ≥ 0", s.Smoothing)
	}
	if s.PairWeights != nil {
		if len(s.PairWeights) != n {
			return nil, fmt.Errorf("thin-plate spline has %d nodes but %d pair weights", n, len(s.PairWeights))
		}
		for i, w := range s.PairWeights {
			if !(w > 0) || math.IsInf(w, 0) {
				return nil, fmt.Errorf("thin-plate spline pair weight %d is %v: want a positive finite number", i, w)
			}
		}
	}
	if dim == 2 {
		m := s.Matrix
		if m[0][2] != 0 || m[1][2] != 0 || m[2][0] != 0 || m[2][1] != 0 || m[2][2] != 1 || s.Offset[2] != 0 || s.Centre[2] != 0 {
			return nil, errors.New("2-D thin-plate spline must leave z alone: want matrix row and column 3 of the identity and offset and centre z 0")
		}
	}
	inv := 1 / s.Scale
	ux, uy, uz := make([]float64, n), make([]float64, n), make([]float64, n)
	wx, wy, wz := make([]float64, n), make([]float64, n), make([]float64, n)
	var sum Vec       // Σ w_j
	var moment Mat    // Σ w_j ⊗ u_j
	var magnitude Vec // Σ |w_j| (1 + |u_j|), the scale of both sums
	for j := range n {
		p, w := s.Nodes[j], s.Weights[j]
		if !p.IsFinite() || !w.IsFinite() {
			return nil, fmt.Errorf("thin-plate spline node %d (%v µm) or its weight (%v µm) is not finite", j, p, w)
		}
		if dim == 2 && (p[2] != 0 || w[2] != 0) {
			return nil, fmt.Errorf("2-D thin-plate spline node %d has a z coordinate or weight", j)
		}
		u := p.Sub(s.Centre).Scale(inv)
		ux[j], uy[j], uz[j] = u[0], u[1], u[2]
		wx[j], wy[j], wz[j] = w[0], w[1], w[2]
		sum = sum.Add(w)
		for a := range 3 {
			for b := range 3 {
				moment[a][b] += w[a] * u[b]
			}
			magnitude[a] += math.Abs(w[a]) * (1 + u.Norm())
		}
	}
	for a := range dim {
		bad := math.Abs(sum[a])
		for b := range dim {
			bad = math.Max(bad, math.Abs(moment[a][b]))
		}
		if bad > 1e-8*magnitude[a] {
			return nil, fmt.Errorf("thin-plate spline weights break the side conditions Σw = 0, Σw·u = 0 (off by %.3g of %.3g in coordinate %d): the file is damaged", bad, magnitude[a], a+1)
		}
	}
	return &splineNodal{ux: ux, uy: uy, uz: uz, wx: wx, wy: wy, wz: wz, invScale: inv}, nil
}
