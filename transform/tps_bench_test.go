package transform

import (
	"fmt"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// benchLandmarks returns n 3-D pairs spread over a 1 mm cube at EM-like
// coordinates near 1e5 µm, with a smooth warp and 0.5 µm picking noise.
func benchLandmarks(n int) (src, dst []Vec) {
	rng := rand.New(rand.NewPCG(7, uint64(n)))
	src, dst = make([]Vec, n), make([]Vec, n)
	for i := range n {
		p := Vec{1e5 + 1000*rng.Float64(), 2e5 + 1000*rng.Float64(), 5e4 + 1000*rng.Float64()}
		src[i] = p
		dst[i] = smoothWarp(p, Vec{1e5, 2e5, 5e4}, 1000).Add(Vec{rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()}.Scale(0.5))
	}
	return src, dst
}

// BenchmarkSplineFitLOO measures a 3-D fit with its exact leave-one-out
// errors. Targets: n=1000 within 1 s, n=2000 within 4 s on two cores.
func BenchmarkSplineFitLOO(b *testing.B) {
	for _, n := range []int{300, 1000, 2000} {
		src, dst := benchLandmarks(n)
		b.Run(fmt.Sprintf("n=%d", n), func(b *testing.B) {
			for b.Loop() {
				if _, err := Fit(TPS, 3, src, dst, Options{Smoothing: 10, LeaveOneOut: true}); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// BenchmarkSplineApply maps batches of points through a fitted 3-D spline
// with ApplyAll. Target: a million points per second at n=300.
func BenchmarkSplineApply(b *testing.B) {
	for _, n := range []int{30, 300, 1000} {
		src, dst := benchLandmarks(n)
		res, err := Fit(TPS, 3, src, dst, Options{Smoothing: 10})
		if err != nil {
			b.Fatal(err)
		}
		rng := rand.New(rand.NewPCG(3, 4))
		pts := make([]Vec, 1<<16)
		for i := range pts {
			pts[i] = Vec{1e5 + 1000*rng.Float64(), 2e5 + 1000*rng.Float64(), 5e4 + 1000*rng.Float64()}
		}
		out := make([]Vec, len(pts))
		b.Run(fmt.Sprintf("n=%d", n), func(b *testing.B) {
			for b.Loop() {
				ApplyAll(res.Transform, out, pts)
			}
			b.ReportMetric(float64(b.N)*float64(len(pts))/b.Elapsed().Seconds(), "points/s")
		})
	}
}

// BenchmarkSplineApplyOne maps one point at a time on one core.
func BenchmarkSplineApplyOne(b *testing.B) {
	src, dst := benchLandmarks(300)
	res, err := Fit(TPS, 3, src, dst, Options{Smoothing: 10})
	if err != nil {
		b.Fatal(err)
	}
	sp := res.Transform.(*Spline)
	p := Vec{1e5 + 500, 2e5 + 500, 5e4 + 500}
	var sink Vec
	for b.Loop() {
		sink = sink.Add(sp.Apply(p))
	}
	_ = sink
}

// BenchmarkProjectedEigen is the eigendecomposition (vectors included) of
// the projected kernel that a search over every smoothing at once would
// start from; docs/methods.md compares it with the grid search that
// BenchmarkSplineFitLOO times one step of.
func BenchmarkProjectedEigen(b *testing.B) {
	for _, n := range []int{300, 1000} {
		src, _ := benchLandmarks(n)
		c, s, err := splineNormalisation(3, src)
		if err != nil {
			b.Fatal(err)
		}
		sys, err := newSplineSystem(3, c, s, src, 0, nil)
		if err != nil {
			b.Fatal(err)
		}
		var proj mat.SymDense
		sys.chol.ToSym(&proj)
		b.Run(fmt.Sprintf("n=%d", n), func(b *testing.B) {
			for b.Loop() {
				var es mat.EigenSym
				if !es.Factorize(&proj, true) {
					b.Fatal("eigendecomposition failed")
				}
			}
		})
	}
}
