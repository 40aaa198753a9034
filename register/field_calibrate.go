package register

import (
	"errors"
	"math"

	"gonum.org/v1/gonum/mat"

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

// calibrateField scales each axis's amplitude (field and noise together)
// so that the fitted model's leave-one-out errors have, on average, the
// variance the error model predicts for them: the restricted likelihood
// fixes the shape of the model (length, smoothness, the share of noise)
// and the landmarks' own leave-one-out errors its level, the quantity a
// cell's error follows (Rasmussen & Williams 2006, §5.4.2, the
// leave-one-out predictive criterion). It returns the calibrated model and
// the landmarks' leave-one-out variances under it.
func calibrateField(res *transform.Result, src []transform.Vec, w []float64, kinds []float64, f *FieldParams, dim int) (*FieldParams, []transform.Vec, error) {
	v, err := fittedLOOVariance(res, src, w, kinds, f, dim)
	if err != nil {
		return nil, nil, err
	}
	g := *f
	for k := range dim {
		sum, n := 0.0, 0
		for i, e := range res.LOO {
			if v[i][k] > 0 {
				sum += e[k] * e[k] / v[i][k]
				n++
			}
		}
		if n == 0 || !(sum > 0) {
			continue
		}
		c := sum / float64(n)
		g.Amplitude[k] *= c
		for i := range v {
			v[i][k] *= c
		}
	}
	return &g, v, nil
}
