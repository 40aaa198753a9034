package transform

import (
	"math"
	"math/rand/v2"
	"testing"
)

// The affine part and the kernel sum in micrometres add up to the spline:
// far from the nodes the 3-D kernel sum grows only like |p| while the
// affine part carries everything else, and in 2-D the constant moved out of
// the normalised kernels makes f(p) − (A·p + b) equal Σ w_j φ(|p − p_j|)
// with the micrometre weights W_j/s².
func TestAffinePartOfSpline(t *testing.T) {
	for _, dim := range []int{2, 3} {
		rng := rand.New(rand.NewPCG(7, uint64(dim)))
		var src, dst []Vec
		for range 25 {
			p := Vec{400 * rng.Float64(), 300 * rng.Float64(), 0}
			if dim == 3 {
				p[2] = 200 * rng.Float64()
			}
			q := Vec{1.1*p[0] + 0.1*p[1] + 30 + 5*math.Sin(p[1]/50), 0.95*p[1] - 20 + 4*math.Cos(p[0]/70), 0}
			if dim == 3 {
				q[2] = 0.9*p[2] + 10 + 3*math.Sin(p[0]/60)
			}
			src, dst = append(src, p), append(dst, q)
		}
		res, err := Fit(TPS, dim, src, dst, Options{})
		if err != nil {
			t.Fatal(err)
		}
		s := res.Transform.(*Spline)
		a, b, err := AffinePart(s)
		if err != nil {
			t.Fatal(err)
		}
		for range 20 {
			p := Vec{500*rng.Float64() - 50, 400*rng.Float64() - 50, 0}
			if dim == 3 {
				p[2] = 300*rng.Float64() - 50
			}
			var kernel Vec
			for j, node := range s.Nodes {
				d := p.Sub(node)
				if dim == 2 {
					d[2] = 0
				}
				r := d.Norm()
				var phi float64
				w := s.Weights[j]
				if dim == 3 {
					phi, w = -r, w.Scale(1/s.Scale)
				} else if r > 0 {
					phi, w = r*r*math.Log(r), w.Scale(1/(s.Scale*s.Scale))
				}
				kernel = kernel.Add(w.Scale(phi))
			}
			want := s.Apply(p)
			got := a.MulVec(p).Add(b).Add(kernel)
			if e := got.Sub(want).Norm(); e > 1e-9*(1+want.Norm()) {
				t.Errorf("%d-D at %v: affine part + kernels %v, spline %v", dim, p, got, want)
			}
		}
	}
}

// A chain of linear steps composes; a chain with a spline is refused.
func TestAffinePartOfChain(t *testing.T) {
	l1 := &Linear{Model: Affine, D: 3, A: Mat{{1, 0.1, 0}, {0, 2, 0}, {0, 0, 1}}, T: Vec{1, 2, 3}, Scale: 1}
	l2 := &Linear{Model: Affine, D: 3, A: Mat{{0, 1, 0}, {1, 0, 0}, {0, 0, 3}}, T: Vec{-1, 0, 5}, Scale: 1}
	c, err := NewChain(l1, l2)
	if err != nil {
		t.Fatal(err)
	}
	a, b, err := AffinePart(c)
	if err != nil {
		t.Fatal(err)
	}
	p := Vec{3, -4, 7}
	if got, want := a.MulVec(p).Add(b), c.Apply(p); got.Sub(want).Norm() > 1e-12 {
		t.Errorf("chain's affine part gives %v, the chain %v", got, want)
	}
}
