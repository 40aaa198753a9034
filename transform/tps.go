package transform

import (
	"errors"
	"fmt"
	"math"
	"sync"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/lapack/lapack64"
	"gonum.org/v1/gonum/mat"

	"ferry/internal/parallel"
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
// A Spline decoded from a file must pass validate, which also builds the
// caches that Apply, Jacobian and Invert read; Fit returns one ready to use.
// After that it is safe for concurrent use.
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

	// Struct-of-arrays copies of the normalised nodes and the weights, so
	// that the loop of Apply streams six dense slices.
	ux, uy, uz []float64
	wx, wy, wz []float64
	invScale   float64
}

var _ Transform = (*Spline)(nil)

// Kind is TPS.
func (s *Spline) Kind() Kind { return TPS }

// Dim is 2 or 3.
func (s *Spline) Dim() int { return s.Dimension }

// Apply maps p. It does not allocate.
func (s *Spline) Apply(p Vec) Vec {
	q := s.Matrix.MulVec(p).Add(s.Offset)
	x := (p[0] - s.Centre[0]) * s.invScale
	y := (p[1] - s.Centre[1]) * s.invScale
	ux, uy, wx, wy := s.ux, s.uy, s.wx, s.wy
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
	z := (p[2] - s.Centre[2]) * s.invScale
	uz, wz := s.uz[:n], s.wz[:n]
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
	x := (p[0] - s.Centre[0]) * s.invScale
	y := (p[1] - s.Centre[1]) * s.invScale
	ux, uy, wx, wy := s.ux, s.uy, s.wx, s.wy
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
			j[a][b] += g[a][b] * s.invScale
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

// validate checks a decoded Spline — dimension, lengths, finite numbers, the
// 2-D shape, the side conditions Σ w_j = 0 and Σ w_j u_j = 0 that every
// fitted spline meets — and then builds the caches Apply needs. The
// transform-file reader must call it before using the spline; it is the only
// place the caches are built.
func (s *Spline) validate() error {
	if s == nil {
		return errors.New("thin-plate spline is missing")
	}
	dim := s.Dimension
	if dim != 2 && dim != 3 {
		return fmt.Errorf("thin-plate spline has dimension %d: want 2 or 3", dim)
	}
	n := len(s.Nodes)
	if n < dim+1 {
		return fmt.Errorf("thin-plate spline in %d-D has %d nodes: want at least %d", dim, n, dim+1)
	}
	if len(s.Weights) != n {
		return fmt.Errorf("thin-plate spline has %d nodes but %d kernel weights", n, len(s.Weights))
	}
	if !(s.Scale > 0) || math.IsInf(s.Scale, 0) {
		return fmt.Errorf("thin-plate spline has scale %v µm: want a positive finite number", s.Scale)
	}
	if !s.Centre.IsFinite() || !s.Offset.IsFinite() {
		return fmt.Errorf("thin-plate spline centre %v µm or offset %v µm is not finite", s.Centre, s.Offset)
	}
	for i := range 3 {
		for j := range 3 {
			if !finite(s.Matrix[i][j]) {
				return fmt.Errorf("thin-plate spline: matrix entry (%d,%d) is %v", i, j, s.Matrix[i][j])
			}
		}
	}
	if !(s.Smoothing >= 0) || math.IsInf(s.Smoothing, 0) {
		return fmt.Errorf("thin-plate spline has smoothing %v: want a finite number ≥ 0", s.Smoothing)
	}
	if s.PairWeights != nil {
		if len(s.PairWeights) != n {
			return fmt.Errorf("thin-plate spline has %d nodes but %d pair weights", n, len(s.PairWeights))
		}
		for i, w := range s.PairWeights {
			if !(w > 0) || math.IsInf(w, 0) {
				return fmt.Errorf("thin-plate spline pair weight %d is %v: want a positive finite number", i, w)
			}
		}
	}
	if dim == 2 {
		m := s.Matrix
		if m[0][2] != 0 || m[1][2] != 0 || m[2][0] != 0 || m[2][1] != 0 || m[2][2] != 1 || s.Offset[2] != 0 || s.Centre[2] != 0 {
			return errors.New("2-D thin-plate spline must leave z alone: want matrix row and column 3 of the identity and offset and centre z 0")
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
			return fmt.Errorf("thin-plate spline node %d (%v µm) or its weight (%v µm) is not finite", j, p, w)
		}
		if dim == 2 && (p[2] != 0 || w[2] != 0) {
			return fmt.Errorf("2-D thin-plate spline node %d has a z coordinate or weight", j)
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
			return fmt.Errorf("thin-plate spline weights break the side conditions Σw = 0, Σw·u = 0 (off by %.3g of %.3g in coordinate %d): the file is damaged", bad, magnitude[a], a+1)
		}
	}
	s.ux, s.uy, s.uz = ux, uy, uz
	s.wx, s.wy, s.wz = wx, wy, wz
	s.invScale = inv
	return nil
}

// system rebuilds and factorises the fit of s from its nodes, smoothing and
// pair weights: the reusable piece for quantities beyond the fitted map,
// such as the posterior variance. It costs a Cholesky factorisation.
func (s *Spline) system() (*splineSystem, error) {
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
	if err := sp.validate(); err != nil {
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

// splineSystem is the factorised linear system of one spline fit, kept apart
// from Spline so that the fit, its leave-one-out errors and later its
// posterior variance (Wahba 1983, JRSS B 45:133–150) share it.
//
// Everything is in normalised coordinates u = (p − centre)/scale. With
// A = K_u + S_u·D (N×N, D = diag(w̄/w_i) or the identity) and P = [1, u]
// (N×m, m = dim+1), the bordered matrix is
//
//	M = [ A   P ]
//	    [ Pᵀ  0 ].
//
// P = Q·[R; 0] is its Householder QR (Golub and Van Loan, Matrix
// Computations, 4th ed. 2013, §5.2, cited from memory), kept as m reflectors
// H_k = I − τ_k v_k v_kᵀ (v_k zero above row k, one at row k) so that
// Q = H_0·H_1·…·H_{m−1} is never formed; applying Q or Qᵀ to a vector costs
// O(N·m). Writing Q = [Y Z], Z (N×n, n = N − m) is an orthonormal basis of
// {w : Pᵀw = 0}, and B = Qᵀ A Q splits into
//
//	B = [ B11  B12 ]   B11 = YᵀAY (m×m), B12 = YᵀAZ (m×n),
//	    [ B21  C   ]   C = ZᵀAZ (n×n).
//
// C is positive definite because φ is conditionally positive definite of an
// order the linear polynomial covers (−r of order 1, r² log r of order 2 in
// 2-D; Micchelli 1986, Constr. Approx. 2:11–22, cited from memory) for
// distinct nodes, and for any nodes once S > 0; chol holds its Cholesky
// factor C = UᵀU. Then M [c; a] = [f; g] is solved by c = Q [α; γ] with
//
//	Rᵀ α = g,  C γ = (Qᵀf)₂ − B21 α,  R a = (Qᵀf)₁ − B11 α − B12 γ,
//
// and the top-left N×N block of M⁻¹ is Z C⁻¹ Zᵀ (a standard identity for
// saddle-point matrices; Benzi, Golub and Liesen 2005, Acta Numerica
// 14:1–137, cited from memory), which leaveOneOut uses. A posterior
// variance at x needs [k(x); p(x)]ᵀ M⁻¹ [k(x); p(x)] with k(x) from
// kernelVector and p(x) = [1, u(x)]: one call of solve per point, or, for
// many points, the factor U and the reflectors directly. Quantities from the
// normalised M convert to the micrometre system as leaveOneOut describes.
type splineSystem struct {
	dim, m    int
	centre    Vec
	scale     float64
	nodes     []Vec     // u_j, the normalised sources
	smoothing float64   // S_u: the contract's S converted to normalised units
	penalty   []float64 // D_ii = w̄/w_i; nil for the identity
	v         [][]float64
	tau       []float64
	r         [][]float64 // R, m×m upper triangular
	b11       [][]float64 // m×m
	b12       *mat.Dense  // m×n; nil when n = 0
	chol      mat.Cholesky
	// closest pair of nodes and their distance in normalised units, for
	// the messages about singular systems.
	closeI, closeJ int
	closeDist      float64
}

// newSplineSystem normalises the nodes (µm) with the given centre and scale,
// converts the contract's smoothing to normalised units, factorises P, forms
// Qᵀ(K + S·D)Q implicitly and factorises its projected block. It refuses
// systems that have no unique solution, with the reason.
func newSplineSystem(dim int, centre Vec, scale float64, nodes []Vec, smoothing float64, pairWeights []float64) (*splineSystem, error) {
	N, m := len(nodes), dim+1
	if N < m {
		return nil, fmt.Errorf("a thin-plate spline in %d-D needs at least %d landmark pairs, have %d", dim, m, N)
	}
	sys := &splineSystem{dim: dim, m: m, centre: centre, scale: scale}
	sys.nodes = make([]Vec, N)
	for i, p := range nodes {
		sys.nodes[i] = p.Sub(centre).Scale(1 / scale)
	}
	if dim == 3 {
		sys.smoothing = smoothing / scale
	} else {
		sys.smoothing = smoothing / (scale * scale)
	}
	if pairWeights != nil {
		mean := 0.0
		for _, w := range pairWeights {
			mean += w
		}
		mean /= float64(N)
		sys.penalty = make([]float64, N)
		for i, w := range pairWeights {
			sys.penalty[i] = mean / w
		}
	}
	if err := sys.factorAffine(); err != nil {
		return nil, err
	}

	a := sys.kernelMatrix()
	if smoothing == 0 && sys.closeDist <= splineDuplicateTol {
		return nil, fmt.Errorf("source points of pairs %d and %d coincide (%.3g µm apart): an interpolating thin-plate spline (smoothing 0) cannot send one point to two targets; drop one of them or use smoothing > 0",
			sys.closeI, sys.closeJ, sys.closeDist*scale)
	}
	sys.project(a)
	n := N - m
	sys.b11 = make([][]float64, m)
	for i := range m {
		sys.b11[i] = append([]float64(nil), a[i*N:i*N+m]...)
	}
	if n == 0 {
		return sys, nil
	}
	sys.b12 = mat.NewDense(m, n, nil)
	for i := range m {
		for j := range n {
			sys.b12.Set(i, j, a[i*N+m+j])
		}
	}
	var c mat.SymDense
	c.SetRawSymmetric(blas64.Symmetric{Uplo: blas.Upper, N: n, Stride: N, Data: a[m*N+m:]})
	if ok := sys.chol.Factorize(&c); !ok {
		return nil, fmt.Errorf("thin-plate spline system is singular (closest source points: pairs %d and %d, %.3g µm apart); use smoothing > 0", sys.closeI, sys.closeJ, sys.closeDist*scale)
	}
	if cond := sys.chol.Cond(); cond > splineCondLimit {
		return nil, fmt.Errorf("thin-plate spline system is too ill-conditioned to solve (condition number %.3g; closest source points: pairs %d and %d, %.3g µm apart); use smoothing > 0 or drop one of them", cond, sys.closeI, sys.closeJ, sys.closeDist*scale)
	}
	return sys, nil
}

// kernel is φ in normalised units as a function of ρ².
func (sys *splineSystem) kernel(r2 float64) float64 {
	if sys.dim == 3 {
		return -math.Sqrt(r2)
	}
	if r2 == 0 {
		return 0
	}
	return 0.5 * r2 * math.Log(r2)
}

// kernelVector sets k[j] = φ(|u − u_j|) for the normalised point u.
func (sys *splineSystem) kernelVector(u Vec, k []float64) {
	if sys.dim == 3 {
		// Without the kernel's branch on the dimension at every node:
		// this loop is a third of a posterior variance.
		k = k[:len(sys.nodes)]
		for j, uj := range sys.nodes {
			dx, dy, dz := u[0]-uj[0], u[1]-uj[1], u[2]-uj[2]
			k[j] = -math.Sqrt(dx*dx + dy*dy + dz*dz)
		}
		return
	}
	for j, uj := range sys.nodes {
		d := u.Sub(uj)
		k[j] = sys.kernel(d.Dot(d))
	}
}

// kernelMatrix returns K_u + S_u·D as a dense row-major N×N slice and notes
// the closest pair of nodes.
func (sys *splineSystem) kernelMatrix() []float64 {
	N := len(sys.nodes)
	a := make([]float64, N*N)
	closest, ci, cj := math.Inf(1), 0, 0
	for i := range N {
		ui := sys.nodes[i]
		row := a[i*N : i*N+i]
		for j := range row {
			d := ui.Sub(sys.nodes[j])
			r2 := d.Dot(d)
			if r2 < closest {
				closest, ci, cj = r2, j, i
			}
			k := sys.kernel(r2)
			row[j] = k
			a[j*N+i] = k
		}
		d := 1.0
		if sys.penalty != nil {
			d = sys.penalty[i]
		}
		a[i*N+i] = sys.smoothing * d
	}
	sys.closeI, sys.closeJ, sys.closeDist = ci, cj, math.Sqrt(closest)
	return a
}

// factorAffine computes the Householder QR of P = [1, u] and refuses nodes
// on a line (2-D) or a plane (3-D), judged by the singular values of the
// block of R that belongs to the centred coordinates: their squares sum to N
// (the nodes' RMS radius is 1), and the smallest over √N is the RMS
// thickness of the cloud across its flattest direction.
func (sys *splineSystem) factorAffine() error {
	N, m, dim := len(sys.nodes), sys.m, sys.dim
	cols := make([][]float64, m)
	for k := range m {
		cols[k] = make([]float64, N)
		for i, u := range sys.nodes {
			if k == 0 {
				cols[k][i] = 1
			} else {
				cols[k][i] = u[k-1]
			}
		}
	}
	sys.v, sys.tau, sys.r = householderColumns(cols)
	rb := mat.NewDense(dim, dim, nil)
	for i := range dim {
		for j := i; j < dim; j++ {
			rb.Set(i, j, sys.r[1+i][1+j])
		}
	}
	var svd mat.SVD
	if !svd.Factorize(rb, mat.SVDNone) {
		return errors.New("singular value decomposition of the source points failed")
	}
	sv := svd.Values(nil)
	if !(sv[dim-1] > flatTol*sv[0]) {
		root := math.Sqrt(float64(N))
		return fmt.Errorf("source points lie on a %s (RMS extent %.3g µm across it against %.3g µm along it): the affine part of a thin-plate spline off it is undetermined",
			flatShape(dim), sv[dim-1]/root*sys.scale, sv[0]/root*sys.scale)
	}
	return nil
}

// householderColumns computes the Householder QR of the N×m matrix whose
// columns are cols (overwritten): the reflectors v_k (zero above row k, one
// at row k) with their τ_k, and R (m×m, upper triangular).
func householderColumns(cols [][]float64) (v [][]float64, tau []float64, r [][]float64) {
	m, N := len(cols), len(cols[0])
	v = make([][]float64, m)
	tau = make([]float64, m)
	r = make([][]float64, m)
	for k := range m {
		r[k] = make([]float64, m)
		x := cols[k]
		norm := 0.0
		for i := k; i < N; i++ {
			norm += x[i] * x[i]
		}
		norm = math.Sqrt(norm)
		vk := make([]float64, N)
		vk[k] = 1
		beta := x[k]
		if norm > 0 {
			// LAPACK's dlarfg convention: β = −sign(x_k)|x|.
			beta = -math.Copysign(norm, x[k])
			tau[k] = (beta - x[k]) / beta
			inv := 1 / (x[k] - beta)
			for i := k + 1; i < N; i++ {
				vk[i] = x[i] * inv
			}
		}
		v[k] = vk
		r[k][k] = beta
		for j := k + 1; j < m; j++ {
			applyReflector(cols[j], vk, tau[k], k)
			r[k][j] = cols[j][k]
		}
	}
	return v, tau, r
}

// applyReflector overwrites x with (I − τ v vᵀ) x, v being zero above row k.
func applyReflector(x, v []float64, tau float64, k int) {
	if tau == 0 {
		return
	}
	x, v = x[k:], v[k:len(x)]
	d := 0.0
	for i, vi := range v {
		d += vi * x[i]
	}
	d *= tau
	for i, vi := range v {
		x[i] -= d * vi
	}
}

// project overwrites the symmetric N×N matrix a with Qᵀ a Q, one reflector
// at a time from both sides: with p = τ a v and w = p − (τ/2)(pᵀv) v,
// H a H = a − v wᵀ − w vᵀ, which costs 4N² per reflector.
func (sys *splineSystem) project(a []float64) {
	projectSym(a, len(sys.nodes), sys.v, sys.tau)
}

// projectSym overwrites the symmetric N×N matrix a with Qᵀ a Q for Q the
// product of the reflectors v, tau (householderColumns), as project.
func projectSym(a []float64, N int, vs [][]float64, taus []float64) {
	p := make([]float64, N)
	for k := range vs {
		v, tau := vs[k], taus[k]
		if tau == 0 {
			continue
		}
		vk := v[k:]
		parallelRows(N, func(lo, hi int) {
			for i := lo; i < hi; i++ {
				row := a[i*N+k : i*N+N]
				s := 0.0
				for j, vj := range vk {
					s += row[j] * vj
				}
				p[i] = tau * s
			}
		})
		half := 0.0
		for i := k; i < N; i++ {
			half += p[i] * v[i]
		}
		half *= tau / 2
		for i := range N {
			p[i] -= half * v[i] // p is now w
		}
		parallelRows(N, func(lo, hi int) {
			for i := lo; i < hi; i++ {
				row := a[i*N : i*N+N]
				vi, wi := v[i], p[i]
				// Row i changes by −v_i wᵀ − w_i vᵀ; v vanishes above k.
				if vi != 0 {
					for j := range row {
						row[j] -= vi * p[j]
					}
				}
				rk := row[k:]
				for j, vj := range vk {
					rk[j] -= wi * vj
				}
			}
		})
	}
}

// applyQT overwrites x (N×k) with Qᵀx.
func (sys *splineSystem) applyQT(x *mat.Dense) {
	for k := range sys.m {
		sys.reflectRows(x, k)
	}
}

// applyQ overwrites x (N×k) with Qx.
func (sys *splineSystem) applyQ(x *mat.Dense) {
	for k := sys.m - 1; k >= 0; k-- {
		sys.reflectRows(x, k)
	}
}

// reflectRows overwrites x with H_k x.
func (sys *splineSystem) reflectRows(x *mat.Dense, k int) {
	raw := x.RawMatrix()
	reflectColumns(raw.Data, raw.Stride, raw.Rows, 0, raw.Cols, sys.v[k], sys.tau[k], k)
}

// reflectColumns overwrites columns [c0, c1) of the row-major matrix data
// (rows×stride) with H x for H = I − τ v vᵀ, v being zero above row k.
func reflectColumns(data []float64, stride, rows, c0, c1 int, v []float64, tau float64, k int) {
	if tau == 0 || c1 <= c0 {
		return
	}
	t := make([]float64, c1-c0)
	for i := k; i < rows; i++ {
		if vi := v[i]; vi != 0 {
			row := data[i*stride+c0 : i*stride+c1]
			for j, x := range row {
				t[j] += vi * x
			}
		}
	}
	for j := range t {
		t[j] *= tau
	}
	for i := k; i < rows; i++ {
		if vi := v[i]; vi != 0 {
			row := data[i*stride+c0 : i*stride+c1]
			for j := range row {
				row[j] -= vi * t[j]
			}
		}
	}
}

// solve returns the solution [c; a] of M [c; a] = [f; g] for f (N×k) and g
// (m×k; nil for zero), following the block elimination in the comment on
// splineSystem. The fit calls it with g = 0, which makes α = 0.
func (sys *splineSystem) solve(f, g *mat.Dense) (c, a *mat.Dense) {
	N, m := len(sys.nodes), sys.m
	n := N - m
	_, k := f.Dims()
	t := mat.DenseCopyOf(f)
	sys.applyQT(t)
	alpha := mat.NewDense(m, k, nil)
	if g != nil {
		// Rᵀ α = g by forward substitution.
		for col := range k {
			for i := range m {
				s := g.At(i, col)
				for l := range i {
					s -= sys.r[l][i] * alpha.At(l, col)
				}
				alpha.Set(i, col, s/sys.r[i][i])
			}
		}
	}
	gamma := mat.NewDense(max(n, 1), k, nil)
	if n > 0 {
		rhs := mat.DenseCopyOf(t.Slice(m, N, 0, k))
		if g != nil {
			var ba mat.Dense
			ba.Mul(sys.b12.T(), alpha)
			rhs.Sub(rhs, &ba)
		}
		// The factor passed the condition check, so SolveTo's
		// condition warning cannot arise; the result is used either way.
		_ = sys.chol.SolveTo(gamma, rhs)
	}
	a = mat.NewDense(m, k, nil)
	for col := range k {
		rhs := make([]float64, m)
		for i := range m {
			s := t.At(i, col)
			for l := range m {
				s -= sys.b11[i][l] * alpha.At(l, col)
			}
			if n > 0 {
				for l := range n {
					s -= sys.b12.At(i, l) * gamma.At(l, col)
				}
			}
			rhs[i] = s
		}
		// R a = rhs by back substitution.
		for i := m - 1; i >= 0; i-- {
			s := rhs[i]
			for l := i + 1; l < m; l++ {
				s -= sys.r[i][l] * a.At(l, col)
			}
			a.Set(i, col, s/sys.r[i][i])
		}
	}
	c = mat.NewDense(N, k, nil)
	for i := range m {
		for col := range k {
			c.Set(i, col, alpha.At(i, col))
		}
	}
	for i := range n {
		for col := range k {
			c.Set(m+i, col, gamma.At(i, col))
		}
	}
	sys.applyQ(c)
	return c, a
}

// leverage returns the diagonal of Y Yᵀ = P (PᵀP)⁻¹ Pᵀ, the affine leverage
// of each node.
func (sys *splineSystem) leverage() []float64 {
	N, m := len(sys.nodes), sys.m
	y := mat.NewDense(N, m, nil)
	for i := range m {
		y.Set(i, i, 1)
	}
	sys.applyQ(y)
	h := make([]float64, N)
	for i := range N {
		row := y.RawRowView(i)
		for _, x := range row {
			h[i] += x * x
		}
	}
	return h
}

// inverseDiagonal returns the diagonal of Z C⁻¹ Zᵀ, the top-left block of
// M⁻¹. With C = UᵀU, Z C⁻¹ Zᵀ = G Gᵀ for G = Z U⁻¹ = Q [0; U⁻¹], so the
// diagonal holds the squared row norms of G. U⁻¹ is formed in place (LAPACK
// dtrtri, n³/3 flops, the only cubic cost after the factorisation) inside
// the N×n buffer for G, and Q is applied to column blocks of G on all cores.
func (sys *splineSystem) inverseDiagonal() ([]float64, error) {
	N, m := len(sys.nodes), sys.m
	n := N - m
	if n == 0 {
		return nil, errors.New("thin-plate spline has no kernel freedom: leave-one-out needs more pairs than the affine part")
	}
	u := sys.chol.RawU().(mat.RawTriangular).RawTriangular()
	g := make([]float64, N*n)
	for i := range n {
		copy(g[(m+i)*n+i:(m+i+1)*n], u.Data[i*u.Stride+i:i*u.Stride+n])
	}
	if !invertUpper(blas64.Triangular{Uplo: blas.Upper, Diag: blas.NonUnit, N: n, Stride: n, Data: g[m*n:]}) {
		return nil, errors.New("thin-plate spline leave-one-out: the Cholesky factor is singular")
	}
	// The squared row norms are summed over fixed blocks of columns and
	// the blocks' sums added in block order, so that the diagonal is the
	// same to the last bit whatever the number of cores: with a block per
	// core, one core and two added the columns in different groups.
	const block = 64
	nb := (n + block - 1) / block
	parts := make([]float64, nb*N)
	parallel.Ranges(nb, 1, func(b0, b1 int) {
		for b := b0; b < b1; b++ {
			c0, c1 := b*block, min((b+1)*block, n)
			for k := m - 1; k >= 0; k-- {
				reflectColumns(g, n, N, c0, c1, sys.v[k], sys.tau[k], k)
			}
			part := parts[b*N : (b+1)*N]
			for i := range N {
				s := 0.0
				for _, x := range g[i*n+c0 : i*n+c1] {
					s += x * x
				}
				part[i] = s
			}
		}
	})
	diag := make([]float64, N)
	for b := range nb {
		for i, s := range parts[b*N : (b+1)*N] {
			diag[i] += s
		}
	}
	return diag, nil
}

// invertUpper overwrites the upper triangular t with its inverse. LAPACK's
// blocked dtrtri runs on one core; here the columns are split in two at
// k = n·2^(−1/3), which halves the n³/3 flops between two cores: with
// U = [U11 U12; 0 U22], the leading k columns of U⁻¹ are U11⁻¹ (dtrtri on
// the leading block) and the trailing columns [X; U22⁻¹] solve the
// triangular systems U22 Y = I, U11 X = −U12 Y (dtrtri on U22 followed by
// two matrix products), costing k³/3 and (n³ − k³)/3 flops respectively.
func invertUpper(t blas64.Triangular) bool {
	n := t.N
	// The split depends on n alone, not on the cores there are, so that
	// the inverse is the same to the last bit on one core and on many; on
	// one core it costs the same flops as dtrtri.
	if n < 256 {
		return lapack64.Trtri(t)
	}
	k := int(float64(n) * math.Pow(2, -1.0/3))
	st := t.Stride
	u11 := blas64.Triangular{Uplo: blas.Upper, Diag: blas.NonUnit, N: k, Stride: st, Data: t.Data}
	u22 := blas64.Triangular{Uplo: blas.Upper, Diag: blas.NonUnit, N: n - k, Stride: st, Data: t.Data[k*st+k:]}
	// U11 is needed intact by the trailing block, so that block works on
	// a copy of it while the leading block is inverted in place.
	c11 := make([]float64, k*k)
	for i := range k {
		copy(c11[i*k+i:(i+1)*k], t.Data[i*st+i:i*st+k])
	}
	var ok1, ok2 bool
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		ok1 = lapack64.Trtri(u11)
	}()
	ok2 = lapack64.Trtri(u22)
	if ok2 {
		// X = −U11⁻¹ U12 U22⁻¹: first U12 ← U12·U22⁻¹, then solve
		// U11 X = −U12.
		u12 := blas64.General{Rows: k, Cols: n - k, Stride: st, Data: t.Data[k:]}
		blas64.Trmm(blas.Right, blas.NoTrans, 1, u22, u12)
		c := blas64.Triangular{Uplo: blas.Upper, Diag: blas.NonUnit, N: k, Stride: k, Data: c11}
		blas64.Trsm(blas.Left, blas.NoTrans, -1, c, u12)
	}
	wg.Wait()
	return ok1 && ok2
}

// leaveOneOut returns the exact leave-one-out errors of the fit whose
// kernel weights are w, without refitting.
//
// The identity is Rippa's (1999, Adv. Comput. Math. 11:193–210), extended
// here to the affine part and to S > 0. Let x = [c; a] solve M x = b with
// b = [q; 0], and for pair i let
//
//	x⁽ⁱ⁾ = x − (c_i / (M⁻¹)_ii) · M⁻¹ e_i.
//
// Its i-th entry is c_i − c_i = 0, and M x⁽ⁱ⁾ = b − (c_i/(M⁻¹)_ii) e_i, so
// every row but the i-th holds exactly; deleting row and column i (the
// column multiplies the zero entry) leaves the system of the fit without
// pair i, and x⁽ⁱ⁾ without its i-th entry is that fit. Row i reads
// Σ_{j≠i} K_ij c⁽ⁱ⁾_j + P_i a⁽ⁱ⁾ + S·D_ii·c⁽ⁱ⁾_i = q_i − c_i/(M⁻¹)_ii, and
// its first two terms are the prediction f⁽⁻ⁱ⁾(p_i) of the reduced fit while
// the smoothing term vanishes because c⁽ⁱ⁾_i = 0 — the smoothing sits only
// on the removed diagonal, which is why the identity survives S > 0. Hence
//
//	e_i = q_i − f⁽⁻ⁱ⁾(p_i) = c_i / (M⁻¹)_ii,  (M⁻¹)_ii = (Z C⁻¹ Zᵀ)_ii.
//
// Both sides are properties of the fitted functions, so the normalised
// system gives the micrometre answer. With pair weights the reduced fit
// keeps each remaining pair's smoothing S·w̄/w_j, w̄ the mean over all N
// pairs: leaving a pair out does not renormalise the others.
//
// The second result is Result.LOOFactor, 1/(M⁻¹)_ii of the contract's
// micrometre system. Its top-left block of M⁻¹ is that of the normalised
// system divided by s in 3-D and by s² in 2-D (in 2-D the extra r² term of
// the kernel vanishes on the projection: Zᵀ R Z = 0 because Zᵀ1 = 0 and
// ZᵀU = 0).
//
// A pair whose affine leverage is 1 alone fixes a direction of the affine
// part (the others lie on a line or a plane); its (M⁻¹)_ii is 0 and its
// leave-one-out error undefined, which is an error.
func (sys *splineSystem) leaveOneOut(w []Vec) (loo []Vec, factor []float64, err error) {
	if err := sys.checkLeverage(); err != nil {
		return nil, nil, err
	}
	return sys.looFromDiagonal(w)
}

// checkLeverage refuses a system in which a pair's affine leverage is 1,
// whose leave-one-out is then undefined.
func (sys *splineSystem) checkLeverage() error {
	for i, h := range sys.leverage() {
		if 1-h <= leverageTol {
			return fmt.Errorf("leave-one-out of pair %d is undefined: it alone fixes a direction of the spline's affine part (leverage %.12f); the other pairs lie on a %s", i, h, flatShape(sys.dim))
		}
	}
	return nil
}

// looFromDiagonal is leaveOneOut after the leverage check.
func (sys *splineSystem) looFromDiagonal(w []Vec) (loo []Vec, factor []float64, err error) {
	d, err := sys.inverseDiagonal()
	if err != nil {
		return nil, nil, err
	}
	unit := sys.scale // (M_µm⁻¹)_ii = (M_u⁻¹)_ii / unit
	if sys.dim == 2 {
		unit *= sys.scale
	}
	loo, factor = make([]Vec, len(w)), make([]float64, len(w))
	for i, di := range d {
		if !(di > 0) {
			return nil, nil, fmt.Errorf("leave-one-out of pair %d: the inverse of the spline system has diagonal %g, not positive; the system is too ill-conditioned", i, di)
		}
		loo[i] = w[i].Scale(1 / di)
		factor[i] = unit / di
	}
	return loo, factor, nil
}

// parallelRows runs work over [0, n) on all cores for work of O(n) or more
// per index.
func parallelRows(n int, work func(lo, hi int)) { parallel.Ranges(n, 64, work) }
