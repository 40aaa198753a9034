package transform

import (
	"math"
	"math/rand/v2"
	"testing"
)

// denseVariance computes −vᵀM⁻¹v directly from the bordered system in
// micrometres, as the contract writes it: the reference for the factored
// predictor. It is the covariance of x with itself (denseCross).
func denseVariance(t *testing.T, dim int, nodes []Vec, smoothing float64, weights []float64, x Vec) float64 {
	t.Helper()
	return denseCross(t, dim, nodes, smoothing, weights, []Vec{x}, []Vec{x}).At(0, 0)
}

func randomNodes(rng *rand.Rand, n, dim int, offset float64) ([]Vec, []Vec) {
	src, dst := make([]Vec, n), make([]Vec, n)
	for i := range n {
		for k := range dim {
			src[i][k] = offset + rng.Float64()*400
		}
		for k := range dim {
			dst[i][k] = 0.9*src[i][k] + 5*math.Sin(src[i][(k+1)%dim]/90) + rng.NormFloat64()
		}
	}
	return src, dst
}

// The factored posterior variance equals the dense −vᵀM⁻¹v of the
// micrometre system, in 2-D and 3-D, with and without smoothing and weights,
// near the origin and near 1e4 µm.
func TestSplinePredictorMatchesDense(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 8))
	for _, tc := range []struct {
		name      string
		dim       int
		smoothing float64
		weighted  bool
		offset    float64
	}{
		{"3-D interpolating", 3, 0, false, 0},
		{"3-D smoothed weighted", 3, 40, true, 0},
		{"3-D far from the origin", 3, 10, false, 1e4},
		{"2-D interpolating", 2, 0, false, 0},
		{"2-D smoothed weighted", 2, 2000, true, 500},
	} {
		t.Run(tc.name, func(t *testing.T) {
			src, dst := randomNodes(rng, 30, tc.dim, tc.offset)
			var w []float64
			if tc.weighted {
				w = make([]float64, len(src))
				for i := range w {
					w[i] = 0.5 + rng.Float64()
				}
			}
			res, err := Fit(TPS, tc.dim, src, dst, Options{Smoothing: tc.smoothing, Weights: w})
			if err != nil {
				t.Fatal(err)
			}
			pred, err := NewPredictor(res.Transform, src, w)
			if err != nil {
				t.Fatal(err)
			}
			xs := make([]Vec, 150)
			for i := range xs {
				for k := range tc.dim {
					xs[i][k] = tc.offset - 100 + rng.Float64()*600
				}
			}
			batch := make([]Mat, len(xs))
			pred.(*splinePredictor).FactorAll(xs, batch)
			for i, x := range xs {
				want := denseVariance(t, tc.dim, src, tc.smoothing, w, x)
				got := pred.Factor(x)
				if math.Abs(got[0][0]-want) > 1e-7*math.Abs(want)+1e-9 {
					t.Fatalf("σ²(%v) = %.10g, dense %.10g", x, got[0][0], want)
				}
				if got != batch[i] {
					t.Fatalf("FactorAll differs from Factor at %v", x)
				}
				if tc.dim == 2 && got[2][2] != 0 {
					t.Fatal("2-D factor has a z entry")
				}
			}
		})
	}
}

// The Gaussian-process reading links the predictor to the exact
// leave-one-out factor: the predicted variance of a left-out landmark is
// the posterior variance at its position from the others plus its own
// noise, LOOFactor_i = σ²₋ᵢ(p_i) + S·w̄/w_i (an identity of kriging with a
// nugget; Wahba 1990, "Spline Models for Observational Data", §4.2).
func TestSplinePredictorAgreesWithLeaveOneOut(t *testing.T) {
	rng := rand.New(rand.NewPCG(6, 2))
	for _, dim := range []int{2, 3} {
		src, dst := randomNodes(rng, 25, dim, 100)
		const smoothing = 30.0
		res, err := Fit(TPS, dim, src, dst, Options{Smoothing: smoothing, LeaveOneOut: true})
		if err != nil {
			t.Fatal(err)
		}
		for i := range src {
			others := append(append([]Vec(nil), src[:i]...), src[i+1:]...)
			otherDst := append(append([]Vec(nil), dst[:i]...), dst[i+1:]...)
			r, err := Fit(TPS, dim, others, otherDst, Options{Smoothing: smoothing})
			if err != nil {
				t.Fatal(err)
			}
			pred, err := NewPredictor(r.Transform, others, nil)
			if err != nil {
				t.Fatal(err)
			}
			want := pred.Factor(src[i])[0][0] + smoothing
			if got := res.LOOFactor[i]; math.Abs(got-want) > 1e-7*want {
				t.Errorf("%d-D pair %d: LOOFactor %.9g, posterior variance + noise %.9g", dim, i, got, want)
			}
		}
	}
}

// An interpolating spline knows its landmarks exactly under its own model:
// zero variance at every node, growing away from them.
func TestSplinePredictorAtNodes(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	src, dst := randomNodes(rng, 20, 3, 0)
	res, err := Fit(TPS, 3, src, dst, Options{})
	if err != nil {
		t.Fatal(err)
	}
	pred, err := NewPredictor(res.Transform, src, nil)
	if err != nil {
		t.Fatal(err)
	}
	far := pred.Factor(Vec{2000, 2000, 2000})[0][0]
	for _, p := range src {
		if v := pred.Factor(p)[0][0]; v > 1e-9*far {
			t.Errorf("variance %.3g at a node, %.3g far away", v, far)
		}
	}
	mid := pred.Factor(src[0].Add(src[1]).Scale(0.5))[0][0]
	if !(mid > 0 && far > mid) {
		t.Errorf("variance between nodes %.3g, far away %.3g: want 0 < between < far", mid, far)
	}
}

func BenchmarkSplinePredictor(b *testing.B) {
	rng := rand.New(rand.NewPCG(3, 3))
	src, dst := randomNodes(rng, 300, 3, 0)
	res, err := Fit(TPS, 3, src, dst, Options{Smoothing: 10})
	if err != nil {
		b.Fatal(err)
	}
	pred, err := NewPredictor(res.Transform, src, nil)
	if err != nil {
		b.Fatal(err)
	}
	xs := make([]Vec, 100000)
	for i := range xs {
		xs[i] = Vec{rng.Float64() * 400, rng.Float64() * 400, rng.Float64() * 400}
	}
	dst2 := make([]Mat, len(xs))
	b.ResetTimer()
	for b.Loop() {
		pred.(BatchPredictor).FactorAll(xs, dst2)
	}
	b.ReportMetric(float64(len(xs))*float64(b.N)/b.Elapsed().Seconds(), "points/s")
}
