package transform

import (
	"math/rand/v2"
	"testing"
)

// The one-pass map agrees with Apply, and its Jacobian with central finite
// differences of Apply (Jacobian itself is this pass in 3-D, so it cannot be
// the reference).
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
			wq := res.Transform.Apply(p)
			var wj Mat
			const h = 1e-4
			for b := range dim {
				lo, hi := p, p
				lo[b] -= h
				hi[b] += h
				d := res.Transform.Apply(hi).Sub(res.Transform.Apply(lo)).Scale(1 / (2 * h))
				for a := range dim {
					wj[a][b] = d[a]
				}
			}
			if dim == 2 {
				wj[2][2] = 1
			}
			if q.Sub(wq).Norm() > 1e-9*(1+wq.Norm()) {
				t.Fatalf("%d-D: position %v, Apply %v", dim, q, wq)
			}
			for a := range 3 {
				for b := range 3 {
					if d := j[a][b] - wj[a][b]; d > 1e-6 || d < -1e-6 {
						t.Fatalf("%d-D: Jacobian %v, Jacobian() %v", dim, j, wj)
					}
				}
			}
		}
	}
}
