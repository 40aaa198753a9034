package transform

import (
	"errors"
	"fmt"

	"ferry/internal/parallel"

	"gonum.org/v1/gonum/blas/gonum"
	"gonum.org/v1/gonum/mat"
)

// splinePredictor is the posterior variance of a thin-plate spline read as
// the kriging predictor of a Gaussian process whose generalised covariance
// is the spline's kernel (Matheron 1973, Adv. Appl. Probab. 5:439–468; the
// smoothing spline's Bayesian reading, Wahba 1983, J. R. Stat. Soc. B
// 45:133–150). For unit scale, the variance of the fitted map at x as an
// estimate of the true map is
//
//	σ²(x) = φ(0) − vᵀ M⁻¹ v,  v = [k(x); p(x)],  φ(0) = 0,
//
// with M the bordered system of the fit (smoothing included) and k, p the
// kernel and polynomial vectors at x, all in the contract's micrometre
// units. In the normalised units of splineSystem the kernel, the smoothing
// and hence σ² are all κ times smaller (κ = scale in 3-D, scale² in 2-D,
// where the r² part of φ(r/s) is annihilated by the side conditions), so
// σ² is computed there and multiplied by κ.
//
// With the factors of splineSystem (P = Q[R; 0], C = Uᵀ U the projected
// kernel, B = Qᵀ(K+S·D)Q in blocks), writing t = Qᵀk, α = R⁻ᵀp and
// y = t₂ − B₂₁α,
//
//	vᵀM⁻¹v = 2 t₁·α − αᵀB₁₁α + |U⁻ᵀ y|²,
//
// so each point costs its kernel vector, m reflections, and one triangular
// solve of the projected size n = N − m: exact, O(N²) a point, with no
// approximation. FactorAll solves blocks of points together so the solve
// runs as row updates over the block.
type splinePredictor struct {
	sys   *splineSystem
	kappa float64
	// u is the upper Cholesky factor of C, row-major n×n.
	u []float64
	n int
}

// newSplinePredictor builds the predictor of s. src and weights must be
// the spline's own nodes and pair weights (the fit records them); they are
// checked for length only. Up to localNodes nodes it is exact; beyond, it
// is the neighbourhood predictor of localPredictor.
func newSplinePredictor(s *Spline, src []Vec, weights []float64) (Predictor, error) {
	if err := s.Validate(); err != nil {
		return nil, err
	}
	if src != nil && len(src) != len(s.Nodes) {
		return nil, fmt.Errorf("predictor given %d source points for a spline of %d nodes", len(src), len(s.Nodes))
	}
	if len(s.Nodes) > localNodes {
		return newLocalPredictor(s)
	}
	return newExactSplinePredictor(s, s.Nodes, s.PairWeights)
}

// newExactSplinePredictor is the exact predictor of the spline of s's
// normalisation and smoothing on the given nodes and pair weights (all of
// s's, or a neighbourhood of them).
func newExactSplinePredictor(s *Spline, nodes []Vec, pairWeights []float64) (*splinePredictor, error) {
	sys, err := newSplineSystem(s.Dimension, s.Centre, s.Scale, nodes, s.Smoothing, pairWeights)
	if err != nil {
		return nil, err
	}
	p := &splinePredictor{sys: sys, n: len(sys.nodes) - sys.m}
	p.kappa = s.Scale
	if s.Dimension == 2 {
		p.kappa = s.Scale * s.Scale
	}
	if p.n == 0 {
		return nil, errors.New("thin-plate spline has no kernel freedom: its posterior variance is that of its affine part; fit an affine model instead")
	}
	raw := sys.chol.RawU().(mat.RawTriangular).RawTriangular()
	p.u = make([]float64, p.n*p.n)
	for i := range p.n {
		copy(p.u[i*p.n+i:(i+1)*p.n], raw.Data[i*raw.Stride+i:i*raw.Stride+p.n])
	}
	return p, nil
}

// Factor is σ²(x)·I, with zeros outside the spline's dimension.
func (p *splinePredictor) Factor(x Vec) Mat {
	var out [1]Mat
	p.factorBlock([]Vec{x}, out[:], newPredictScratch(p, 1))
	return out[0]
}

// FactorAll sets dst[i] = Factor(xs[i]) for every point, on all cores.
func (p *splinePredictor) FactorAll(xs []Vec, dst []Mat) {
	const block = 128
	parallel.Blocks(len(xs), block, func() *predictScratch { return newPredictScratch(p, block) }, func(s *predictScratch, lo, hi int) {
		p.factorBlock(xs[lo:hi], dst[lo:hi], s)
	})
}

// predictScratch is one worker's memory for a block of points.
type predictScratch struct {
	k     []float64 // N, one point's kernel vector
	alpha [][]float64
	t1    [][]float64
	y     []float64 // n×B, row-major: row j holds y_j of every point
}

func newPredictScratch(p *splinePredictor, block int) *predictScratch {
	N, m := len(p.sys.nodes), p.sys.m
	s := &predictScratch{k: make([]float64, N), y: make([]float64, p.n*block)}
	s.alpha = make([][]float64, block)
	s.t1 = make([][]float64, block)
	for b := range block {
		s.alpha[b] = make([]float64, m)
		s.t1[b] = make([]float64, m)
	}
	return s
}

func (p *splinePredictor) factorBlock(xs []Vec, dst []Mat, s *predictScratch) {
	sys := p.sys
	N, m, n, B := len(sys.nodes), sys.m, p.n, len(xs)
	for b, x := range xs {
		u := x.Sub(sys.centre).Scale(1 / sys.scale)
		// α = R⁻ᵀ p with p = [1, u].
		pv := s.alpha[b]
		sys.projectPoint(u, s.k, pv)
		copy(s.t1[b], s.k[:m])
		// y = t₂ − B₂₁ α, stored column b of the block.
		b12 := sys.b12.RawMatrix()
		for j := range n {
			v := s.k[m+j]
			for i := range m {
				v -= b12.Data[i*b12.Stride+j] * pv[i]
			}
			s.y[j*B+b] = v
		}
	}
	_ = N
	// z = U⁻ᵀ y for all points at once: column-oriented forward
	// substitution, each step a row update over the block.
	y := s.y[:n*B]
	for l := range n {
		row := y[l*B : (l+1)*B]
		inv := 1 / p.u[l*n+l]
		for b := range row {
			row[b] *= inv
		}
		ul := p.u[l*n+l+1 : (l+1)*n]
		for off, c := range ul {
			if c != 0 {
				// The assembly kernel behind Daxpy is several times
				// faster than a Go loop here, where all the time goes.
				gonum.Implementation{}.Daxpy(B, -c, row, 1, y[(l+1+off)*B:(l+2+off)*B], 1)
			}
		}
	}
	for b := range xs {
		q := 0.0
		for j := range n {
			z := y[j*B+b]
			q += z * z
		}
		al, t1 := s.alpha[b], s.t1[b]
		for i := range m {
			q += 2 * t1[i] * al[i]
			for l := range m {
				q -= al[i] * sys.b11[i][l] * al[l]
			}
		}
		v := -q * p.kappa
		if v < 0 {
			// Rounding at a node of an interpolating spline.
			v = 0
		}
		var f Mat
		for k := range sys.dim {
			f[k][k] = v
		}
		dst[b] = f
	}
}
