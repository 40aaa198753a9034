package transform

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/mat"

	"ferry/internal/parallel"
)

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
// the closest pair of nodes. Rows are computed in blocks on all cores, each
// entry on its own, and the closest pair is the first in row order as one
// core finds it, so the matrix and the pair are the same whatever the
// number of cores.
func (sys *splineSystem) kernelMatrix() []float64 {
	N := len(sys.nodes)
	a := make([]float64, N*N)
	const block = 32
	nb := (N + block - 1) / block
	type nearest struct {
		r2     float64
		ci, cj int
	}
	near := make([]nearest, nb)
	parallel.Blocks(N, block, func() struct{} { return struct{}{} }, func(_ struct{}, lo, hi int) {
		best := nearest{r2: math.Inf(1)}
		for i := lo; i < hi; i++ {
			ui := sys.nodes[i]
			row := a[i*N : i*N+i]
			for j := range row {
				d := ui.Sub(sys.nodes[j])
				r2 := d.Dot(d)
				if r2 < best.r2 {
					best = nearest{r2, j, i}
				}
				row[j] = sys.kernel(r2)
			}
			d := 1.0
			if sys.penalty != nil {
				d = sys.penalty[i]
			}
			a[i*N+i] = sys.smoothing * d
		}
		near[lo/block] = best
	})
	// The upper triangle mirrors the lower, in blocks of rows.
	parallel.Blocks(N, block, func() struct{} { return struct{}{} }, func(_ struct{}, lo, hi int) {
		for j := lo; j < hi; j++ {
			for i := j + 1; i < N; i++ {
				a[j*N+i] = a[i*N+j]
			}
		}
	})
	closest, ci, cj := math.Inf(1), 0, 0
	for _, b := range near {
		if b.r2 < closest {
			closest, ci, cj = b.r2, b.ci, b.cj
		}
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
	N, dim := len(sys.nodes), sys.dim
	cols := sys.affineColumns()
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

// affineColumns are the columns of the affine part at the nodes: a column
// of ones, then each centred, scaled coordinate (m = dim + 1 columns of
// length N), the P that the spline's kernel is projected off.
func (sys *splineSystem) affineColumns() [][]float64 {
	cols := make([][]float64, sys.m)
	for k := range sys.m {
		cols[k] = make([]float64, len(sys.nodes))
		for i, u := range sys.nodes {
			if k == 0 {
				cols[k][i] = 1
			} else {
				cols[k][i] = u[k-1]
			}
		}
	}
	return cols
}

// projectPoint fills k with the kernel vector of the scaled point u
// reflected onto the contrasts (Qᵀk) and alpha with R⁻ᵀ[1, u], by forward
// substitution: the two pieces every prediction at u starts from.
func (sys *splineSystem) projectPoint(u Vec, k, alpha []float64) {
	sys.kernelVector(u, k)
	for r := range sys.m {
		applyReflector(k, sys.v[r], sys.tau[r], r)
	}
	alpha[0] = 1
	for l := range sys.dim {
		alpha[1+l] = u[l]
	}
	for r := range sys.m {
		v := alpha[r]
		for l := range r {
			v -= sys.r[l][r] * alpha[l]
		}
		alpha[r] = v / sys.r[r][r]
	}
}
