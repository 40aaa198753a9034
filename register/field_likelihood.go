package register

import (
	"math"

	"ferry/transform"
)

// logLik is the restricted log-likelihood of axis k at noise λ, and ŝ.
func (b *fieldBasis) logLik(k int, lambda float64) (float64, float64) {
	q, logdet := b.ps.QuadForm(b.c[k], lambda), 0.0
	for _, mu := range b.mu {
		logdet += math.Log(mu + lambda)
	}
	dof := float64(b.n - b.m)
	s := q / dof
	if !(s > 0) {
		s = 1e-300
	}
	return -0.5 * (dof*math.Log(s) + logdet + dof), s
}

// fieldLambdas is the grid of λ: from nearly exact interpolation to nearly
// all noise, eight steps a decade.
func fieldLambdas() []float64 {
	var out []float64
	for e := -48; e <= 24; e++ {
		out = append(out, math.Pow(10, float64(e)/8))
	}
	return out
}

// bestLambda maximises axis k's likelihood over the grid.
func (b *fieldBasis) bestLambda(k int) (lambda, s, ll float64) {
	ll = math.Inf(-1)
	for _, l := range fieldLambdas() {
		v, sc := b.logLik(k, l)
		if v > ll {
			lambda, s, ll = l, sc, v
		}
	}
	return lambda, s, ll
}

// averagedNoise is axis k's field variance s and noise variance s·λ
// averaged over λ with weights proportional to the restricted likelihood
// (a flat prior on log λ over the grid of fieldLambdas): the model's
// variances are linear in s and s·λ, so the averaged pair gives the
// variances averaged over λ's posterior (Rasmussen & Williams 2006, §5.2,
// the marginal over a hyperparameter). With a few dozen landmarks the
// likelihood hardly tells a rough field from picking noise, and the value
// at its peak may put all of one in the other: a noise of 0 then leaves a
// cell's own picking error out of its radius.
func (b *fieldBasis) averagedNoise(k int) (s, sLambda float64) {
	lambdas := fieldLambdas()
	lls := make([]float64, len(lambdas))
	scales := make([]float64, len(lambdas))
	top := math.Inf(-1)
	for i, l := range lambdas {
		lls[i], scales[i] = b.logLik(k, l)
		top = math.Max(top, lls[i])
	}
	sum := 0.0
	for i, l := range lambdas {
		w := math.Exp(lls[i] - top)
		sum += w
		s += w * scales[i]
		sLambda += w * scales[i] * l
	}
	return s / sum, sLambda / sum
}

// evaluate fits every axis's λ and s on the basis and returns the total
// restricted log-likelihood.
func (b *fieldBasis) evaluate(dim int) (lambda, s transform.Vec, ll float64) {
	ll = float64(dim) * b.logCorr
	for k := range dim {
		l, sc, v := b.bestLambda(k)
		lambda[k], s[k] = l, sc
		ll += v
	}
	return lambda, s, ll
}

// fieldCriterion says how fitField chooses the smoothness, length and kind
// noises; each axis's noise λ_k is always the restricted likelihood's.
type fieldCriterion int

const (
	// byREML takes the restricted likelihood: the whole spectrum of the
	// landmarks' contrasts, the most efficient for the flags' scores.
	byREML fieldCriterion = iota
	// byLOO takes the leave-one-out log predictive density: the models
	// compared at distances of the landmark spacing, where the map's
	// cells lie, which is what their radii need.
	byLOO
)

// looLogDensity is Σ_i Σ_k log N(e_ik; 0, v_ik) of the model's
// leave-one-out predictions (Rasmussen & Williams 2006, §5.4.2).
func (b *fieldBasis) looLogDensity(dim int, lambda, s transform.Vec) float64 {
	loo, vars, _ := b.leaveOneOut(dim, lambda, s)
	ll := 0.0
	for i := range loo {
		for k := range dim {
			if vars[i][k] > 0 {
				ll -= 0.5 * (math.Log(vars[i][k]) + loo[i][k]*loo[i][k]/vars[i][k])
			}
		}
	}
	return ll
}
