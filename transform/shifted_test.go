package transform

import (
	"math"
	"math/rand/v2"
	"sort"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// TestProjectedSymMatchesDense checks ProjectedSym's shifted quantities
// against the dense route: an explicit orthonormal Z from gonum's QR of P,
// C = ZᵀKZ, its eigenvalues, and (C + λI)⁻¹ by Cholesky.
func TestProjectedSymMatchesDense(t *testing.T) {
	for _, N := range []int{7, 40, 150} {
		rng := rand.New(rand.NewPCG(uint64(N), 9))
		m := 4
		pts := make([]Vec, N)
		for i := range pts {
			pts[i] = Vec{rng.Float64(), rng.Float64(), rng.Float64()}
		}
		cols := make([][]float64, m)
		P := mat.NewDense(N, m, nil)
		for k := range m {
			cols[k] = make([]float64, N)
			for i, x := range pts {
				v := 1.0
				if k > 0 {
					v = x[k-1]
				}
				cols[k][i] = v
				P.Set(i, k, v)
			}
		}
		K := make([]float64, N*N)
		for i := range N {
			for j := range N {
				K[i*N+j] = math.Exp(-pts[i].Sub(pts[j]).Norm() / 0.3)
			}
		}
		Kd := mat.NewDense(N, N, append([]float64(nil), K...))
		y := make([]float64, N)
		for i := range y {
			y[i] = rng.NormFloat64()
		}
		s, err := NewProjectedSym(cols, K)
		if err != nil {
			t.Fatal(err)
		}
		var qr mat.QR
		qr.Factorize(P)
		var Q mat.Dense
		qr.QTo(&Q)
		Z := Q.Slice(0, N, m, N)
		var kz, C mat.Dense
		kz.Mul(Kd, Z)
		C.Mul(Z.T(), &kz)
		n := N - m
		sym := mat.NewSymDense(n, nil)
		for i := range n {
			for j := i; j < n; j++ {
				sym.SetSym(i, j, 0.5*(C.At(i, j)+C.At(j, i)))
			}
		}
		var es mat.EigenSym
		es.Factorize(sym, false)
		want := es.Values(nil)
		sort.Float64s(want)
		for j, e := range s.Eigenvalues() {
			if math.Abs(e-want[j]) > 1e-10*want[n-1] {
				t.Fatalf("N=%d eigenvalue %d: %g, dense %g", N, j, e, want[j])
			}
		}
		tc := s.Contrasts(y)
		for _, lambda := range []float64{1e-3, 0.1, 10} {
			shifted := mat.NewSymDense(n, nil)
			shifted.CopySym(sym)
			for i := range n {
				shifted.SetSym(i, i, sym.At(i, i)+lambda)
			}
			var inv mat.SymDense
			var chol mat.Cholesky
			if !chol.Factorize(shifted) {
				t.Fatal("dense Cholesky failed")
			}
			chol.InverseTo(&inv)
			var zi, G mat.Dense
			zi.Mul(Z, &inv)
			G.Mul(&zi, Z.T())
			yv := mat.NewVecDense(N, y)
			var gy mat.VecDense
			gy.MulVec(&G, yv)
			q := mat.Dot(yv, &gy)
			if got := s.QuadForm(tc, lambda); math.Abs(got-q) > 1e-9*math.Abs(q) {
				t.Fatalf("N=%d λ=%g: quadratic form %g, dense %g", N, lambda, got, q)
			}
			gii, gyGot, err := s.LeaveOneOut(tc, lambda)
			if err != nil {
				t.Fatal(err)
			}
			for i := range N {
				if math.Abs(gii[i]-G.At(i, i)) > 1e-9*G.At(i, i) || math.Abs(gyGot[i]-gy.AtVec(i)) > 1e-9*(math.Abs(gy.AtVec(i))+q/float64(N)) {
					t.Fatalf("N=%d λ=%g row %d: G_ii %g (dense %g), (Gy)_i %g (dense %g)", N, lambda, i, gii[i], G.At(i, i), gyGot[i], gy.AtVec(i))
				}
			}
		}
	}
}
