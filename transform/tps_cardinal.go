package transform

import (
	"fmt"
	"sync"

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
//
// The weights at a point are A·[k(x); p(x)] with A = [G E] the top N rows
// of M⁻¹ (N×(N+m)). Weights forms A once, on first use (N solves of the
// factorised system, about N³ flops), and each batch of points is then one
// matrix product, which runs blocked on all cores, where solving for each
// batch ran two triangular solves and the reflectors on it (the same 2N²
// flops a point, at a third of the pace). Mapping with uncertainty asks
// for the weights at thousands of grid nodes whatever the number of cells,
// so the N³ is paid back many times over.
type Cardinal struct {
	sys  *splineSystem
	once sync.Once
	op   *mat.Dense
}

// operator forms A = [G E]: G = Z C⁻¹ Zᵀ from the right-hand sides [I; 0]
// and E from [0; I].
func (c *Cardinal) operator() {
	sys := c.sys
	N, m := len(sys.nodes), sys.m
	id := mat.NewDense(N, N, nil)
	for i := range N {
		id.Set(i, i, 1)
	}
	g, _ := sys.solve(id, nil)
	gm := mat.NewDense(m, m, nil)
	for i := range m {
		gm.Set(i, i, 1)
	}
	e, _ := sys.solve(mat.NewDense(N, m, nil), gm)
	op := mat.NewDense(N, N+m, nil)
	op.Slice(0, N, 0, N).(*mat.Dense).Copy(g)
	op.Slice(0, N, N, N+m).(*mat.Dense).Copy(e)
	c.op = op
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
	c.once.Do(c.operator)
	sys := c.sys
	N, m := len(sys.nodes), sys.m
	B := len(xs)
	z := make([]float64, (N+m)*B)
	k := make([]float64, N)
	for i, x := range xs {
		u := x.Sub(sys.centre).Scale(1 / sys.scale)
		sys.kernelVector(u, k)
		for j, v := range k {
			z[j*B+i] = v
		}
		z[N*B+i] = 1
		for l := range sys.dim {
			z[(N+1+l)*B+i] = u[l]
		}
	}
	w := mat.NewDense(N, B, nil)
	w.Mul(c.op, mat.NewDense(N+m, B, z))
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
