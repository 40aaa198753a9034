package transform

import (
	"math/rand/v2"
	"testing"
)

// The one-pass map and Jacobian agree with Apply and Jacobian to rounding.
func TestApplyWithJacobian(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 9))
	for _, dim := range []int{2, 3} {
		src, dst := randomNodes(rng, 40, dim, 100)
		res, err := Fit(TPS, dim, src, dst, Options{Smoothing: 3})
		if err != nil {
			t.Fatal(err)
		}
		for range 200 {
			var p Vec
			for k := range dim {
				p[k] = 50 + rng.Float64()*500
			}
			q, j := ApplyWithJacobian(res.Transform, p)
			wq, wj := res.Transform.Apply(p), res.Transform.Jacobian(p)
			if q.Sub(wq).Norm() > 1e-9*(1+wq.Norm()) {
				t.Fatalf("%d-D: position %v, Apply %v", dim, q, wq)
			}
			for a := range 3 {
				for b := range 3 {
					if d := j[a][b] - wj[a][b]; d > 1e-12 || d < -1e-12 {
						t.Fatalf("%d-D: Jacobian %v, Jacobian() %v", dim, j, wj)
					}
				}
			}
		}
	}
}
