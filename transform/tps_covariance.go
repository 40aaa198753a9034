package transform

import (
	"errors"
	"fmt"
	"math"

	"ferry/internal/parallel"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/mat"
)

// CrossPredictor is a Predictor that also gives the covariance between the
// errors of the fitted map at two source points, in the same units as
// Factor: the covariance (µm²) of the errors of the predicted target
// positions at x and at z is diag(√s)·CrossFactor(x, z)·diag(√s) for the
// model's per-axis scale s, and CrossFactor(x, x) = Factor(x).
//
// Under the model behind the factors (a Gaussian process for the spline,
// the linearised least-squares fit for the linear models) the posterior
// covariance after one more landmark at z, whose target error has variance
// ν·s, is
//
//	F′(x) = F(x) − C(x, z)·(F(z) + ν·I)⁻¹·C(z, x),  C = CrossFactor,
//
// and it does not depend on where that landmark's target turns out to be:
// the gain of a landmark can be known before it is picked.
type CrossPredictor interface {
	Predictor
	CrossFactor(x, z Vec) Mat
}

// ScalarCrossPredictor is a CrossPredictor whose factors are all multiples
// of the identity on the transform's axes: the thin-plate spline's, a
// translation's and an affine map's. Its batch methods serve searches over
// many pairs of points.
type ScalarCrossPredictor interface {
	CrossPredictor
	// VarianceAll sets dst[i] to the multiple v with Factor(xs[i]) = v·I.
	VarianceAll(xs []Vec, dst []float64)
	// CrossAll sets dst[i·len(zs)+j] to the multiple c with
	// CrossFactor(xs[i], zs[j]) = c·I. dst must hold len(xs)·len(zs)
	// numbers.
	CrossAll(xs, zs []Vec, dst []float64)
}

// NewCrossPredictor returns the exact posterior covariance of t's
// predictions, built from the source landmarks and weights t was fitted
// with, as for NewPredictor. Unlike NewPredictor it never takes the
// neighbourhood approximation of a large spline, whose variances at two
// points come from different neighbourhoods and have no covariance between
// them: a spline of N landmarks costs O(N³) to build and O(N²) a point.
func NewCrossPredictor(t Transform, src []Vec, weights []float64) (CrossPredictor, error) {
	switch t := t.(type) {
	case nil:
		return nil, errors.New("no transform to predict with")
	case *Linear:
		lp, err := newLinearPredictor(t, src, weights)
		if err != nil {
			return nil, err
		}
		return lp, nil
	case *Spline:
		if src != nil && len(src) != len(t.Nodes) {
			return nil, fmt.Errorf("predictor given %d source points for a spline of %d nodes", len(src), len(t.Nodes))
		}
		sp, err := newExactSplinePredictor(t, t.Nodes, t.PairWeights)
		if err != nil {
			return nil, err
		}
		return sp, nil
	case *Chain:
		return nil, errors.New("no covariance for a chain of fitted transforms; build one for each step")
	}
	return nil, fmt.Errorf("no covariance for a %s transform", t.Kind())
}

// AsScalar returns p as a ScalarCrossPredictor when its factors are
// multiples of the identity: always for a spline, for a translation and an
// affine map, and never for a rigid motion or a similarity, whose rotation
// couples the axes.
func AsScalar(p CrossPredictor) (ScalarCrossPredictor, bool) {
	switch p := p.(type) {
	case *LinearPredictor:
		if p.model == Translation || p.model == Affine {
			return scalarLinear{p}, true
		}
		return nil, false
	case ScalarCrossPredictor:
		return p, true
	}
	return nil, false
}

var (
	_ ScalarCrossPredictor = (*splinePredictor)(nil)
	_ BatchPredictor       = (*splinePredictor)(nil)
)

// The spline's posterior covariance is the kriging covariance of the
// Gaussian process whose generalised covariance is the kernel (see
// splinePredictor; Matheron 1973, Adv. Appl. Probab. 5:439–468): for unit
// scale,
//
//	C(x, z) = φ(|x − z|) − v_xᵀ M⁻¹ v_z,  v = [k(·); p(·)],
//
// which at x = z is the variance σ²(x) of tps_predict.go. With the factors
// of splineSystem and, per point, t = Qᵀk, α = R⁻ᵀp, y = t₂ − B₂₁α and
// g = U⁻ᵀy, the block solve of M [c; a] = v_z (see solve) gives
//
//	v_xᵀ M⁻¹ v_z = g_x·g_z + t₁ₓ·α_z + α_x·t₁_z − α_xᵀ B₁₁ α_z,
//
// the polarisation of the variance formula there. So each point gets a
// left row l = [g; t₁; α] and a right row r = [g; α; t₁ − B₁₁α] of length
// n + 2m, v_xᵀM⁻¹v_z = l_x·r_z, and the covariances between many points are
// one matrix product, plus the kernel between them.
//
// Units: everything is computed in the normalised system and multiplied by
// κ (s in 3-D, s² in 2-D), as for σ². In 2-D the kernel in micrometres has
// an extra s² log s·|x − z|² term; the error at a point is a combination of
// point values that annihilates linear polynomials, and the covariance of
// two such combinations does not see a quadratic of the form
// |x|² + |z|² − 2x·z, so the term drops out of C exactly as it does of σ².

// crossRows returns the left and right rows (each len(xs)×(n+2m),
// row-major) of the points and their normalised positions. Either row set
// may be skipped.
func (p *splinePredictor) crossRows(xs []Vec, wantLeft, wantRight bool) (left, right []float64, us []Vec) {
	sys := p.sys
	m, n := sys.m, p.n
	width := n + 2*m
	if wantLeft {
		left = make([]float64, len(xs)*width)
	}
	if wantRight {
		right = make([]float64, len(xs)*width)
	}
	us = make([]Vec, len(xs))
	const block = 256
	ut := blas64.Triangular{Uplo: blas.Upper, Diag: blas.NonUnit, N: n, Stride: n, Data: p.u}
	b12 := sys.b12.RawMatrix()
	type scratch struct{ k, y, alpha, t1 []float64 }
	newScratch := func() *scratch {
		return &scratch{
			k:     make([]float64, len(sys.nodes)),
			y:     make([]float64, n*block),
			alpha: make([]float64, m*block),
			t1:    make([]float64, m*block),
		}
	}
	parallel.Blocks(len(xs), block, newScratch, func(s *scratch, lo, hi int) {
		k, y, alpha, t1 := s.k, s.y, s.alpha, s.t1
		B := hi - lo
		for i := range B {
			u := xs[lo+i].Sub(sys.centre).Scale(1 / sys.scale)
			us[lo+i] = u
			al := alpha[i*m : (i+1)*m]
			sys.projectPoint(u, k, al)
			copy(t1[i*m:(i+1)*m], k[:m])
			for j := range n {
				v := k[m+j]
				for r := range m {
					v -= b12.Data[r*b12.Stride+j] * al[r]
				}
				y[j*B+i] = v
			}
		}
		// g = U⁻ᵀ y for the whole block: Uᵀ G = Y.
		blas64.Trsm(blas.Left, blas.Trans, 1, ut, blas64.General{Rows: n, Cols: B, Stride: B, Data: y[:n*B]})
		for i := range B {
			al, tt := alpha[i*m:(i+1)*m], t1[i*m:(i+1)*m]
			if left != nil {
				row := left[(lo+i)*width : (lo+i+1)*width]
				for j := range n {
					row[j] = y[j*B+i]
				}
				copy(row[n:n+m], tt)
				copy(row[n+m:], al)
			}
			if right != nil {
				row := right[(lo+i)*width : (lo+i+1)*width]
				for j := range n {
					row[j] = y[j*B+i]
				}
				copy(row[n:n+m], al)
				for r := range m {
					v := tt[r]
					for l := range m {
						v -= sys.b11[r][l] * al[l]
					}
					row[n+m+r] = v
				}
			}
		}
	})
	return left, right, us
}

// CrossAll sets dst[i·len(zs)+j] to the spline's posterior covariance
// between the errors at xs[i] and zs[j] (unit scale, µm units of the
// kernel), on all cores: one matrix product of the points' rows.
func (p *splinePredictor) CrossAll(xs, zs []Vec, dst []float64) {
	if len(dst) != len(xs)*len(zs) {
		panic("transform: CrossAll with dst of the wrong length")
	}
	if len(xs) == 0 || len(zs) == 0 {
		return
	}
	left, _, ux := p.crossRows(xs, true, false)
	_, right, uz := p.crossRows(zs, false, true)
	width := p.n + 2*p.sys.m
	out := mat.NewDense(len(xs), len(zs), dst)
	out.Mul(mat.NewDense(len(xs), width, left), mat.NewDense(len(zs), width, right).T())
	kappa := p.kappa
	parallelRows(len(xs), func(lo, hi int) {
		for i := lo; i < hi; i++ {
			row := dst[i*len(zs) : (i+1)*len(zs)]
			row = row[:len(uz)]
			u := ux[i]
			if p.sys.dim == 3 {
				// φ(ρ) = −ρ, written out: this loop runs over every pair.
				for j := range row {
					dx, dy, dz := u[0]-uz[j][0], u[1]-uz[j][1], u[2]-uz[j][2]
					row[j] = -kappa * (math.Sqrt(dx*dx+dy*dy+dz*dz) + row[j])
				}
				continue
			}
			for j := range row {
				dx, dy := u[0]-uz[j][0], u[1]-uz[j][1]
				row[j] = kappa * (p.sys.kernel(dx*dx+dy*dy) - row[j])
			}
		}
	})
}

// CrossFactor is C(x, z)·I on the spline's axes (see CrossPredictor).
func (p *splinePredictor) CrossFactor(x, z Vec) Mat {
	var c [1]float64
	p.CrossAll([]Vec{x}, []Vec{z}, c[:])
	var f Mat
	for k := range p.sys.dim {
		f[k][k] = c[0]
	}
	return f
}

// VarianceAll sets dst[i] to σ²(xs[i]), the multiple of Factor.
func (p *splinePredictor) VarianceAll(xs []Vec, dst []float64) {
	if len(dst) != len(xs) {
		panic("transform: VarianceAll with dst of the wrong length")
	}
	f := make([]Mat, len(xs))
	p.FactorAll(xs, f)
	for i := range f {
		dst[i] = f[i][0][0]
	}
}
