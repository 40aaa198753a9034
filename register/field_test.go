package register

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"ferry/landmarks"
	"ferry/transform"
)

// The variance the error model predicts for a fitted spline's error
// (FieldParams.variance through the spline's cardinal weights) against a
// seeded Monte Carlo run of the model itself: displacement fields drawn
// from the Matérn field, picking noise added, a spline of fixed smoothing
// fitted to each draw, and its error at points inside, at the edge of and
// beyond the landmarks measured against the drawn field.
func TestFieldVarianceMonteCarlo(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	params := &FieldParams{Smoothness: 1.5, Length: 180, Amplitude: transform.Vec{4, 4, 4},
		Noise: transform.Vec{0.1, 0.1, 0.1}, Kinds: map[landmarks.Kind]float64{landmarks.KindVessel: 1}}
	var src []transform.Vec
	for range 40 {
		src = append(src, transform.Vec{rng.Float64() * 400, rng.Float64() * 400, rng.Float64() * 300})
	}
	tests := []transform.Vec{{200, 200, 150}, {390, 20, 280}, {480, 200, 150}}
	all := append(append([]transform.Vec(nil), src...), tests...)
	n := len(all)
	cov := mat.NewSymDense(n, nil)
	for i := range n {
		for j := i; j < n; j++ {
			cov.SetSym(i, j, params.corr(all[i].Sub(all[j]).Norm()))
		}
		cov.SetSym(i, i, cov.At(i, i)+1e-10)
	}
	var chol mat.Cholesky
	if !chol.Factorize(cov) {
		t.Fatal("correlation matrix not positive definite")
	}
	var L mat.TriDense
	chol.LTo(&L)
	affine := func(x transform.Vec) transform.Vec {
		return transform.Vec{1000 + 0.9*x[0] - 0.1*x[1], 2000 + 0.1*x[0] + 0.9*x[1], 300 + 0.8*x[2]}
	}
	const smoothing, runs = 20.0, 800
	sum := make([]transform.Vec, len(tests))
	z := make([]float64, n)
	var res *transform.Result
	for range runs {
		var field [3][]float64
		for k := range 3 {
			for i := range z {
				z[i] = rng.NormFloat64()
			}
			v := mat.NewVecDense(n, nil)
			v.MulVec(&L, mat.NewVecDense(n, z))
			field[k] = v.RawVector().Data
		}
		dst := make([]transform.Vec, len(src))
		for i, x := range src {
			dst[i] = affine(x)
			for k := range 3 {
				dst[i][k] += math.Sqrt(params.Amplitude[k]) * (field[k][i] + math.Sqrt(params.Noise[k])*rng.NormFloat64())
			}
		}
		var err error
		if res, err = transform.Fit(transform.TPS, 3, src, dst, transform.Options{Smoothing: smoothing}); err != nil {
			t.Fatal(err)
		}
		for j, x := range tests {
			truth := affine(x)
			for k := range 3 {
				truth[k] += math.Sqrt(params.Amplitude[k]) * field[k][len(src)+j]
			}
			e := res.Transform.Apply(x).Sub(truth)
			for k := range 3 {
				sum[j][k] += e[k] * e[k] / runs
			}
		}
	}
	u := &UncertaintyModel{Source: src, Weights: equalWeights(len(src)), Field: params, CellNoise: 1}
	for range src {
		u.Kinds = append(u.Kinds, landmarks.KindVessel)
	}
	fm, err := newFieldMapper(res.Transform, u)
	if err != nil {
		t.Fatal(err)
	}
	pred := fm.exactVariances(tests)
	for j, x := range tests {
		for k := range 3 {
			// 800 runs: the Monte Carlo variance has a relative sd of
			// √(2/800) = 5 %.
			if math.Abs(sum[j][k]/pred[j][k]-1) > 0.2 {
				t.Errorf("at %v axis %d: predicted %.3f µm², Monte Carlo %.3f µm²", x, k, pred[j][k], sum[j][k])
			}
		}
	}
	t.Logf("predicted %v, Monte Carlo %v", pred, sum)
}

// The restricted likelihood recovers the field it is given: one draw of a
// known Matérn field with noise at 150 landmarks, three axes.
func TestFitFieldRecoversParameters(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	truth := &FieldParams{Smoothness: 1.5, Length: 150, Amplitude: transform.Vec{4, 4, 4}, Noise: transform.Vec{0.25, 0.25, 0.25}}
	var src []transform.Vec
	var kinds []landmarks.Kind
	for range 150 {
		src = append(src, transform.Vec{rng.Float64() * 500, rng.Float64() * 500, rng.Float64() * 350})
		kinds = append(kinds, landmarks.KindVessel)
	}
	n := len(src)
	cov := mat.NewSymDense(n, nil)
	for i := range n {
		for j := i; j < n; j++ {
			cov.SetSym(i, j, truth.corr(src[i].Sub(src[j]).Norm()))
		}
		cov.SetSym(i, i, cov.At(i, i)+truth.Noise[0])
	}
	var chol mat.Cholesky
	if !chol.Factorize(cov) {
		t.Fatal("covariance not positive definite")
	}
	var L mat.TriDense
	chol.LTo(&L)
	dst := make([]transform.Vec, n)
	for k := range 3 {
		z := make([]float64, n)
		for i := range z {
			z[i] = rng.NormFloat64()
		}
		v := mat.NewVecDense(n, nil)
		v.MulVec(&L, mat.NewVecDense(n, z))
		for i := range n {
			dst[i][k] = 100*float64(k) + 0.9*src[i][k] + 2*v.AtVec(i)
		}
	}
	for _, c := range []fieldCriterion{byREML, byLOO} {
		f, err := fitField(3, src, dst, kinds, nil, c)
		if err != nil {
			t.Fatal(err)
		}
		p := f.params
		t.Logf("criterion %d: ν %.1f, ℓ %.0f µm, amplitude %.2v µm², noise %.2v", c, p.Smoothness, p.Length, p.Amplitude, p.Noise)
		if p.Length < 75 || p.Length > 300 {
			t.Errorf("criterion %d: length %.0f µm, truth 150 µm", c, p.Length)
		}
		for k := range 3 {
			if noise := p.Amplitude[k] * p.Noise[k]; noise < 0.5 || noise > 2 {
				t.Errorf("criterion %d axis %d: noise %.2f µm², truth 1 µm²", c, k, noise)
			}
			if p.Amplitude[k] < 1.6 || p.Amplitude[k] > 10 {
				t.Errorf("criterion %d axis %d: amplitude %.2f µm², truth 4 µm²", c, k, p.Amplitude[k])
			}
		}
	}
}
