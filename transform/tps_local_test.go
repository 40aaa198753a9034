package transform

import (
	"math"
	"math/rand/v2"
	"testing"
)

// The neighbourhood predictor of a large spline never reports less variance
// than the exact one (a neighbourhood's predictors are among the whole
// set's), and not much more. Measured here on 300 landmarks with and
// without smoothing and weights, at points inside and around the landmarks.
func TestLocalPredictorBounds(t *testing.T) {
	rng := rand.New(rand.NewPCG(12, 4))
	for _, tc := range []struct {
		name      string
		dim       int
		smoothing float64
		weighted  bool
		// maxExcess is the largest relative excess of the radius
		// (square root of the variance) allowed at any point; on average
		// the excess must stay under 2 %.
		maxExcess float64
	}{
		{"3-D interpolating", 3, 0, false, 0.15},
		{"3-D smoothed weighted", 3, 20, true, 0.15},
		{"2-D smoothed", 2, 500, false, 0.15},
	} {
		t.Run(tc.name, func(t *testing.T) {
			src, dst := randomNodes(rng, 300, tc.dim, 1e4)
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
			s := res.Transform.(*Spline)
			exact, err := newExactSplinePredictor(s, s.Nodes, s.PairWeights)
			if err != nil {
				t.Fatal(err)
			}
			local, err := NewPredictor(s, src, w)
			if err != nil {
				t.Fatal(err)
			}
			if _, ok := local.(*localPredictor); !ok {
				t.Fatalf("a 300-node spline got a %T", local)
			}
			xs := make([]Vec, 600)
			for i := range xs {
				for k := range tc.dim {
					xs[i][k] = 1e4 - 50 + rng.Float64()*500
				}
			}
			got := make([]Mat, len(xs))
			local.(*localPredictor).FactorAll(xs, got)
			worst, below, sum := 0.0, 0.0, 0.0
			for i, x := range xs {
				e := exact.Factor(x)[0][0]
				l := got[i][0][0]
				if single := local.Factor(x)[0][0]; single != l {
					t.Fatalf("Factor and FactorAll differ at %v", x)
				}
				scale := math.Max(e, 1e-12)
				below = math.Max(below, (e-l)/scale)
				worst = math.Max(worst, math.Sqrt(l/scale)-1)
				sum += math.Sqrt(l/scale) - 1
			}
			if below > 1e-6 {
				t.Errorf("neighbourhood variance below the exact one by %.3g relative", below)
			}
			if worst > tc.maxExcess {
				t.Errorf("neighbourhood radius exceeds the exact one by %.1f %%", 100*worst)
			}
			if mean := sum / float64(len(xs)); mean > 0.02 {
				t.Errorf("neighbourhood radius exceeds the exact one by %.1f %% on average", 100*mean)
			}
			t.Logf("excess of the radius: largest %.2f %%, mean %.2f %%", 100*worst, 100*sum/float64(len(xs)))
		})
	}
}
