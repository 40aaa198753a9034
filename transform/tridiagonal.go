package transform

import (
	"runtime"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/lapack/gonum"

	"ferry/internal/parallel"
)

// tridiagonalise reduces the symmetric n×n a (row-major, lower triangle
// referenced) to tridiagonal form T = Q_Tᵀ a Q_T, as LAPACK's dsytrd with
// uplo = Lower does and leaving its output in the same places (d, e, tau,
// the reflectors below the subdiagonal of a), so that ProjectedSym's
// Contrasts and formBasis read it. It follows gonum's Dsytrd step by step
// (panels of 32 columns by dlatrd, the trailing update by dsyr2k, the last
// columns unblocked by dsytd2) with the two costly kernels spread over the
// cores: the symmetric matrix–vector product of every column, half the
// 4n³/3 flops and bound by memory, which gonum runs on one core, and the
// rank-2k update of each panel. SubsetPath alone uses it: its answers are
// vouched for by their error estimate, not by their last bits, so the
// order of the sums across cores does not matter to any output.
func tridiagonalise(n int, a []float64, lda int, d, e, tau []float64) {
	const nb, nx = 32, 128
	var impl gonum.Implementation
	work := make([]float64, n*nb)
	i := 0
	if n > nx {
		for i = 0; i < n-nx; i += nb {
			latrdLower(n-i, nb, a[i*lda+i:], lda, e[i:], tau[i:], work, nb)
			syr2kLower(n-i-nb, nb, a[(i+nb)*lda+i:], lda, work[nb*nb:], nb, a[(i+nb)*lda+i+nb:], lda)
			for j := i; j < i+nb; j++ {
				a[(j+1)*lda+j] = e[j]
				d[j] = a[j*lda+j]
			}
		}
	}
	impl.Dsytd2(blas.Lower, n-i, a[i*lda+i:], lda, d[i:], e[i:], tau[i:])
}

// latrdLower is gonum's Dlatrd for uplo = Lower with symvLower in place of
// Dsymv.
func latrdLower(n, nb int, a []float64, lda int, e, tau, w []float64, ldw int) {
	var impl gonum.Implementation
	bi := blas64.Implementation()
	x := make([]float64, n)
	y := make([]float64, n)
	for i := 0; i < nb; i++ {
		bi.Dgemv(blas.NoTrans, n-i, i, -1, a[i*lda:], lda, w[i*ldw:], 1, 1, a[i*lda+i:], lda)
		bi.Dgemv(blas.NoTrans, n-i, i, -1, w[i*ldw:], ldw, a[i*lda:], 1, 1, a[i*lda+i:], lda)
		if i < n-1 {
			e[i], tau[i] = impl.Dlarfg(n-i-1, a[(i+1)*lda+i], a[min(i+2, n-1)*lda+i:], lda)
			a[(i+1)*lda+i] = 1
			m := n - i - 1
			for r := range m {
				x[r] = a[(i+1+r)*lda+i]
			}
			symvLower(m, a[(i+1)*lda+i+1:], lda, x[:m], y[:m])
			for r := range m {
				w[(i+1+r)*ldw+i] = y[r]
			}
			bi.Dgemv(blas.Trans, n-i-1, i, 1, w[(i+1)*ldw:], ldw, a[(i+1)*lda+i:], lda, 0, w[i:], ldw)
			bi.Dgemv(blas.NoTrans, n-i-1, i, -1, a[(i+1)*lda:], lda, w[i:], ldw, 1, w[(i+1)*ldw+i:], ldw)
			bi.Dgemv(blas.Trans, n-i-1, i, 1, a[(i+1)*lda:], lda, a[(i+1)*lda+i:], lda, 0, w[i:], ldw)
			bi.Dgemv(blas.NoTrans, n-i-1, i, -1, w[(i+1)*ldw:], ldw, w[i:], ldw, 1, w[(i+1)*ldw+i:], ldw)
			bi.Dscal(n-i-1, tau[i], w[(i+1)*ldw+i:], ldw)
			alpha := -0.5 * tau[i] * bi.Ddot(n-i-1, w[(i+1)*ldw+i:], ldw, a[(i+1)*lda+i:], lda)
			bi.Daxpy(n-i-1, alpha, a[(i+1)*lda+i:], lda, w[(i+1)*ldw+i:], ldw)
		}
	}
}

// symvLower sets y = A x for the symmetric m×m A of which the lower
// triangle is stored (row-major, stride lda). Each core takes a band of
// rows of about equal area and keeps its own y, the bands' parts added in
// band order.
func symvLower(m int, a []float64, lda int, x, y []float64) {
	workers := min(runtime.GOMAXPROCS(0), 2)
	if m < 256 || workers < 2 {
		symvRows(0, m, a, lda, x, y)
		return
	}
	// Rows [0, split) hold about half the triangle's area.
	split := int(float64(m) * 0.7071067811865476)
	part := make([]float64, m)
	parallel.Ranges(2, 1, func(lo, hi int) {
		for b := lo; b < hi; b++ {
			if b == 0 {
				symvRows(0, split, a, lda, x, y)
			} else {
				symvRows(split, m, a, lda, x, part)
			}
		}
	})
	for r := range m {
		if r < split {
			y[r] += part[r]
		} else {
			y[r] = part[r]
		}
	}
}

// symvRows computes the contributions of the stored rows [r0, r1) of the
// lower triangle to y = A x: row r gives y_r its own terms and y_c, c < r,
// the mirrored ones. y is set for rows from r0 on and added to below it.
func symvRows(r0, r1 int, a []float64, lda int, x, y []float64) {
	for r := range r0 {
		y[r] = 0
	}
	for r := r0; r < r1; r++ {
		y[r] = 0
	}
	for r := r0; r < r1; r++ {
		row := a[r*lda : r*lda+r]
		xr := x[r]
		s := 0.0
		for c, v := range row {
			s += v * x[c]
			y[c] += v * xr
		}
		y[r] += s + a[r*lda+r]*xr
	}
}

// syr2kLower is C −= A·Bᵀ + B·Aᵀ on the lower triangle of the m×m C, A and
// B m×k, as gonum's Dsyr2k with alpha −1 and beta 1: the diagonal blocks
// by Dsyr2k and the blocks below them by two matrix products, block rows
// shared out among the cores.
func syr2kLower(m, k int, am []float64, lda int, bm []float64, ldb int, c []float64, ldc int) {
	if m <= 0 {
		return
	}
	bi := blas64.Implementation()
	const block = 128
	// Blocks handed out on demand: the rows further down carry longer
	// rectangles.
	parallel.Blocks(m, block, func() struct{} { return struct{}{} }, func(_ struct{}, r0, r1 int) {
		{
			if r0 > 0 {
				// The rectangle left of the diagonal block.
				bi.Dgemm(blas.NoTrans, blas.Trans, r1-r0, r0, k, -1, am[r0*lda:], lda, bm, ldb, 1, c[r0*ldc:], ldc)
				bi.Dgemm(blas.NoTrans, blas.Trans, r1-r0, r0, k, -1, bm[r0*ldb:], ldb, am, lda, 1, c[r0*ldc:], ldc)
			}
			bi.Dsyr2k(blas.Lower, blas.NoTrans, r1-r0, k, -1, am[r0*lda:], lda, bm[r0*ldb:], ldb, 1, c[r0*ldc+r0:], ldc)
		}
	})
}
