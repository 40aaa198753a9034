package register

import (
	"errors"
	"math"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distuv"

	"ferry/status"
	"ferry/transform"
)

// fittedLOOVariance returns the variance per axis (µm²) of each landmark's
// leave-one-out error of the fitted model res (an affine map or a spline
// fitted to src with weights w) under the error model f. The fit is a
// linear smoother, so its exact leave-one-out error is Σ_j b_ij·q_j: for
// the affine fit, with hat matrix H, b_i = (e_i − H_i)/(1 − H_ii) (the
// leave-one-out lemma of least squares; Craven & Wahba 1979, Numer. Math.
// 31:377–403); for the spline the rows of Spline.LeaveOneOutWeights. Its
// variance is
// s_k·(b_iᵀ·R·b_i + λ_k·b_iᵀ·D·b_i); the affine trend cancels because each
// b_i annihilates affine maps.
func fittedLOOVariance(res *transform.Result, src []transform.Vec, w []float64, kinds []float64, f *FieldParams, dim int) ([]transform.Vec, error) {
	n := len(src)
	var B *mat.Dense
	switch t := res.Transform.(type) {
	case *transform.Spline:
		var err error
		if B, err = t.LeaveOneOutWeights(); err != nil {
			return nil, err
		}
	case *transform.Linear:
		if t.Kind() != transform.Affine {
			return nil, errors.New("the error model needs an affine map or a spline")
		}
		hat, err := affineHat(src, w, dim)
		if err != nil {
			return nil, err
		}
		A, err := hat(src)
		if err != nil {
			return nil, err
		}
		// B's row i is b_i = (e_i − H_i)/(1 − H_ii); A's column i holds H_i.
		B = mat.NewDense(n, n, nil)
		for i := range n {
			d := 1 - A.At(i, i)
			if !(math.Abs(d) > 1e-12) {
				return nil, errors.New("a landmark's leave-one-out error is not defined (leverage 1)")
			}
			for j := range n {
				v := -A.At(j, i)
				if i == j {
					v += 1
				}
				B.Set(i, j, v/d)
			}
		}
	default:
		return nil, errors.New("the error model needs an affine map or a spline")
	}
	R := mat.NewDense(n, n, nil)
	for i := range n {
		for j := range n {
			R.Set(i, j, f.corr(src[i].Sub(src[j]).Norm()))
		}
	}
	var RB mat.Dense
	RB.Mul(R, B.T())
	out := make([]transform.Vec, n)
	for i := range n {
		brb, bdb := 0.0, 0.0
		for j := range n {
			b := B.At(i, j)
			brb += b * RB.At(j, i)
			bdb += b * b * kinds[j]
		}
		for k := range dim {
			out[i][k] = f.Amplitude[k] * math.Max(brb+f.Noise[k]*bdb, 0)
		}
	}
	return out, nil
}

// calibrationPrior is the weight, in landmarks, with which the pooled
// calibration of all the landmarks enters the calibration of the landmarks
// inside the hull and of those on it: a group of a handful of landmarks
// moves its factor only part of the way from the pooled one (a conjugate
// update of the variance scale with the pooled one as prior; Gelman et al.
// 2013, "Bayesian Data Analysis", 3rd ed., §2.6).
const calibrationPrior = 8

// calibrateField scales each axis's amplitude (field and noise together)
// so that the fitted model's leave-one-out errors have, on average, the
// variance the error model predicts for them: the restricted likelihood
// fixes the shape of the model (length, smoothness, the share of noise)
// and the landmarks' own leave-one-out errors its level, the quantity a
// cell's error follows (Rasmussen & Williams 2006, §5.4.2, the
// leave-one-out predictive criterion).
//
// The level is set twice: from the landmarks inside the hull of the others
// (for points inside the landmarks' hull) and from those on it, whose
// leave-one-out prediction is an extrapolation (for points outside: the
// model's growth of the variance beyond the landmarks is the part of its
// shape the landmarks check least), each shrunk towards the pooled level
// with calibrationPrior landmarks' weight. Each level is then widened by
// the small-sample factor of smallSampleFactor: it is itself estimated
// from a few dozen errors. It returns the calibrated model and the
// landmarks' leave-one-out variances under it.
func calibrateField(res *transform.Result, src []transform.Vec, w []float64, kinds []float64, f *FieldParams, dim int) (*FieldParams, []transform.Vec, error) {
	v, err := fittedLOOVariance(res, src, w, kinds, f, dim)
	if err != nil {
		return nil, nil, err
	}
	looSt := looStatus(src, dim)
	g := *f
	for k := range dim {
		var sum, n [2]float64 // inside, on the hull
		for i, e := range res.LOO {
			if v[i][k] > 0 {
				grp := 0
				if looSt[i] == string(status.Extrapolated) {
					grp = 1
				}
				sum[grp] += e[k] * e[k] / v[i][k]
				n[grp]++
			}
		}
		all := (sum[0] + sum[1]) / (n[0] + n[1])
		if n[0]+n[1] == 0 || !(all > 0) {
			continue
		}
		var c [2]float64
		for grp := range 2 {
			c[grp] = (sum[grp] + calibrationPrior*all) / (n[grp] + calibrationPrior)
			c[grp] *= smallSampleFactor(dim, n[grp]+calibrationPrior)
		}
		g.Amplitude[k] *= c[0]
		g.Outside[k] = c[1] / c[0]
		for i := range v {
			if looSt[i] == string(status.Extrapolated) {
				v[i][k] *= c[1]
			} else {
				v[i][k] *= c[0]
			}
		}
	}
	return &g, v, nil
}

// smallSampleFactor widens a variance scale estimated from about n squared
// errors so that a Gaussian 95 % radius with it holds 95 % of the
// predictive distribution: with the scale estimated on n degrees of
// freedom the standardised squared error over dim axes is dim·F(dim, n),
// not χ²_dim (the multivariate Student t of a prediction with an estimated
// scale), so the factor is dim·F₀.₉₅(dim, n)/χ²₀.₉₅(dim): 1.19 at n = 20,
// 1.06 at 60, 1.01 at 300.
func smallSampleFactor(dim int, n float64) float64 {
	if n < 2 {
		n = 2
	}
	d := float64(dim)
	return d * distuv.F{D1: d, D2: n}.Quantile(0.95) / distuv.ChiSquared{K: d}.Quantile(0.95)
}
