package transform

import (
	"errors"
	"math"

	"ferry/internal/parallel"
)

// SubsetPath answers, for subsets of one set of pairs (the set with some
// pairs deleted) and any smoothing, what SmoothingPath of the subset would
// answer for the leave-one-out errors, to within the estimate of its
// rounding it returns with them, from one reduction of the whole set: the
// sequential deletion of a check asks that of sets that differ by a pair or
// a few, at smoothings of their own.
//
// The whole set's bordered matrix M (the comment on splineSystem) is
// reduced once: C = ZᵀKZ to tridiagonal form (ProjectedSym), with
// M̃ = Z·Q_T. For a smoothing λ (normalised) the top-left block of M⁻¹ is
// G = M̃(T + λI)⁻¹M̃ᵀ and the kernel weights are c = G·q. Deleting the
// pairs D from the system is the Schur complement on D of the bordered
// inverse (the identity behind Rippa's leave-one-out, applied to several
// pairs at once; Golub and Van Loan 2013, §3.2.9 on bordered systems, cited
// from memory): the subset's inverse block and weights are
//
//	G' = G_RR − G_RD G_DD⁻¹ G_DR,  c' = c_R − G_RD G_DD⁻¹ c_D,
//
// so each smoothing costs O(N·n·(|D| + d)) instead of a factorisation of
// its own. Only pair sets with equal weights are served (the smoothing is
// then a shift of C).
type SubsetPath struct {
	dim, N int
	scale  float64
	src    []Vec
	dst    []Vec
	ps     *ProjectedSym
	t      [][]float64 // the contrasts of the centred targets, one per axis
	// closest is the smallest distance (µm) between two sources.
	closest float64
	opt     Options
}

// NewSubsetPath reduces the spline system of src → dst for the subsets'
// leave-one-out. Pair weights, if any, must be equal.
func NewSubsetPath(dim int, src, dst []Vec, opt Options) (*SubsetPath, error) {
	opt.Smoothing = 0
	if err := checkPairs(dim, src, dst, opt); err != nil {
		return nil, err
	}
	for _, w := range opt.Weights {
		if w != opt.Weights[0] {
			return nil, errors.New("subset path: the pair weights differ")
		}
	}
	N, m := len(src), dim+1
	if N <= m+1 {
		return nil, errors.New("subset path: too few pairs")
	}
	centre, scale, err := splineNormalisation(dim, src)
	if err != nil {
		return nil, err
	}
	sys := &splineSystem{dim: dim, m: m, centre: centre, scale: scale}
	sys.nodes = make([]Vec, N)
	for i, p := range src {
		sys.nodes[i] = p.Sub(centre).Scale(1 / scale)
	}
	a := sys.kernelMatrix()
	cols := sys.affineColumns()
	ps, err := newProjectedSymBy(cols, a, tridiagonalise)
	if err != nil {
		return nil, err
	}
	ps.once.Do(ps.formBasis)
	p := &SubsetPath{dim: dim, N: N, scale: scale, src: src, dst: dst, ps: ps, closest: sys.closeDist * scale, opt: opt}
	var qmean Vec
	for _, q := range dst {
		qmean = qmean.Add(q)
	}
	qmean = qmean.Scale(1 / float64(N))
	y := make([]float64, N)
	for k := range dim {
		for i, q := range dst {
			y[i] = q[k] - qmean[k]
		}
		p.t = append(p.t, ps.Contrasts(y))
	}
	return p, nil
}

// SubsetLOO is the leave-one-out of one subset at one smoothing.
type SubsetLOO struct {
	// LOO and Factor are Result.LOO and Result.LOOFactor of the subset's
	// fit, pair by pair in the subset's order.
	LOO    []Vec
	Factor []float64
	// RelErr bounds, with a wide margin, the relative difference of each
	// LOO error and factor from what a factorisation of the subset's own
	// system gives; Sure is false when the path cannot vouch that the
	// subset's own system is well enough conditioned to be solved (the
	// caller then asks SmoothingPath), and LOO and Factor are then nil.
	RelErr float64
	Sure   bool
}

// subsetErrMargin multiplies the first-order rounding estimate
// n·ε·κ·amplification of SubsetPath's answers: the rounding of the
// reduction and of the subset's own Cholesky factorisation stays orders of
// magnitude below n·ε·(κ + subsetErrFloor) (Higham 2002, Accuracy and Stability of Numerical
// Algorithms, §10.1 and §8.1 bound it by low powers of n times ε·κ), and the
// margin makes a comparison decided by the estimate one that the exact
// answers decide the same way.
const subsetErrMargin = 1e3

// subsetErrFloor is the part of the rounding that does not grow with the
// condition: forming M̃ and the downdate cost about a hundred n·ε even on a
// well-conditioned system (measured: TestSubsetPathMatchesSmoothingPath),
// so the estimate never falls below a thousand of them.
const subsetErrFloor = 1e3

// LeaveOneOut returns the leave-one-out of the subset keep (nil: every
// pair) at each smoothing (µm in 3-D, µm² in 2-D, as Options.Smoothing).
// Rows are computed in fixed blocks whatever the number of cores.
func (p *SubsetPath) LeaveOneOut(keep []bool, smoothings []float64) []SubsetLOO {
	N, n, dim := p.N, p.ps.n, p.dim
	var del, kept []int
	for i := range N {
		if keep == nil || keep[i] {
			kept = append(kept, i)
		} else {
			del = append(del, i)
		}
	}
	k := len(del)
	out := make([]SubsetLOO, len(smoothings))
	basis := p.ps.basis
	eig := p.ps.eig
	// The subset's own normalisation has a scale of its own; the systems
	// agree up to that factor, which the conversion of S absorbs.
	unit := p.scale
	if dim == 2 {
		unit *= p.scale
	}
	nSub := len(kept) - (dim + 1)
	for j, s := range smoothings {
		if !(s >= 0) || math.IsInf(s, 0) {
			continue
		}
		lambda := s / unit
		lo, hi := eig[0]+lambda, eig[len(eig)-1]+lambda
		// The subset's C is a compression of the whole set's, so its
		// eigenvalues lie in [lo, hi] (Cauchy interlacing). gonum's
		// condition estimate is at most the 1-norm condition, at most
		// n times the 2-norm one.
		if !(lo > 0) {
			continue
		}
		kappa := hi / lo
		if float64(n)*kappa > splineCondLimit/1e3 {
			continue
		}
		if s == 0 && !(p.closest/p.scale > 2*splineDuplicateTol) {
			continue
		}
		l, d, ok := p.ps.factor(lambda)
		if !ok {
			continue
		}
		solve := func(x []float64) {
			for i := 1; i < n; i++ {
				x[i] -= l[i-1] * x[i-1]
			}
			for i := range n {
				x[i] /= d[i]
			}
			for i := n - 2; i >= 0; i-- {
				x[i] -= l[i] * x[i+1]
			}
		}
		// Right-hand sides: the targets' contrasts and the rows of M̃ of
		// the deleted pairs.
		rhs := make([][]float64, dim+k)
		for a := range dim {
			rhs[a] = append([]float64(nil), p.t[a]...)
		}
		for q, i := range del {
			rhs[dim+q] = append([]float64(nil), basis[i*n:(i+1)*n]...)
		}
		for _, x := range rhs {
			solve(x)
		}
		// For every pair: the diagonal of G, c, and G's columns of D.
		gii := make([]float64, N)
		prod := make([]float64, N*(dim+k))
		const block = 32
		nb := (N + block - 1) / block
		parallel.Ranges(nb, 1, func(b0, b1 int) {
			for r := b0 * block; r < min(b1*block, N); r++ {
				row := basis[r*n : (r+1)*n]
				diag, z := 0.0, 0.0
				for jj, mj := range row {
					if jj == 0 {
						z = mj
					} else {
						z = mj - l[jj-1]*z
					}
					diag += z * z / d[jj]
				}
				gii[r] = diag
				for c, x := range rhs {
					dot := 0.0
					for jj, mj := range row {
						dot += mj * x[jj]
					}
					prod[r*(dim+k)+c] = dot
				}
			}
		})
		w := dim + k
		// G_DD and its Cholesky factor (k×k, small).
		var chol []float64
		if k > 0 {
			chol = make([]float64, k*k)
			for a := range k {
				for b := range k {
					chol[a*k+b] = prod[del[a]*w+dim+b]
				}
			}
			if !choleskyInPlace(chol, k) {
				continue
			}
		}
		// cD = G_DD⁻¹ c_D per axis.
		cD := make([][]float64, dim)
		for a := range dim {
			v := make([]float64, k)
			for q, i := range del {
				v[q] = prod[i*w+a]
			}
			cholSolve(chol, k, v)
			cD[a] = v
		}
		res := SubsetLOO{LOO: make([]Vec, len(kept)), Factor: make([]float64, len(kept)), Sure: true}
		amp := 1.0
		z := make([]float64, k)
		for q, r := range kept {
			g := gii[r]
			var c Vec
			for a := range dim {
				c[a] = prod[r*w+a]
			}
			if k > 0 {
				row := prod[r*w+dim : r*w+w]
				copy(z, row)
				cholSolve(chol, k, z)
				down := 0.0
				for b := range k {
					down += row[b] * z[b]
				}
				g -= down
				for a := range dim {
					for b := range k {
						c[a] -= row[b] * cD[a][b]
					}
				}
			}
			if !(g > 0) {
				res.Sure = false
				break
			}
			amp = math.Max(amp, gii[r]/g)
			res.LOO[q] = c.Scale(1 / g)
			res.Factor[q] = unit / g
		}
		if !res.Sure {
			continue
		}
		res.RelErr = subsetErrMargin * float64(max(n, nSub)) * dblEpsilon * (kappa*amp + subsetErrFloor)
		out[j] = res
	}
	return out
}

// dblEpsilon is the float64 unit round-off.
const dblEpsilon = 1.0 / (1 << 52)

// choleskyInPlace overwrites the symmetric positive definite k×k a (both
// triangles) with its lower Cholesky factor, false when a pivot is not
// positive.
func choleskyInPlace(a []float64, k int) bool {
	for j := range k {
		s := a[j*k+j]
		for l := range j {
			s -= a[j*k+l] * a[j*k+l]
		}
		if !(s > 0) {
			return false
		}
		a[j*k+j] = math.Sqrt(s)
		for i := j + 1; i < k; i++ {
			t := a[i*k+j]
			for l := range j {
				t -= a[i*k+l] * a[j*k+l]
			}
			a[i*k+j] = t / a[j*k+j]
		}
	}
	return true
}

// cholSolve overwrites v with (LLᵀ)⁻¹v for L from choleskyInPlace.
func cholSolve(lf []float64, k int, v []float64) {
	for i := range k {
		s := v[i]
		for l := range i {
			s -= lf[i*k+l] * v[l]
		}
		v[i] = s / lf[i*k+i]
	}
	for i := k - 1; i >= 0; i-- {
		s := v[i]
		for l := i + 1; l < k; l++ {
			s -= lf[l*k+i] * v[l]
		}
		v[i] = s / lf[i*k+i]
	}
}
