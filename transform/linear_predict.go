package transform

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// The uncertainty of a fitted linear map, to first order in the noise.
//
// A least-squares fit moves its parameters by δθ = N⁻¹ Σ w_i G_iᵀ ε_i for
// target errors ε_i, where G_i is the Jacobian of the prediction at landmark
// i in the parameters and N = Σ w_i G_iᵀ G_i is the normal matrix; the
// prediction at p moves by G(p)·δθ. With target errors of covariance s·I/w_i
// the prediction's covariance is therefore s·G(p) N⁻¹ G(p)ᵀ, and pair i's
// block of the (weighted) hat matrix is H_ii = w_i G_i N⁻¹ G_iᵀ. This is the
// target registration error analysis of Fitzpatrick, West and Maurer (1998,
// IEEE Trans. Med. Imaging 17(5):694–702), here with weights and a scale.
//
// The parameters of a rigid motion or a similarity are taken as a small
// rotation ω of the target frame, the logarithm of the scale and the
// position of the fitted source centroid in the target: the prediction is
// y(p) = exp([ω]×)·e^λ·A·(p − c) + τ with q = A(p − c), so G(p) =
// [−[q]× | q | I]. The hat matrix does not depend on how the parameters are
// chosen, and this choice makes N block-diagonal: Σ w_i q_i = 0 at the
// weighted centroid c decouples τ from the rest, and q × q = 0 decouples the
// scale from the rotation. So N⁻¹ is the inverse of the inertia tensor
// J = Σ w_i (|q_i|²I − q_i q_iᵀ) of the landmarks, 1/Σ w_i|q_i|² and 1/Σ w_i,
// and the factor at p costs a few dozen flops.
//
// Weights are scaled to a mean of 1 throughout (unitMeanWeights), so the
// scale s is the noise variance of a landmark of average weight.

// LinearPredictor is the Predictor of a translation, rigid, similarity or
// affine fit. It holds only what it computed when built and is safe for
// concurrent use.
type LinearPredictor struct {
	model Kind
	dim   int
	// centre is the weighted centroid of the source landmarks, µm.
	centre Vec
	// a is the fitted linear part, c·R for a rigid motion or similarity.
	a Mat
	// invWeight is 1/Σw = 1/N: the translation's share of the factor.
	invWeight float64
	// axes, for an affine map, has rows v_k/σ_k from the SVD of the
	// weighted centred source landmarks, so that |axes·(p − c)|² is
	// (p − c)ᵀ(Σ w (x−c)(x−c)ᵀ)⁻¹(p − c). For a 3-D rigid motion or
	// similarity its rows are e_k/√λ_k, the principal axes of J in the
	// target frame over the square roots of its eigenvalues, so that
	// J⁻¹ = Σ_k axes_k axes_kᵀ.
	axes Mat
	// invTurn is 1/Σ w|q|², the variance factor of the angle of a 2-D
	// rigid motion or similarity.
	invTurn float64
	// invScale is 1/Σ w|q|², the variance factor of the log scale of a
	// similarity; 0 for the other models.
	invScale float64
	// w are the weights of the landmarks, of mean 1, and q their centred
	// source positions mapped by a (rigid motion and similarity only).
	w []float64
	q []Vec
}

// unitMeanWeights returns the weights scaled to a mean of 1, or all ones for
// nil weights. Every variance factor of the linear models uses this scaling.
func unitMeanWeights(weights []float64, n int) []float64 {
	w := make([]float64, n)
	if weights == nil {
		for i := range w {
			w[i] = 1
		}
		return w
	}
	total := 0.0
	for _, v := range weights {
		total += v
	}
	for i, v := range weights {
		w[i] = v * float64(n) / total
	}
	return w
}

// newLinearPredictor builds the predictor of l from the source landmarks
// and the weights it was fitted with.
func newLinearPredictor(l *Linear, src []Vec, weights []float64) (*LinearPredictor, error) {
	if err := l.validate(); err != nil {
		return nil, err
	}
	dim, n := l.D, len(src)
	if need := MinPairs(l.Model, dim); n < need {
		return nil, fmt.Errorf("uncertainty of a %s map in %d-D needs at least %d source landmarks, have %d", l.Model, dim, need, n)
	}
	if weights != nil && len(weights) != n {
		return nil, fmt.Errorf("%d weights for %d source landmarks", len(weights), n)
	}
	for i, p := range src {
		if !p.IsFinite() {
			return nil, fmt.Errorf("source landmark %d has a coordinate that is not a finite number", i)
		}
		if dim == 2 && p[2] != 0 {
			return nil, fmt.Errorf("source landmark %d has a z coordinate in a 2-D map", i)
		}
		if weights != nil && (!(weights[i] > 0) || math.IsInf(weights[i], 0)) {
			return nil, fmt.Errorf("landmark %d has weight %v: want a positive finite number", i, weights[i])
		}
	}
	lp := &LinearPredictor{
		model:     l.Model,
		dim:       dim,
		a:         l.A,
		invWeight: 1 / float64(n),
		w:         unitMeanWeights(weights, n),
	}
	share := make([]float64, n)
	for i, w := range lp.w {
		share[i] = w / float64(n)
	}
	lp.centre = centroid(src, share)
	if l.Model == Translation {
		return lp, nil
	}

	// Principal axes v_k and RMS extents σ_k/√N of the source landmarks.
	xw := mat.NewDense(n, dim, nil)
	for i, p := range src {
		s := math.Sqrt(lp.w[i])
		for k := range dim {
			xw.Set(i, k, s*(p[k]-lp.centre[k]))
		}
	}
	var svd mat.SVD
	if !svd.Factorize(xw, mat.SVDThin) {
		return nil, errors.New("singular value decomposition of the source landmarks failed")
	}
	sv := svd.Values(nil)
	var v mat.Dense
	svd.VTo(&v)
	if rms := sv[0] / math.Sqrt(float64(n)); rms <= coincideTol*(lp.centre.Norm()+rms) {
		return nil, fmt.Errorf("all source landmarks coincide (RMS spread %.3g µm): the %s map's uncertainty is undetermined", rms, l.Model)
	}

	if l.Model == Affine {
		if sv[dim-1] <= flatTol*sv[0] {
			return nil, fmt.Errorf("source landmarks lie on a %s: the affine map's uncertainty off it is unbounded", flatShape(dim))
		}
		for k := range dim {
			for j := range dim {
				lp.axes[k][j] = v.At(j, k) / sv[k]
			}
		}
		return lp, nil
	}

	// Rigid motion or similarity: the principal axes e_k = A·v_k/|A·v_k|
	// of q = A(x − c), with extents |A·v_k|·σ_k.
	var e [3]Vec
	var sq [3]float64 // σ_k² of q
	for k := range dim {
		var vk Vec
		for j := range dim {
			vk[j] = v.At(j, k)
		}
		u := l.A.MulVec(vk)
		norm := u.Norm()
		e[k] = u.Scale(1 / norm)
		sq[k] = norm * norm * sv[k] * sv[k]
	}
	total := 0.0
	for k := range dim {
		total += sq[k]
	}
	if l.Model == Similarity {
		lp.invScale = 1 / total
	}
	if dim == 2 {
		lp.invTurn = 1 / total
	} else {
		if sv[1] <= flatTol*sv[0] {
			return nil, fmt.Errorf("source landmarks lie on a line: the %s map's rotation about it is undetermined", l.Model)
		}
		for k := range 3 {
			// J's eigenvalue on axis k is the spread away from that
			// axis, summed without the cancellation of total − σ_k².
			lambda := 0.0
			for j := range 3 {
				if j != k {
					lambda += sq[j]
				}
			}
			lp.axes[k] = e[k].Scale(1 / math.Sqrt(lambda))
		}
	}
	lp.q = make([]Vec, n)
	for i, p := range src {
		lp.q[i] = l.A.MulVec(p.Sub(lp.centre))
	}
	return lp, nil
}

// Factor is F(p) = G(p) N⁻¹ G(p)ᵀ: s·F(p) is the covariance (µm²) of the
// predicted target position at p for target errors of variance s/w_i on
// every axis. For a translation it is I/N, for an affine map
// (1/N + (p−c)ᵀ(Σ w (x−c)(x−c)ᵀ)⁻¹(p−c))·I, and for a rigid motion or a
// similarity I/N + [q]× J⁻¹ [q]×ᵀ (+ q qᵀ/Σ w|q_i|²) with q = A(p − c).
// In 2-D the z row and column are zero: the prediction's z is exactly 0.
//
// The scaled form diag(√s)·F·diag(√s) of the Predictor interface is exact
// for a translation and an affine map with any per-axis s, and for a rigid
// motion or similarity with the same s on every axis. Where the axes differ
// (z worse than x and y, say), a rotation mixes the axes' errors and only
// Covariance gives the first-order covariance.
func (lp *LinearPredictor) Factor(p Vec) Mat {
	x := p.Sub(lp.centre)
	if lp.dim == 2 {
		x[2] = 0
	}
	var f Mat
	iso := lp.invWeight
	switch lp.model {
	case Affine:
		u := lp.axes.MulVec(x)
		iso += u.Dot(u)
	case Rigid, Similarity:
		q := lp.a.MulVec(x)
		if lp.dim == 2 {
			q[2] = 0
			addOuter(&f, Vec{-q[1], q[0]}, lp.invTurn)
		} else {
			for k := range 3 {
				addOuter(&f, cross(q, lp.axes[k]), 1)
			}
		}
		if lp.invScale != 0 {
			addOuter(&f, q, lp.invScale)
		}
		f[1][0], f[2][0], f[2][1] = f[0][1], f[0][2], f[1][2]
	}
	for k := range lp.dim {
		f[k][k] += iso
	}
	return f
}

// addOuter adds c·u uᵀ to the upper triangle of f; Factor copies it to the
// lower one, so that F is exactly symmetric.
func addOuter(f *Mat, u Vec, c float64) {
	for i := range 3 {
		cu := c * u[i]
		for j := i; j < 3; j++ {
			f[i][j] += cu * u[j]
		}
	}
}

func cross(a, b Vec) Vec {
	return Vec{a[1]*b[2] - a[2]*b[1], a[2]*b[0] - a[0]*b[2], a[0]*b[1] - a[1]*b[0]}
}

// looFactors returns Result.LOOFactor for the landmarks the predictor was
// built from, in the same order: Var(LOO_ik) = s_k/(w_i(1 − h_ii)).
//
// For a translation and an affine map the hat-matrix block H_ii = w_i F(x_i)
// is h_ii·I and the covariance of the deleted residual, s(I − H_ii)⁻¹/w_i,
// is exact. A rigid motion or similarity has a 3×3 block that is not a
// multiple of I; h_ii is then the one leverage whose 1/(1 − h_ii) is the mean
// over the axes of the diagonal of (I − H_ii)⁻¹, so that E|LOO_i|² = dim·s·
// LOOFactor[i] holds to first order for noise of variance s on every axis.
func (lp *LinearPredictor) looFactors(src []Vec) ([]float64, error) {
	out := make([]float64, len(src))
	for i, p := range src {
		w := lp.w[i]
		f := lp.Factor(p)
		switch lp.model {
		case Translation, Affine:
			h := w * f[0][0]
			if 1-h <= leverageTol {
				return nil, fmt.Errorf("leave-one-out variance of pair %d is undefined: it alone fixes a direction of the map (leverage %.12f)", i, h)
			}
			out[i] = 1 / (w * (1 - h))
		default:
			m := Identity()
			for r := range lp.dim {
				for c := range lp.dim {
					m[r][c] -= w * f[r][c]
				}
			}
			inv, ok := m.Inverse()
			tr := trace(inv) - float64(3-lp.dim) // the 2-D z place is 1
			if !ok || tr*leverageTol >= 1 {
				return nil, fmt.Errorf("leave-one-out variance of pair %d is undefined: it alone fixes a direction of the map", i)
			}
			out[i] = tr / (float64(lp.dim) * w)
		}
	}
	return out, nil
}

// PredictionCovariance is the first-order covariance of a linear fit's
// predictions for one model of the target errors, which may differ between
// the axes and be correlated. It is safe for concurrent use.
type PredictionCovariance struct {
	lp *LinearPredictor
	// noise is the error covariance of a landmark of weight 1 (µm²),
	// used as it is by the models whose Factor is a multiple of I.
	noise Mat
	// param is the covariance N⁻¹ B N⁻¹ of the linearised parameters of a
	// rigid motion or similarity, B = Σ w_i G_iᵀ noise G_i.
	param [maxParams][maxParams]float64
}

// maxParams is the number of linearised parameters of a 3-D similarity.
const maxParams = 7

// Covariance returns the covariance of the predictions when the target
// position of landmark i has error covariance noise/w_i (µm², weights of
// mean 1). With noise = s·I it is s·Factor; with a diagonal noise it is
// diag(√s)·Factor·diag(√s) for a translation or an affine map, but not for
// a rigid motion or a similarity, whose rotation carries the error of one
// axis into another. In 2-D only the upper-left 2×2 block of noise is read.
// Building it costs O(N); each At a few hundred flops.
func (lp *LinearPredictor) Covariance(noise Mat) (*PredictionCovariance, error) {
	var sym Mat
	for i := range lp.dim {
		for j := range lp.dim {
			a, b := noise[i][j], noise[j][i]
			if !finite(a) {
				return nil, fmt.Errorf("noise covariance entry (%d,%d) is %v µm²", i, j, a)
			}
			if math.Abs(a-b) > 1e-12*(math.Abs(a)+math.Abs(b)) {
				return nil, fmt.Errorf("noise covariance is not symmetric: entries (%d,%d) and (%d,%d) are %g and %g µm²", i, j, j, i, a, b)
			}
			sym[i][j] = (a + b) / 2
		}
		if sym[i][i] < 0 {
			return nil, fmt.Errorf("noise covariance has variance %g µm² on axis %d: want ≥ 0", sym[i][i], i)
		}
	}
	pc := &PredictionCovariance{lp: lp, noise: sym}
	if lp.model == Translation || lp.model == Affine {
		return pc, nil
	}
	np := lp.params()
	var b [maxParams][maxParams]float64
	for i, q := range lp.q {
		g := lp.design(q)
		// ng = noise·g, then b += w gᵀ ng.
		var ng [3][maxParams]float64
		for k := range lp.dim {
			for c := range np {
				for l := range lp.dim {
					ng[k][c] += sym[k][l] * g[l][c]
				}
			}
		}
		for r := range np {
			for c := range np {
				s := 0.0
				for k := range lp.dim {
					s += g[k][r] * ng[k][c]
				}
				b[r][c] += lp.w[i] * s
			}
		}
	}
	ninv := lp.normalInverse()
	var t [maxParams][maxParams]float64
	for r := range np {
		for c := range np {
			for k := range np {
				t[r][c] += ninv[r][k] * b[k][c]
			}
		}
	}
	for r := range np {
		for c := range np {
			for k := range np {
				pc.param[r][c] += t[r][k] * ninv[k][c]
			}
		}
	}
	return pc, nil
}

// At is the covariance (µm²) of the predicted target position at p, as an
// estimate of the true map there.
func (pc *PredictionCovariance) At(p Vec) Mat {
	lp := pc.lp
	var out Mat
	if lp.model == Translation || lp.model == Affine {
		f := lp.Factor(p)[0][0]
		for i := range lp.dim {
			for j := range lp.dim {
				out[i][j] = f * pc.noise[i][j]
			}
		}
		return out
	}
	x := p.Sub(lp.centre)
	if lp.dim == 2 {
		x[2] = 0
	}
	g := lp.design(lp.a.MulVec(x))
	np := lp.params()
	var gp [3][maxParams]float64
	for k := range lp.dim {
		for c := range np {
			for r := range np {
				gp[k][c] += g[k][r] * pc.param[r][c]
			}
		}
	}
	for k := range lp.dim {
		for l := k; l < lp.dim; l++ {
			s := 0.0
			for c := range np {
				s += gp[k][c] * g[l][c]
			}
			out[k][l], out[l][k] = s, s
		}
	}
	return out
}

// params is the number of linearised parameters of a rigid motion or
// similarity: the rotation (3 in 3-D, 1 in 2-D), the scale, the offset.
func (lp *LinearPredictor) params() int {
	n := 1 + lp.dim // 2-D: angle and offset
	if lp.dim == 3 {
		n = 3 + 3
	}
	if lp.model == Similarity {
		n++
	}
	return n
}

// design is G for the centred mapped source position q: the columns are
// the rotation (ω, or the 2-D angle), the log scale (similarity only) and
// the offset τ.
func (lp *LinearPredictor) design(q Vec) [3][maxParams]float64 {
	var g [3][maxParams]float64
	c := 0
	if lp.dim == 3 {
		// −[q]×: the motion ω × q of the point under a small rotation ω.
		g[0][1], g[0][2] = q[2], -q[1]
		g[1][0], g[1][2] = -q[2], q[0]
		g[2][0], g[2][1] = q[1], -q[0]
		c = 3
	} else {
		g[0][0], g[1][0] = -q[1], q[0]
		c = 1
	}
	if lp.model == Similarity {
		for k := range lp.dim {
			g[k][c] = q[k]
		}
		c++
	}
	for k := range lp.dim {
		g[k][c+k] = 1
	}
	return g
}

// normalInverse is N⁻¹ in the parameters of design, block-diagonal.
func (lp *LinearPredictor) normalInverse() [maxParams][maxParams]float64 {
	var n [maxParams][maxParams]float64
	c := 0
	if lp.dim == 3 {
		for k := range 3 {
			for r := range 3 {
				for s := range 3 {
					n[r][s] += lp.axes[k][r] * lp.axes[k][s]
				}
			}
		}
		c = 3
	} else {
		n[0][0] = lp.invTurn
		c = 1
	}
	if lp.model == Similarity {
		n[c][c] = lp.invScale
		c++
	}
	for k := range lp.dim {
		n[c+k][c+k] = lp.invWeight
	}
	return n
}
