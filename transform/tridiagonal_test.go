package transform

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/lapack/gonum"
)

// TestTridiagonaliseAsDsytrd checks the reduction on every core against
// gonum's Dsytrd on projected spline kernels of sizes that take the
// unblocked path only, one panel and many: the same tridiagonal matrix and
// reflectors up to rounding, hence the same eigenvalues and the same
// solutions of shifted systems.
func TestTridiagonaliseAsDsytrd(t *testing.T) {
	for _, n := range []int{50, 170, 400} {
		src, _ := benchLandmarks(n + 4)
		c, s, err := splineNormalisation(3, src)
		if err != nil {
			t.Fatal(err)
		}
		sys := &splineSystem{dim: 3, m: 4, centre: c, scale: s}
		for _, p := range src {
			sys.nodes = append(sys.nodes, p.Sub(c).Scale(1/s))
		}
		if err := sys.factorAffine(); err != nil {
			t.Fatal(err)
		}
		a := sys.kernelMatrix()
		sys.project(a)
		N := n + 4
		red := make([]float64, n*n)
		for i := range n {
			copy(red[i*n:(i+1)*n], a[(4+i)*N+4:(4+i)*N+N])
		}
		want := append([]float64(nil), red...)
		d1, e1, t1 := make([]float64, n), make([]float64, n-1), make([]float64, n-1)
		d2, e2, t2 := make([]float64, n), make([]float64, n-1), make([]float64, n-1)
		var impl gonum.Implementation
		work := make([]float64, 1)
		impl.Dsytrd(blas.Lower, n, want, n, d1, e1, t1, work, -1)
		work = make([]float64, int(work[0]))
		impl.Dsytrd(blas.Lower, n, want, n, d1, e1, t1, work, len(work))
		tridiagonalise(n, red, n, d2, e2, t2)
		scale := math.Abs(d1[0])
		for i := range n {
			scale = math.Max(scale, math.Abs(d1[i]))
		}
		tol := 1e-9 * scale
		for i := range n {
			if math.Abs(d1[i]-d2[i]) > tol {
				t.Fatalf("n=%d: diagonal %d: %g against Dsytrd's %g", n, i, d2[i], d1[i])
			}
			if i < n-1 && (math.Abs(e1[i]-e2[i]) > tol || math.Abs(t1[i]-t2[i]) > 1e-9) {
				t.Fatalf("n=%d: off-diagonal %d: %g (τ %g) against Dsytrd's %g (τ %g)", n, i, e2[i], t2[i], e1[i], t1[i])
			}
			for j := i + 2; j < n; j++ {
				if math.Abs(red[j*n+i]-want[j*n+i]) > 1e-9 {
					t.Fatalf("n=%d: reflector %d entry %d: %g against %g", n, i, j, red[j*n+i], want[j*n+i])
				}
			}
		}
	}
}
