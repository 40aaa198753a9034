package register

import (
	"ferry/internal/sample"
	"fmt"
	"math"

	"ferry/landmarks"
	"ferry/transform"
)

// kindWeights estimates the noise of each kind of landmark from the
// standardised scores of the unflagged ones and, where kinds differ by more
// than weightRatio, returns weights (mean 1) that are the inverse of each
// kind's noise. It returns nil when the kinds do not differ or too few of a
// kind are at hand.
func kindWeights(p *Problem, score []float64, flagged []bool) ([]float64, map[landmarks.Kind]float64) {
	byKind := map[landmarks.Kind][]float64{}
	var all []float64
	for i, k := range p.Kinds {
		if !flagged[i] {
			byKind[k] = append(byKind[k], score[i])
			all = append(all, score[i])
		}
	}
	if len(byKind) < 2 {
		return nil, nil
	}
	overall := sample.Median(all)
	noise := map[landmarks.Kind]float64{}
	lo, hi := math.Inf(1), 0.0
	for k, sc := range byKind {
		if len(sc) < minPerKind {
			return nil, nil
		}
		noise[k] = sample.Median(sc) / overall
		lo, hi = math.Min(lo, noise[k]), math.Max(hi, noise[k])
	}
	if !(hi > weightRatio*lo) {
		return nil, nil
	}
	w := make([]float64, p.Len())
	sum := 0.0
	for i, k := range p.Kinds {
		v, ok := noise[k]
		if !ok {
			v = 1
		}
		w[i] = 1 / v
		sum += w[i]
	}
	for i := range w {
		w[i] *= float64(len(w)) / sum
	}
	return w, noise
}

// compareModels fits every model the set supports and scores it.
func compareModels(p *Problem, weights []float64, s Settings) []ModelScore {
	var scores []ModelScore
	for _, k := range transform.Kinds() {
		if err := enoughFor(p, k); err != nil {
			scores = append(scores, ModelScore{Model: k, Err: err})
			continue
		}
		f, err := fitModel(p, k, weights, s)
		if err != nil {
			scores = append(scores, ModelScore{Model: k, Err: err})
			continue
		}
		scores = append(scores, score(f))
	}
	return scores
}

// score summarises a fit's leave-one-out errors.
func score(f *fitted) ModelScore {
	var sq, e []float64
	for _, r := range f.res.LOO {
		sq = append(sq, r.Dot(r))
		e = append(e, r.Norm())
	}
	mean, se := meanStdErr(sq)
	return ModelScore{
		Model: f.kind, Smoothing: f.smoothing, RMS: math.Sqrt(mean), Median: sample.Median(e),
		Max: maxOf(e), MeanSquare: mean, StdErr: se, Mirrored: f.res.Mirrored,
		sq: sq,
	}
}

// chooseModel takes the simplest model whose mean squared leave-one-out
// error exceeds the best model's by no more than one standard error of their
// paired difference (the one-standard-error rule; Breiman, Friedman, Olshen
// & Stone 1984, "Classification and Regression Trees", §3.4.3). The pairing
// matters: two models are judged on the same landmarks, so the difference
// varies far less than either error alone.
func chooseModel(models []ModelScore) (transform.Kind, string) {
	best := -1
	for i, m := range models {
		if m.Err == nil && (best < 0 || m.MeanSquare < models[best].MeanSquare) {
			best = i
		}
	}
	if best < 0 {
		return "", ""
	}
	for i, m := range models {
		if m.Err != nil {
			continue
		}
		if i == best {
			break
		}
		diff := make([]float64, len(m.sq))
		for j := range diff {
			diff[j] = m.sq[j] - models[best].sq[j]
		}
		mean, se := meanStdErr(diff)
		if mean <= se {
			return m.Model, fmt.Sprintf("RMS %.2f µm: the simplest model within one standard error of the best, %s (RMS %.2f µm)",
				m.RMS, models[best].Model, models[best].RMS)
		}
	}
	b := models[best]
	reason := fmt.Sprintf("RMS %.2f µm: the lowest leave-one-out error", b.RMS)
	for i := best - 1; i >= 0; i-- {
		if models[i].Err == nil {
			reason += fmt.Sprintf("; the next simpler model, %s (RMS %.2f µm), is worse by more than one standard error", models[i].Model, models[i].RMS)
			break
		}
	}
	return b.Model, reason
}

// axisScale estimates the per-axis scale as the mean standardised square of
// a fit's leave-one-out errors: the efficient estimate, for a fit to the
// landmarks that passed the check.
func axisScale(res *transform.Result, dim int) transform.Vec {
	s := axisSums(res, dim)
	for k := range dim {
		s[k] /= float64(max(len(res.LOO), 1))
	}
	return floorScale(s, dim)
}

// floorScale keeps a scale from being exactly zero (a perfect fit of exact
// synthetic data), which would make every standardised error infinite.
func floorScale(s transform.Vec, dim int) transform.Vec {
	m := 0.0
	for k := range dim {
		m = math.Max(m, s[k])
	}
	floor := math.Max(m*1e-12, 1e-24)
	for k := range dim {
		s[k] = math.Max(s[k], floor)
	}
	return s
}

// looCovariance is the predicted covariance of a leave-one-out error.
func looCovariance(scale transform.Vec, factor float64, dim int) transform.Mat {
	var c transform.Mat
	for k := range dim {
		c[k][k] = scale[k] * factor
	}
	return c
}

// standardised is rᵀC⁻¹r for a diagonal C.
func standardised(r transform.Vec, c transform.Mat, dim int) float64 {
	s := 0.0
	for k := range dim {
		if c[k][k] > 0 {
			s += r[k] * r[k] / c[k][k]
		}
	}
	return s
}

func indices(n int, keep func(int) bool) []int {
	var idx []int
	for i := range n {
		if keep(i) {
			idx = append(idx, i)
		}
	}
	return idx
}

func pick(v []float64, idx []int) []float64 {
	out := make([]float64, len(idx))
	for k, i := range idx {
		out[k] = v[i]
	}
	return out
}

func maxOf(v []float64) float64 {
	m := 0.0
	for _, x := range v {
		m = math.Max(m, x)
	}
	return m
}

func meanStdErr(v []float64) (mean, se float64) {
	if len(v) == 0 {
		return math.NaN(), math.NaN()
	}
	for _, x := range v {
		mean += x
	}
	mean /= float64(len(v))
	if len(v) < 2 {
		return mean, math.Inf(1)
	}
	ss := 0.0
	for _, x := range v {
		ss += (x - mean) * (x - mean)
	}
	return mean, math.Sqrt(ss / float64(len(v)-1) / float64(len(v)))
}
