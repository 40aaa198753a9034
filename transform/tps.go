package transform

import (
	"fmt"
	"math"
	"sync/atomic"

	"gonum.org/v1/gonum/mat"
)

// The thin-plate spline of the contract (Bookstein 1989, IEEE TPAMI
// 11(6):567–585; Duchon 1977, Constructive Theory of Functions of Several
// Variables, Springer LNM 571; Wahba 1990, Spline Models for
// Observational Data, SIAM) maps a source point p to
//
//	f(p) = a₀ + A·p + Σ_j w_j φ(|p − p_j|),
//
// φ(r) = −r in 3-D and r² log r in 2-D (φ(0) = 0), with p in micrometres,
// where the kernel weights w and the affine part a solve
//
//	(K + S·D) w + P a = q,  Pᵀ w = 0,
//
// K_ij = φ(|p_i − p_j|), P_i = [1, p_i], q the targets and D the identity, or
// diag(w̄/w_i) when the pairs carry weights w_i (precisions) with mean w̄:
// a pair picked twice as precisely is smoothed half as much. At S = 0 the
// weights make no difference.
//
// The solve runs in normalised coordinates u = (p − c)/s (c the centroid of
// the sources, s their RMS distance from it), in which EM voxel coordinates
// near 1e5 µm become numbers near 1. The fitted function is exactly the one
// of the micrometre system because the kernels are (conditionally)
// scale-invariant:
//
//   - 3-D: φ(s·ρ) = s·φ(ρ), so K = s·K_u and the system reads
//     (K_u + (S/s)·D)(s·w) + P a = q: S_u = S/s, w_u = s·w.
//   - 2-D: φ(s·ρ) = s²·φ(ρ) + s² log s · ρ², so K = s²·K_u + s² log s·R with
//     R_ij = |u_i − u_j|² = |u_i|² + |u_j|² − 2 u_i·u_j. Under Pᵀw = 0 the
//     vector R·w = (Σ_j w_j |u_j|²)·1 is a constant, which the constant of
//     the affine part absorbs (at the nodes and at every other point alike):
//     S_u = S/s², w_u = s²·w.
//
// The tests check both against SciPy's RBFInterpolator, which solves in raw
// coordinates (transform/reference_test.go).

// Tolerances of the spline fit, each relative to the spread of the sources.
const (
	// splineDuplicateTol: at S = 0, two sources closer than this fraction
	// of the RMS spread are one point asked to go to two places.
	splineDuplicateTol = 1e-9
	// splineCondLimit: a projected kernel matrix whose condition number
	// (an estimate, in normalised units) exceeds this leaves fewer than
	// two significant digits in the weights.
	splineCondLimit = 1e14
	// splineInvertTol: Invert stops when |f(x) − q| falls below this
	// fraction of |q| + Scale: a picometre at 1e5 µm, still above rounding.
	splineInvertTol = 1e-12
	// splineMaxNewton bounds the Newton iterations of Invert.
	splineMaxNewton = 60
)

// Spline is a fitted thin-plate spline. Its fields are all the transform
// file needs to rebuild it:
//
//	u   = (p − Centre)/Scale
//	f(p) = Matrix·p + Offset + Σ_j Weights[j]·φ(|u − u_j|),  u_j = (Nodes[j] − Centre)/Scale
//
// with φ(ρ) = −ρ in 3-D and ρ² log ρ in 2-D. This is the contract's spline
// written in normalised coordinates: the contract's kernel weights in
// micrometre units are Weights/Scale (3-D) or Weights/Scale² (2-D), the
// affine matrix is Matrix, and its offset is Offset in 3-D and
// Offset − log(Scale)·Σ_j Weights[j]·|u_j|² in 2-D (see the derivation at
// the top of tps.go).
//
// Fit and Unmarshal return splines that have passed Validate. A Spline
// built from its fields is validated on its first use (see Validate), so
// it maps exactly as the fitted spline with the same fields, or is
// refused; its fields must not change after that. It is safe for
// concurrent use.
type Spline struct {
	// Dimension is 2 or 3.
	Dimension int `json:"dim"`
	// Centre and Scale define the normalised coordinates: the centroid of
	// the source landmarks and their RMS distance from it, in µm.
	Centre Vec     `json:"centre_um"`
	Scale  float64 `json:"scale_um"`
	// Nodes are the source landmarks in µm, the centres of the kernels.
	Nodes []Vec `json:"nodes_um"`
	// Weights are the kernel weights of the normalised form, in µm of
	// target displacement per unit of φ.
	Weights []Vec `json:"weights_um"`
	// Matrix and Offset are the affine part: target µm per source µm and
	// target µm. In 2-D the third row and column are those of the
	// identity and Offset[2] is 0, so z passes through unchanged.
	Matrix Mat `json:"matrix"`
	Offset Vec `json:"offset_um"`
	// Smoothing is the contract's S, for kernels evaluated in µm.
	Smoothing float64 `json:"smoothing"`
	// PairWeights are the per-pair weights the fit was given, nil when
	// equal. Apply does not need them; they and Smoothing let
	// Spline.system rebuild the factorised fit for the posterior variance.
	PairWeights []float64 `json:"pair_weights,omitempty"`

	// nodal holds what Validate derived from the fields above: built once,
	// on first use, by whichever goroutine gets there first.
	nodal atomic.Pointer[splineNodal]
}

// splineNodal is a Spline's validation verdict and, when it passed, the
// struct-of-arrays copies of the normalised nodes and the weights, so that
// the loop of Apply streams six dense slices.
type splineNodal struct {
	err        error
	ux, uy, uz []float64
	wx, wy, wz []float64
	invScale   float64
}

// ready returns s's nodal copies, validating s the first time it is asked.
// A Spline built from its fields, not by Fit or a file reader, is checked
// here before its first use, so it maps exactly as a fitted one or not at
// all.
func (s *Spline) ready() *splineNodal {
	if c := s.nodal.Load(); c != nil {
		return c
	}
	s.nodal.CompareAndSwap(nil, s.check())
	return s.nodal.Load()
}

// mustReady is ready for the methods that cannot return an error: a
// Spline that fails Validate is a programming error there, as an index out
// of range is, and it panics with the reason.
func (s *Spline) mustReady() *splineNodal {
	c := s.ready()
	if c.err != nil {
		panic(fmt.Sprintf("transform: invalid Spline (build one with Fit or read it with Unmarshal): %v", c.err))
	}
	return c
}

var _ Transform = (*Spline)(nil)

// Kind is TPS.
func (s *Spline) Kind() Kind { return TPS }

// Dim is 2 or 3.
func (s *Spline) Dim() int { return s.Dimension }

// Apply maps p. It does not allocate.
func (s *Spline) Apply(p Vec) Vec {
	c := s.mustReady()
	q := s.Matrix.MulVec(p).Add(s.Offset)
	x := (p[0] - s.Centre[0]) * c.invScale
	y := (p[1] - s.Centre[1]) * c.invScale
	ux, uy, wx, wy := c.ux, c.uy, c.wx, c.wy
	n := len(ux)
	uy, wx, wy = uy[:n], wx[:n], wy[:n]
	var fx, fy, fz float64
	if s.Dimension == 2 {
		// φ(ρ) = ρ² log ρ = ½ ρ² log ρ², which needs no square root.
		for j := range ux {
			dx, dy := x-ux[j], y-uy[j]
			r2 := dx*dx + dy*dy
			if r2 > 0 {
				k := 0.5 * r2 * math.Log(r2)
				fx += wx[j] * k
				fy += wy[j] * k
			}
		}
		q[0] += fx
		q[1] += fy
		return q
	}
	z := (p[2] - s.Centre[2]) * c.invScale
	uz, wz := c.uz[:n], c.wz[:n]
	for j := range ux {
		dx, dy, dz := x-ux[j], y-uy[j], z-uz[j]
		r := math.Sqrt(dx*dx + dy*dy + dz*dz)
		fx += wx[j] * r
		fy += wy[j] * r
		fz += wz[j] * r
	}
	// φ = −r.
	q[0] -= fx
	q[1] -= fy
	q[2] -= fz
	return q
}

// Jacobian is the analytic derivative of Apply at p: Matrix plus, per node,
// Weights[j] ⊗ ∇φ/Scale, with ∇_u(−ρ) = −(u − u_j)/ρ in 3-D and
// ∇_u(ρ² log ρ) = (2 log ρ + 1)(u − u_j) in 2-D. At a node itself the 3-D
// kernel has a cone point and no derivative; its term is taken as zero there
// (the symmetric choice; the 2-D term tends to zero anyway).
func (s *Spline) Jacobian(p Vec) Mat {
	if s.Dimension == 3 {
		// One loop serves both; the map's three sums cost little beside
		// the square root.
		_, j := s.applyJacobian(p)
		return j
	}
	c := s.mustReady()
	x := (p[0] - s.Centre[0]) * c.invScale
	y := (p[1] - s.Centre[1]) * c.invScale
	ux, uy, wx, wy := c.ux, c.uy, c.wx, c.wy
	n := len(ux)
	uy, wx, wy = uy[:n], wx[:n], wy[:n]
	var g Mat // Σ_j w_j ⊗ ∇_u φ_j
	for j := range ux {
		dx, dy := x-ux[j], y-uy[j]
		r2 := dx*dx + dy*dy
		if r2 > 0 {
			c := math.Log(r2) + 1
			gx, gy := c*dx, c*dy
			g[0][0] += wx[j] * gx
			g[0][1] += wx[j] * gy
			g[1][0] += wy[j] * gx
			g[1][1] += wy[j] * gy
		}
	}
	j := s.Matrix
	for a := range 3 {
		for b := range 3 {
			j[a][b] += g[a][b] * c.invScale
		}
	}
	return j
}

// Invert finds the source point x with f(x) = q by Newton's method, started
// from the inverse of the affine part and damped by step halving so that
// |f(x) − q| falls at every step. It stops when |f(x) − q| is below
// 1e-12·(|q| + Scale) µm, or when the step has shrunk to rounding while the
// residual is already below 1e-6·Scale µm. It returns an error wrapping
// ErrNoConvergence when the affine part is singular, when no step reduces
// the residual, when the iterations run out, and when the solution lies
// where the spline folds (its Jacobian determinant there does not have the
// sign of the affine part's, so the inverse is not unique).
func (s *Spline) Invert(q Vec) (Vec, error) {
	if err := s.ready().err; err != nil {
		return Vec{}, err
	}
	ainv, ok := s.Matrix.Inverse()
	if !ok {
		return Vec{}, fmt.Errorf("thin-plate spline's affine part is singular: %w", ErrNoConvergence)
	}
	orient := math.Copysign(1, s.Matrix.Det())
	x := ainv.MulVec(q.Sub(s.Offset))
	if s.Dimension == 2 {
		x[2] = q[2]
	}
	tol := splineInvertTol * (q.Norm() + s.Scale)
	r := s.Apply(x).Sub(q)
	rn := r.Norm()
	for range splineMaxNewton {
		if rn <= tol {
			return s.checkUnfolded(x, q, orient)
		}
		jinv, ok := s.Jacobian(x).Inverse()
		if !ok {
			return Vec{}, fmt.Errorf("thin-plate spline inverse of %v µm: singular Jacobian at %v µm (a fold): %w", q, x, ErrNoConvergence)
		}
		step := jinv.MulVec(r)
		t := 1.0
		for {
			xn := x.Sub(step.Scale(t))
			rnew := s.Apply(xn).Sub(q)
			if rnn := rnew.Norm(); rnn < rn {
				x, r, rn = xn, rnew, rnn
				break
			}
			t /= 2
			if t < 1e-6 {
				if rn <= 1e-6*s.Scale {
					// Rounding floor: no step can do better.
					return s.checkUnfolded(x, q, orient)
				}
				return Vec{}, fmt.Errorf("thin-plate spline inverse of %v µm stalled %.3g µm away at %v µm: %w", q, rn, x, ErrNoConvergence)
			}
		}
		if t*step.Norm() <= 1e-13*(x.Norm()+s.Scale) && rn <= 1e-6*s.Scale {
			return s.checkUnfolded(x, q, orient)
		}
	}
	return Vec{}, fmt.Errorf("thin-plate spline inverse of %v µm still %.3g µm off after %d Newton steps: %w", q, rn, splineMaxNewton, ErrNoConvergence)
}

// checkUnfolded accepts the Newton solution x unless the spline folds there.
func (s *Spline) checkUnfolded(x, q Vec, orient float64) (Vec, error) {
	if d := s.Jacobian(x).Det(); !(d*orient > 0) {
		return Vec{}, fmt.Errorf("thin-plate spline inverse of %v µm lands at %v µm where the spline folds (Jacobian determinant %.3g): %w", q, x, d, ErrNoConvergence)
	}
	return x, nil
}

// system rebuilds and factorises the fit of s from its nodes, smoothing and
// pair weights: the reusable piece for quantities beyond the fitted map,
// such as the posterior variance. It costs a Cholesky factorisation.
func (s *Spline) system() (*splineSystem, error) {
	if err := s.Validate(); err != nil {
		return nil, err
	}
	return newSplineSystem(s.Dimension, s.Centre, s.Scale, s.Nodes, s.Smoothing, s.PairWeights)
}

// fitSpline fits the thin-plate spline of the contract to the pairs (already
// checked by Fit) and, when asked, its exact leave-one-out errors.
func fitSpline(dim int, src, dst []Vec, opt Options) (*Result, error) {
	n, m := len(src), dim+1
	if n < m {
		return nil, fmt.Errorf("a thin-plate spline in %d-D needs at least %d landmark pairs, have %d", dim, m, n)
	}
	centre, scale, err := splineNormalisation(dim, src)
	if err != nil {
		return nil, err
	}
	if err := opt.cancelled(); err != nil {
		return nil, err
	}
	sys, err := newSplineSystem(dim, centre, scale, src, opt.Smoothing, opt.Weights)
	if err != nil {
		return nil, err
	}
	if err := opt.cancelled(); err != nil {
		return nil, err
	}
	// Subtracting the mean target keeps the affine constant, not the
	// weights, carrying coordinates near 1e5 µm.
	var qmean Vec
	for _, q := range dst {
		qmean = qmean.Add(q)
	}
	qmean = qmean.Scale(1 / float64(n))
	f := mat.NewDense(n, dim, nil)
	for i, q := range dst {
		for k := range dim {
			f.Set(i, k, q[k]-qmean[k])
		}
	}
	c, a := sys.solve(f, nil)

	sp := &Spline{Dimension: dim, Centre: centre, Scale: scale, Smoothing: opt.Smoothing, Matrix: Identity()}
	sp.Nodes = append([]Vec(nil), src...)
	if opt.Weights != nil {
		sp.PairWeights = append([]float64(nil), opt.Weights...)
	}
	sp.Weights = make([]Vec, n)
	for i := range n {
		for k := range dim {
			sp.Weights[i][k] = c.At(i, k)
		}
	}
	// a holds the affine part in normalised coordinates: row 0 the
	// constant, row 1+l the coefficient of u_l, one column per target axis.
	for k := range dim {
		off := a.At(0, k) + qmean[k]
		for l := range dim {
			sp.Matrix[k][l] = a.At(1+l, k) / scale
			off -= sp.Matrix[k][l] * centre[l]
		}
		sp.Offset[k] = off
	}
	if err := sp.Validate(); err != nil {
		return nil, fmt.Errorf("fitted thin-plate spline: %w", err)
	}
	res := &Result{Transform: sp, Residuals: make([]Vec, n), Mirrored: sp.Matrix.Det() < 0}
	for i := range n {
		res.Residuals[i] = dst[i].Sub(sp.Apply(src[i]))
	}
	if !opt.LeaveOneOut {
		return res, nil
	}
	if err := opt.cancelled(); err != nil {
		return nil, err
	}
	res.LOO, res.LOOFactor, err = sys.leaveOneOut(sp.Weights)
	if err != nil {
		return nil, err
	}
	return res, nil
}

// splineNormalisation returns the centroid of the sources and their RMS
// distance from it, which become the origin and unit of the normalised
// coordinates.
func splineNormalisation(dim int, src []Vec) (Vec, float64, error) {
	var c Vec
	for _, p := range src {
		c = c.Add(p)
	}
	c = c.Scale(1 / float64(len(src)))
	ss := 0.0
	for _, p := range src {
		d := p.Sub(c)
		for k := range dim {
			ss += d[k] * d[k]
		}
	}
	s := math.Sqrt(ss / float64(len(src)))
	if !(s > splineDuplicateTol*c.Norm()) {
		return Vec{}, 0, fmt.Errorf("all %d source points coincide (RMS spread %.3g µm): a thin-plate spline needs them spread", len(src), s)
	}
	return c, s, nil
}
