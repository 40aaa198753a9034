package transform

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// The cardinal weights give the spline's own prediction and reproduce
// affine maps, with and without smoothing, in 2-D and 3-D.
func TestCardinalWeights(t *testing.T) {
	for _, dim := range []int{2, 3} {
		for _, sm := range []float64{0, 30} {
			rng := rand.New(rand.NewPCG(uint64(dim), 7))
			var src, dst []Vec
			for range 25 {
				x := Vec{rng.Float64() * 400, rng.Float64() * 300, 0}
				if dim == 3 {
					x[2] = rng.Float64() * 200
				}
				y := Vec{2 + x[0] + 5*math.Sin(x[1]/70), x[1] - 3*math.Cos(x[0]/90), 0}
				if dim == 3 {
					y[2] = 0.8*x[2] + rng.NormFloat64()
				}
				src, dst = append(src, x), append(dst, y)
			}
			res, err := Fit(TPS, dim, src, dst, Options{Smoothing: sm})
			if err != nil {
				t.Fatal(err)
			}
			sp := res.Transform.(*Spline)
			xs := []Vec{{10, 20, 30}, {200, 150, 100}, {600, -50, 250}}
			if dim == 2 {
				for i := range xs {
					xs[i][2] = 0
				}
			}
			a, err := sp.CardinalWeights(xs)
			if err != nil {
				t.Fatal(err)
			}
			for i, x := range xs {
				col := mat.Col(nil, i, a)
				var got Vec
				var sum float64
				var moment Vec
				for j, w := range col {
					got = got.Add(dst[j].Scale(w))
					sum += w
					moment = moment.Add(src[j].Scale(w))
				}
				if d := got.Sub(sp.Apply(x)).Norm(); d > 1e-6 {
					t.Errorf("%d-D S=%g at %v: weights predict %v, spline %v", dim, sm, x, got, sp.Apply(x))
				}
				if math.Abs(sum-1) > 1e-9 || moment.Sub(x).Norm() > 1e-6 {
					t.Errorf("%d-D S=%g at %v: weights sum to %v and reproduce %v", dim, sm, x, sum, moment)
				}
			}
		}
	}
}

// The leave-one-out weights reproduce the fit's exact leave-one-out errors.
func TestLeaveOneOutWeights(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 3))
	var src, dst []Vec
	for range 20 {
		x := Vec{rng.Float64() * 400, rng.Float64() * 300, rng.Float64() * 200}
		src = append(src, x)
		dst = append(dst, Vec{x[0] + 4*math.Sin(x[1]/60), x[1] + rng.NormFloat64(), 0.8 * x[2]})
	}
	for _, sm := range []float64{0, 20} {
		res, err := Fit(TPS, 3, src, dst, Options{Smoothing: sm, LeaveOneOut: true})
		if err != nil {
			t.Fatal(err)
		}
		b, err := res.Transform.(*Spline).LeaveOneOutWeights()
		if err != nil {
			t.Fatal(err)
		}
		for i := range src {
			var e Vec
			for j := range src {
				e = e.Add(dst[j].Scale(b.At(i, j)))
			}
			if d := e.Sub(res.LOO[i]).Norm(); d > 1e-6*(1+res.LOO[i].Norm()) {
				t.Errorf("S=%g landmark %d: weights give %v, fit %v", sm, i, e, res.LOO[i])
			}
		}
	}
}
