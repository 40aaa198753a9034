package transform

import (
	"errors"
	"math"

	"ferry/internal/parallel"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/mat"
)

// SmoothingPath answers, for many smoothings S of one set of pairs, what a
// spline fit with exact leave-one-out at each S would give for the
// leave-one-out errors, without repeating the work the fits share. The
// spline system of the comment on splineSystem is, after the projection,
//
//	Qᵀ(K + S·D)Q = QᵀKQ + S·QᵀDQ,
//
// so the kernel matrix, the affine QR and both projections are formed once
// and each S costs only the Cholesky factorisation of its projected block,
// the solve and the diagonal of the inverse (leaveOneOut), the cubic parts
// that depend on S. The answers are those of Fit with LeaveOneOut at each S
// up to rounding: the same factorisations of the same matrices, summed in a
// different order. Smoothings are evaluated concurrently
// (SmoothingPathWorkers at a time), each on its own, so the results do not
// depend on the number of cores.
type SmoothingPath struct {
	base   *splineSystem // nodes, reflectors, R; smoothing and chol unset
	n      int           // N − m
	kernel []float64     // the projected kernel block ZᵀKZ, n×n row-major
	// penalty is ZᵀDZ (n×n) for pair weights; nil when D is the identity
	// (no weights, or all equal).
	penalty []float64
	rhs     *mat.Dense // Zᵀ(q − q̄), n×dim
	err     error      // an error every smoothing shares (leverage 1)
	opt     Options
	// Each, when set, is called after each smoothing is done, from the
	// goroutine that did it: a progress count.
	Each func()
}

// SmoothingPathWorkers is the most smoothings SmoothingPath.LeaveOneOut
// evaluates at once. Each holds three (N−m)×(N−m) matrices while it runs
// (its projected block, the block's factor, the inverse factor reflected),
// so the number is fixed, not the machine's core count, for the memory a
// job needs to be known before it starts; the factorisations themselves
// run on all cores.
const SmoothingPathWorkers = 2

// NewSmoothingPath prepares the leave-one-out of a spline fitted to src →
// dst with opt's pair weights at any smoothing. It refuses what Fit with
// LeaveOneOut refuses whatever the smoothing.
func NewSmoothingPath(dim int, src, dst []Vec, opt Options) (*SmoothingPath, error) {
	opt.Smoothing = 0
	sys, uniform, err := newPathBase(dim, src, dst, opt)
	if err != nil {
		return nil, err
	}
	N, m := len(src), dim+1
	// The kernel alone (S = 0 leaves the diagonal zero) and its projection.
	a := sys.kernelMatrix()
	sys.project(a)
	n := N - m
	p := &SmoothingPath{base: sys, n: n, opt: opt}
	p.kernel = make([]float64, n*n)
	for i := range n {
		copy(p.kernel[i*n:(i+1)*n], a[(m+i)*N+m:(m+i)*N+N])
	}
	if sys.penalty != nil && !uniform {
		d := make([]float64, N*N)
		for i, v := range sys.penalty {
			d[i*N+i] = v
		}
		sys.project(d)
		p.penalty = make([]float64, n*n)
		for i := range n {
			copy(p.penalty[i*n:(i+1)*n], d[(m+i)*N+m:(m+i)*N+N])
		}
	}
	var qmean Vec
	for _, q := range dst {
		qmean = qmean.Add(q)
	}
	qmean = qmean.Scale(1 / float64(N))
	f := mat.NewDense(N, dim, nil)
	for i, q := range dst {
		for k := range dim {
			f.Set(i, k, q[k]-qmean[k])
		}
	}
	sys.applyQT(f)
	p.rhs = mat.DenseCopyOf(f.Slice(m, N, 0, dim))
	// A pair of affine leverage 1 makes every smoothing's leave-one-out
	// undefined.
	p.err = sys.checkLeverage()
	return p, nil
}

// newPathBase is the part of NewSmoothingPath before the kernel: the
// checks, the normalisation, the penalty and the affine QR. uniform tells
// whether the penalty is the same for every pair.
func newPathBase(dim int, src, dst []Vec, opt Options) (sys *splineSystem, uniform bool, err error) {
	if err := checkPairs(dim, src, dst, opt); err != nil {
		return nil, false, err
	}
	if need := MinPairs(TPS, dim) + 1; len(src) < need {
		_, err := Fit(TPS, dim, src, dst, Options{LeaveOneOut: true})
		return nil, false, err
	}
	N, m := len(src), dim+1
	centre, scale, err := splineNormalisation(dim, src)
	if err != nil {
		return nil, false, err
	}
	sys = &splineSystem{dim: dim, m: m, centre: centre, scale: scale}
	sys.nodes = make([]Vec, N)
	for i, p := range src {
		sys.nodes[i] = p.Sub(centre).Scale(1 / scale)
	}
	uniform = true
	if opt.Weights != nil {
		mean := 0.0
		for _, w := range opt.Weights {
			mean += w
		}
		mean /= float64(N)
		sys.penalty = make([]float64, N)
		for i, w := range opt.Weights {
			sys.penalty[i] = mean / w
			uniform = uniform && sys.penalty[i] == sys.penalty[0]
		}
	}
	if err := sys.factorAffine(); err != nil {
		return nil, false, err
	}
	return sys, uniform, nil
}

// CheckSmoothingPath returns the error that NewSmoothingPath would return
// for these pairs, or else the error its LeaveOneOut would give at every
// smoothing (a pair that alone fixes a direction of the affine part), at
// O(N·m²): what SubsetPath cannot vouch for.
func CheckSmoothingPath(dim int, src, dst []Vec, opt Options) error {
	opt.Smoothing = 0
	sys, _, err := newPathBase(dim, src, dst, opt)
	if err != nil {
		return err
	}
	return sys.checkLeverage()
}

// LeaveOneOut returns, for each smoothing (µm in 3-D, µm² in 2-D, as
// Options.Smoothing), the exact leave-one-out errors of the spline fitted
// at that smoothing, or the error Fit would have returned for it. Each
// smoothing is evaluated on its own, two or more at a time on the cores
// there are; it stops early, with the context's error in every remaining
// slot, once opt's context is cancelled.
func (p *SmoothingPath) LeaveOneOut(smoothings []float64) ([][]Vec, []error) {
	loo := make([][]Vec, len(smoothings))
	errs := make([]error, len(smoothings))
	// Each worker reuses its matrix and its factor's storage from one
	// smoothing to the next: at 2,000 pairs each is 32 MB.
	type scratch struct {
		buf  []float64
		chol mat.Cholesky
	}
	newScratch := func() *scratch { return &scratch{buf: make([]float64, p.n*p.n)} }
	parallel.BlocksUpTo(len(smoothings), 1, SmoothingPathWorkers, newScratch, func(s *scratch, lo, hi int) {
		for i := lo; i < hi; i++ {
			if err := p.opt.cancelled(); err != nil {
				errs[i] = err
				continue
			}
			loo[i], errs[i] = p.at(smoothings[i], s.buf, &s.chol)
			if p.Each != nil {
				p.Each()
			}
		}
	})
	return loo, errs
}

// at is the leave-one-out of the fit at smoothing s, following
// newSplineSystem, solve and leaveOneOut step by step.
func (p *SmoothingPath) at(s float64, c []float64, chol *mat.Cholesky) ([]Vec, error) {
	if !(s >= 0) || math.IsInf(s, 0) {
		return nil, errors.New("smoothing: want a finite number ≥ 0")
	}
	if p.err != nil {
		return nil, p.err
	}
	base := p.base
	sys := &splineSystem{
		dim: base.dim, m: base.m, centre: base.centre, scale: base.scale, nodes: base.nodes,
		penalty: base.penalty, v: base.v, tau: base.tau, r: base.r,
		closeI: base.closeI, closeJ: base.closeJ, closeDist: base.closeDist,
	}
	if sys.dim == 3 {
		sys.smoothing = s / sys.scale
	} else {
		sys.smoothing = s / (sys.scale * sys.scale)
	}
	if s == 0 && sys.closeDist <= splineDuplicateTol {
		// newSplineSystem's message for the same case.
		_, err := newSplineSystem(sys.dim, sys.centre, sys.scale, p.nodesMicrometres(), 0, p.opt.Weights)
		if err == nil {
			err = errors.New("coincident source points: use smoothing > 0")
		}
		return nil, err
	}
	n, N, m := p.n, len(sys.nodes), sys.m
	copy(c, p.kernel)
	switch {
	case p.penalty != nil:
		for i, v := range p.penalty {
			c[i] += sys.smoothing * v
		}
	case sys.penalty != nil:
		d := sys.smoothing * sys.penalty[0]
		for i := range n {
			c[i*n+i] += d
		}
	default:
		for i := range n {
			c[i*n+i] += sys.smoothing
		}
	}
	var sym mat.SymDense
	sym.SetRawSymmetric(blas64.Symmetric{Uplo: blas.Upper, N: n, Stride: n, Data: c})
	ok := chol.Factorize(&sym)
	sys.chol = *chol
	if !ok {
		_, err := newSplineSystem(sys.dim, sys.centre, sys.scale, p.nodesMicrometres(), s, p.opt.Weights)
		if err == nil {
			err = errors.New("thin-plate spline system is singular; use smoothing > 0")
		}
		return nil, err
	}
	if cond := sys.chol.Cond(); cond > splineCondLimit {
		_, err := newSplineSystem(sys.dim, sys.centre, sys.scale, p.nodesMicrometres(), s, p.opt.Weights)
		if err == nil {
			err = errors.New("thin-plate spline system is too ill-conditioned to solve; use smoothing > 0")
		}
		return nil, err
	}
	dim := sys.dim
	gamma := mat.NewDense(n, dim, nil)
	_ = sys.chol.SolveTo(gamma, p.rhs)
	w := mat.NewDense(N, dim, nil)
	for i := range n {
		for k := range dim {
			w.Set(m+i, k, gamma.At(i, k))
		}
	}
	sys.applyQ(w)
	weights := make([]Vec, N)
	for i := range N {
		for k := range dim {
			weights[i][k] = w.At(i, k)
		}
	}
	loo, _, err := sys.looFromDiagonal(weights)
	return loo, err
}

// nodesMicrometres returns the nodes in µm, for rebuilding a system only to
// word its error the way newSplineSystem does.
func (p *SmoothingPath) nodesMicrometres() []Vec {
	out := make([]Vec, len(p.base.nodes))
	for i, u := range p.base.nodes {
		out[i] = u.Scale(p.base.scale).Add(p.base.centre)
	}
	return out
}
