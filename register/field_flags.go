package register

import (
	"math"
	"sort"

	"ferry/landmarks"
	"ferry/transform"
)

// useField reports whether the check judges the landmarks with the fitted
// error model of field.go: for the automatic choice, the affine model and
// the spline, when the set is large enough to estimate the field's length
// and amplitude, and when the user did not state the picking noise (which
// the older per-axis scale then floors).
func useField(p *Problem, s Settings) bool {
	switch s.Model {
	case "", transform.Affine, transform.TPS:
	default:
		return false
	}
	return s.SourceSD == nil && s.TargetSD == nil && p.Len() >= fieldMinLandmarks && p.Len() <= fieldMaxLandmarks
}

// flagByField finds the landmarks that look wrong against the error model:
// each landmark's leave-one-out error is judged against its predictive
// distribution under the fitted field (mean and variance from all the
// other landmarks), externally studentised. A bend of the tissue moves a
// landmark's neighbours the same way, and the field, whose correlation
// length is estimated from the landmarks, carries it into the prediction;
// an isolated jump is not shared and stands out. While the worst score
// exceeds the Bonferroni threshold of studentisedThreshold, that landmark
// is set aside and the field's noise and amplitude re-estimated (its
// length, smoothness and kind noises are re-estimated once no landmark is
// left above the threshold, and the search repeated); last, every
// set-aside landmark is predicted from the clean set alone and cleared
// when it fits after all. It returns the verdicts and the field fitted to
// the clean set.
func flagByField(p *Problem, radii *RadiusTable) (*flagResult, *fieldFit, error) {
	n, dim := p.Len(), p.Dim
	out := &flagResult{
		flagged: make([]bool, n), reason: make([]string, n), score: make([]float64, n),
		loo: map[int]transform.Vec{}, r95: map[int]float64{},
	}
	limit := min(int(maxFlagShare*float64(n)), n-fieldMinLandmarks)
	out.limit = limit
	// The field's length, smoothness and kind noises from the landmarks
	// that fit well enough (a trimmed likelihood: a wrong landmark would
	// otherwise pass for noise of its kind and hide).
	params, err := trimmedField(p, limit)
	if err != nil {
		return nil, nil, err
	}
	var setAside []int
	var last *fieldFit
	for {
		keep := func(i int) bool { return !out.flagged[i] }
		idx := indices(n, keep)
		q := p.subset(keep)
		f, err := fitField(dim, q.Source, q.Target, q.Kinds, params, byREML)
		if err != nil {
			return nil, nil, err
		}
		last = f
		threshold := studentisedThreshold(dim, f.dof, n)
		worst, worstScore := -1, threshold
		for k, i := range idx {
			out.score[i] = f.score[k]
			if f.score[k] > worstScore && f.loo[k].Norm() >= minFlagErrorUM {
				worst, worstScore = i, f.score[k]
			}
		}
		if worst < 0 || len(setAside) >= limit {
			break
		}
		out.flagged[worst] = true
		setAside = append(setAside, worst)
	}
	// The model of the clean set, all its parameters estimated again when
	// landmarks were set aside (else the trimmed estimate stands).
	keep := func(i int) bool { return !out.flagged[i] }
	q := p.subset(keep)
	fit := last
	if len(setAside) > 0 {
		if fit, err = fitField(dim, q.Source, q.Target, q.Kinds, nil, byREML); err != nil {
			return nil, nil, err
		}
	}
	// Each set-aside landmark against the clean set.
	sort.Ints(setAside)
	cleared := false
	for _, i := range setAside {
		keep := func(j int) bool { return j == i || !out.flagged[j] }
		idx := indices(n, keep)
		q := p.subset(keep)
		f, err := fitField(dim, q.Source, q.Target, q.Kinds, &fit.params, byREML)
		if err != nil {
			return nil, nil, err
		}
		k := sort.SearchInts(idx, i)
		out.score[i] = f.score[k]
		if out.score[i] <= studentisedThreshold(dim, f.dof, n) || f.loo[k].Norm() < minFlagErrorUM {
			cleared = true
			continue
		}
		cov := diagonal(f.looVar[k], dim)
		out.loo[i], out.r95[i] = f.loo[k], radii.Radius(cov)
		out.reason[i] = flagReason(f.loo[k], cov, out.r95[i], dim)
	}
	if cleared {
		// A landmark cleared after all rejoins the clean set.
		for _, i := range setAside {
			out.flagged[i] = out.reason[i] != ""
		}
		q := p.subset(keep)
		if fit, err = fitField(dim, q.Source, q.Target, q.Kinds, nil, byREML); err != nil {
			return nil, nil, err
		}
	}
	for k, i := range indices(n, keep) {
		out.score[i] = fit.score[k]
	}
	return out, fit, nil
}

// minFlagErrorUM is the smallest leave-one-out error (µm) for which a
// landmark is called wrong, whatever its score: half a soma's diameter. A
// wrong correspondence pairs two distinct structures, somata or vessel
// branch points, which lie farther apart than that; a smaller error that
// the model finds improbable is where the warp is rougher than the model
// expects (the noise-free families flagged landmarks 2–3 µm off), and it
// moves no cell to another's place.
const minFlagErrorUM = SomaDiameterUM / 2

// trimmedCut is the per-landmark score above which a landmark is left out
// of the estimation of the field's length, smoothness and kind noises: the
// 99 % point of χ² with 3 degrees of freedom (11.34; Abramowitz & Stegun
// 1964, table 26.8), so that a good landmark is left out only now and then
// while a wrong one, which would pass for noise of its kind, is.
const trimmedCut = 11.34

// trimmedField estimates the field's parameters from the landmarks whose
// scores under a first fit stay below trimmedCut (at most limit left
// out), twice over.
func trimmedField(p *Problem, limit int) (*FieldParams, error) {
	out := make([]bool, p.Len())
	var params *FieldParams
	for range 2 {
		keep := func(i int) bool { return !out[i] }
		idx := indices(p.Len(), keep)
		q := p.subset(keep)
		f, err := fitField(p.Dim, q.Source, q.Target, q.Kinds, nil, byREML)
		if err != nil {
			return nil, err
		}
		params = &f.params
		type scored struct {
			i int
			s float64
		}
		var high []scored
		for k, i := range idx {
			if f.score[k] > trimmedCut*float64(p.Dim)/3 {
				high = append(high, scored{i, f.score[k]})
			}
		}
		if len(high) == 0 {
			break
		}
		sort.Slice(high, func(a, b int) bool { return high[a].s > high[b].s })
		left := limit
		for _, o := range out {
			if o {
				left--
			}
		}
		for _, h := range high[:min(len(high), max(left, 0))] {
			out[h.i] = true
		}
	}
	return params, nil
}

// diagonal is the diagonal matrix of v's first dim entries.
func diagonal(v transform.Vec, dim int) transform.Mat {
	var c transform.Mat
	for k := range dim {
		c[k][k] = v[k]
	}
	return c
}

// fieldWeights turns the field's kind noises into pair weights (the inverse
// noise, mean 1) when the kinds differ by more than weightRatio, with each
// kind's noise relative to the set's mean; nil otherwise.
func fieldWeights(p *Problem, f *FieldParams) ([]float64, map[landmarks.Kind]float64) {
	lo, hi := math.Inf(1), 0.0
	for _, d := range f.Kinds {
		lo, hi = math.Min(lo, d), math.Max(hi, d)
	}
	if !(hi > weightRatio*lo) {
		return nil, nil
	}
	w := make([]float64, p.Len())
	sum, mean := 0.0, 0.0
	for i, k := range p.Kinds {
		d := f.kindNoise(k)
		w[i] = 1 / d
		sum += w[i]
		mean += d
	}
	mean /= float64(p.Len())
	for i := range w {
		w[i] *= float64(len(w)) / sum
	}
	noise := map[landmarks.Kind]float64{}
	for k, d := range f.Kinds {
		noise[k] = d / mean
	}
	return w, noise
}
