package transform

import (
	"math/rand/v2"
	"testing"
)

// A spline that takes z from a fit with another smoothing maps x and y as
// the first fit and z as the second, and refuses a spline on other nodes.
func TestSplineWithAxesFrom(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	var src, dst []Vec
	for range 40 {
		x := Vec{100 * rng.Float64(), 100 * rng.Float64(), 60 * rng.Float64()}
		src = append(src, x)
		dst = append(dst, Vec{x[0] + rng.NormFloat64(), x[1] + 2*rng.NormFloat64(), 0.9*x[2] + 3*rng.NormFloat64()})
	}
	fit := func(sm float64, n int) *Spline {
		res, err := Fit(TPS, 3, src[:n], dst[:n], Options{Smoothing: sm})
		if err != nil {
			t.Fatal(err)
		}
		return res.Transform.(*Spline)
	}
	a, b := fit(0.5, 40), fit(50, 40)
	c, err := a.WithAxesFrom(b, 2)
	if err != nil {
		t.Fatal(err)
	}
	for _, x := range []Vec{{10, 20, 30}, {55, 70, 5}, {90, 5, 59}} {
		got, pa, pb := c.Apply(x), a.Apply(x), b.Apply(x)
		want := Vec{pa[0], pa[1], pb[2]}
		if got.Sub(want).Norm() > 1e-9 {
			t.Errorf("at %v: %v, want %v", x, got, want)
		}
	}
	if _, err := a.WithAxesFrom(fit(0.5, 39), 2); err == nil {
		t.Error("splines on different nodes combined")
	}
}
