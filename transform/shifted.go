package transform

import (
	"errors"
	"math"
	"sync"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/lapack/gonum"

	"ferry/internal/parallel"
)

// ProjectedSym is a symmetric matrix K (N×N) projected on the contrasts
// that annihilate the columns of P (N×m), C = ZᵀKZ with Z an orthonormal
// basis of {w : Pᵀw = 0}, reduced once so that the systems C + λI can be
// solved for any shift λ in O(n) and O(N·n) operations (n = N − m). That
// is the shape of a restricted likelihood over a grid of noise levels
// (register's error model) and of a spline's smoothing.
//
// Z comes from the Householder QR of P (m reflectors, applied to K from
// both sides at O(m·N²)), and C = Q_T·T·Q_Tᵀ is its reduction to a
// symmetric tridiagonal T (LAPACK dsytrd, 4n³/3 flops; Golub and Van Loan,
// Matrix Computations, 4th ed. 2013, §8.3.1, cited from memory). For a
// shift, T + λI = L·D·Lᵀ with L unit lower bidiagonal costs O(n), and
//
//	tᵀ(C + λI)⁻¹t = Σ_j z_j²/D_j,  z = L⁻¹·(Q_Tᵀt),
//
// the eigenvalues of C (for log-determinants) come from T without vectors
// (dsterf, O(n²)), and the diagonal of Z(C + λI)⁻¹Zᵀ is, with M = Z·Q_T,
// Σ_j (L⁻¹M_r)_j²/D_j for row r: O(N·n) a shift once M is formed (dorgtr,
// 4n³/3 flops, on first use). A full eigendecomposition would cost about
// four times the reduction again in its vectors.
type ProjectedSym struct {
	N, m, n int
	v       [][]float64 // P's reflectors, as splineSystem keeps them
	tau     []float64
	red     []float64 // dsytrd's output (lower), n×n
	tauT    []float64
	diag    []float64 // T's diagonal
	off     []float64 // T's off-diagonal
	eig     []float64 // C's eigenvalues, ascending

	once  sync.Once
	basis []float64 // M = Z·Q_T, N×n row-major, formed on first use
}

// NewProjectedSym projects k (N×N row-major, symmetric; overwritten) on
// the contrasts of the columns p (m columns of length N, overwritten) and
// reduces it. It refuses columns of P that are dependent.
func NewProjectedSym(p [][]float64, k []float64) (*ProjectedSym, error) {
	return newProjectedSymBy(p, k, dsytrdLower)
}

// dsytrdLower reduces the symmetric n×n matrix a (lower triangle) to
// tridiagonal form with gonum's Dsytrd, on one core.
func dsytrdLower(n int, a []float64, lda int, d, e, tau []float64) {
	var impl gonum.Implementation
	work := make([]float64, 1)
	impl.Dsytrd(blas.Lower, n, a, lda, d, e, tau, work, -1)
	work = make([]float64, max(int(work[0]), 1))
	impl.Dsytrd(blas.Lower, n, a, lda, d, e, tau, work, len(work))
}

// newProjectedSymBy is NewProjectedSym with the tridiagonal reduction
// given: gonum's Dsytrd (dsytrdLower) or the reduction on every core
// (tridiagonalise), which sums the same quantities in another order.
func newProjectedSymBy(p [][]float64, k []float64, reduce func(n int, a []float64, lda int, d, e, tau []float64)) (*ProjectedSym, error) {
	m := len(p)
	if m == 0 {
		return nil, errors.New("projected matrix: no columns to project out")
	}
	N := len(p[0])
	if len(k) != N*N || N <= m {
		return nil, errors.New("projected matrix: sizes do not agree")
	}
	v, tau, r := householderColumns(p)
	for i := range m {
		if !(math.Abs(r[i][i]) > 1e-12*math.Abs(r[0][0])) {
			return nil, errors.New("projected matrix: the columns to project out are dependent")
		}
	}
	projectSym(k, N, v, tau)
	n := N - m
	s := &ProjectedSym{N: N, m: m, n: n, v: v, tau: tau}
	s.red = make([]float64, n*n)
	for i := range n {
		copy(s.red[i*n:(i+1)*n], k[(m+i)*N+m:(m+i)*N+N])
	}
	s.diag, s.off = make([]float64, n), make([]float64, max(n-1, 0))
	s.tauT = make([]float64, max(n-1, 1))
	reduce(n, s.red, n, s.diag, s.off, s.tauT)
	s.eig = append([]float64(nil), s.diag...)
	e := append([]float64(nil), s.off...)
	var impl gonum.Implementation
	if !impl.Dsterf(n, s.eig, e) {
		return nil, errors.New("projected matrix: the eigenvalues did not converge")
	}
	return s, nil
}

// Size is n = N − m, the number of contrasts.
func (s *ProjectedSym) Size() int { return s.n }

// Eigenvalues returns C's eigenvalues in ascending order (shared; do not
// modify).
func (s *ProjectedSym) Eigenvalues() []float64 { return s.eig }

// Contrasts returns Q_TᵀZᵀy, y's coordinates in the basis M = Z·Q_T in
// which C is tridiagonal: the t of QuadForm and LeaveOneOut.
func (s *ProjectedSym) Contrasts(y []float64) []float64 {
	x := append([]float64(nil), y...)
	for k := range s.m {
		applyReflector(x, s.v[k], s.tau[k], k)
	}
	t := append([]float64(nil), x[s.m:]...)
	// Q_T = H_0·H_1·…·H_{n−2} (dsytrd, lower): Q_Tᵀt applies H_0 first.
	// H_i = I − τ_i·u·uᵀ with u_{i+1} = 1 and u_r = red[r][i] below.
	n := s.n
	for i := 0; i < n-1; i++ {
		tau := s.tauT[i]
		if tau == 0 {
			continue
		}
		d := t[i+1]
		for r := i + 2; r < n; r++ {
			d += s.red[r*n+i] * t[r]
		}
		d *= tau
		t[i+1] -= d
		for r := i + 2; r < n; r++ {
			t[r] -= d * s.red[r*n+i]
		}
	}
	return t
}

// factor returns the LDLᵀ factorisation of T + λI: L's subdiagonal l and
// D, or false when a pivot is not positive (λ at or below −λ_min(C)).
func (s *ProjectedSym) factor(lambda float64) (l, d []float64, ok bool) {
	n := s.n
	l, d = make([]float64, max(n-1, 0)), make([]float64, n)
	d[0] = s.diag[0] + lambda
	for j := 0; j < n-1; j++ {
		if !(d[j] > 0) {
			return nil, nil, false
		}
		l[j] = s.off[j] / d[j]
		d[j+1] = s.diag[j+1] + lambda - l[j]*s.off[j]
	}
	return l, d, d[n-1] > 0
}

// QuadForm returns tᵀ(T + λI)⁻¹t for t from Contrasts, which is
// yᵀZ(C + λI)⁻¹Zᵀy; NaN when C + λI is not positive definite.
func (s *ProjectedSym) QuadForm(t []float64, lambda float64) float64 {
	l, d, ok := s.factor(lambda)
	if !ok {
		return math.NaN()
	}
	q, z := 0.0, 0.0
	for j := range s.n {
		if j == 0 {
			z = t[0]
		} else {
			z = t[j] - l[j-1]*z
		}
		q += z * z / d[j]
	}
	return q
}

// LeaveOneOut returns, for G = Z(C + λI)⁻¹Zᵀ, its diagonal and G·y for t =
// Contrasts(y): the two ingredients of every point's leave-one-out
// prediction (Dubrule 1983, Math. Geol. 15:687–699). Rows are computed in
// fixed blocks whatever the number of cores.
func (s *ProjectedSym) LeaveOneOut(t []float64, lambda float64) (gii, gy []float64, err error) {
	l, d, ok := s.factor(lambda)
	if !ok {
		return nil, nil, errors.New("projected matrix: not positive definite at this shift")
	}
	s.once.Do(s.formBasis)
	n, N := s.n, s.N
	// x = (T + λI)⁻¹t: forward through L, scale by D, back through Lᵀ.
	x := make([]float64, n)
	for j := range n {
		x[j] = t[j]
		if j > 0 {
			x[j] -= l[j-1] * x[j-1]
		}
	}
	for j := range n {
		x[j] /= d[j]
	}
	for j := n - 2; j >= 0; j-- {
		x[j] -= l[j] * x[j+1]
	}
	gii, gy = make([]float64, N), make([]float64, N)
	parallel.Ranges(N, 32, func(lo, hi int) {
		for r := lo; r < hi; r++ {
			row := s.basis[r*n : (r+1)*n]
			diag, dot, z := 0.0, 0.0, 0.0
			for j, mj := range row {
				if j == 0 {
					z = mj
				} else {
					z = mj - l[j-1]*z
				}
				diag += z * z / d[j]
				dot += mj * x[j]
			}
			gii[r], gy[r] = diag, dot
		}
	})
	return gii, gy, nil
}

// formBasis forms M = Z·Q_T = Q_P·[0; Q_T].
func (s *ProjectedSym) formBasis() {
	n, N, m := s.n, s.N, s.m
	q := append([]float64(nil), s.red...)
	var impl gonum.Implementation
	if n > 1 {
		work := make([]float64, 1)
		impl.Dorgtr(blas.Lower, n, q, n, s.tauT, work, -1)
		work = make([]float64, max(int(work[0]), 1))
		impl.Dorgtr(blas.Lower, n, q, n, s.tauT, work, len(work))
	} else {
		q[0] = 1
	}
	b := make([]float64, N*n)
	copy(b[m*n:], q)
	const block = 64
	nb := (n + block - 1) / block
	parallel.Ranges(nb, 1, func(b0, b1 int) {
		for c := b0; c < b1; c++ {
			c0, c1 := c*block, min((c+1)*block, n)
			for k := m - 1; k >= 0; k-- {
				reflectColumns(b, n, N, c0, c1, s.v[k], s.tau[k], k)
			}
		}
	})
	s.basis = b
}
