package register

import (
	"fmt"
	"math"
	"sort"

	"gonum.org/v1/gonum/stat/distuv"

	"ferry/internal/parallel"
	"ferry/progress"
	"ferry/transform"
)

// flagResult is the outcome of flagLandmarks.
type flagResult struct {
	flagged []bool
	reason  []string
	// score is each landmark's externally studentised score: in the clean
	// fit for an unflagged landmark, against the clean set for a flagged
	// one.
	score []float64
	// loo and r95 are the flagged landmarks' errors against the clean set
	// and their 95 % radii.
	loo map[int]transform.Vec
	r95 map[int]float64
	// limit is the most landmarks the check could set aside.
	limit int
}

// flagLandmarks finds the landmarks that look wrong by sequential deletion.
// Each landmark's leave-one-out error is standardised by its predicted
// covariance with the per-axis scale estimated from the other landmarks
// still in the set (external studentisation: Cook & Weisberg 1982,
// "Residuals and Influence in Regression", §2.2), so that a wrong landmark
// does not hide itself by inflating the scale. While the worst score
// exceeds the threshold of studentisedThreshold, that landmark is set aside
// and the rest refitted: a wrong landmark inflates its neighbours'
// leave-one-out errors, so they are only judged once it is gone, and a
// smaller mistake that the first one masked shows up after it. Last, every
// set-aside landmark is tried again alone against the clean set and cleared
// when it fits after all.
func flagLandmarks(p *Problem, model transform.Kind, weights []float64, s Settings, radii *RadiusTable) (*flagResult, error) {
	n := p.Len()
	out := &flagResult{
		flagged: make([]bool, n), reason: make([]string, n), score: make([]float64, n),
		loo: map[int]transform.Vec{}, r95: map[int]float64{},
	}
	limit := int(maxFlagShare * float64(n))
	if n-limit < transform.MinPairs(model, p.Dim)+3 {
		limit = max(0, n-transform.MinPairs(model, p.Dim)-3)
	}
	out.limit = limit
	sub := newSubsetFits(p, model, weights, s)
	var setAside []int
	for {
		keep := func(i int) bool { return !out.flagged[i] }
		idx := indices(n, keep)
		q := p.subset(keep)
		threshold := studentisedThreshold(p.Dim, len(idx), n)
		// While landmarks may still be set aside, the fit of this set
		// only decides which one, and the fast answer does when it can
		// tell (subsetFits); the last set's scores are the check's, from
		// the fit itself.
		var f *fitted
		var scores []float64
		worst, sure := -1, false
		if len(setAside) < limit {
			fast, rel, err := sub.fit(q, keep)
			if err != nil {
				return nil, err
			}
			if fast != nil {
				scores = studentise(fast.res, p.Dim, s, q.Source, -1)
				worst, sure = worstLandmark(idx, scores, fast.res.LOO, threshold, rel)
				sure = sure && worst >= 0
			}
		}
		if !sure {
			var err error
			if f, err = fitModel(q, model, pick(weights, idx), s); err != nil {
				return nil, err
			}
			scores = studentise(f.res, p.Dim, s, q.Source, -1)
			worst, _ = worstLandmark(idx, scores, f.res.LOO, threshold, 0)
		}
		for k, i := range idx {
			out.score[i] = scores[k]
		}
		if worst < 0 || len(setAside) >= limit {
			break
		}
		out.flagged[worst] = true
		setAside = append(setAside, worst)
	}
	// Try each set-aside landmark again against the clean set.
	hints := sub.prefetchRetries(model, out.flagged, setAside)
	for pos, i := range setAside {
		keep := func(j int) bool { return j == i || !out.flagged[j] }
		idx := indices(n, keep)
		q := p.subset(keep)
		// The search by the fast answers; the fit, whose numbers the
		// check reports, by fitModel at the S chosen.
		if _, _, err := sub.fit(q, keep); err != nil {
			return nil, err
		}
		f, err := fitModel(q, model, pick(weights, idx), s)
		if err != nil {
			return nil, err
		}
		k := sort.SearchInts(idx, i)
		out.score[i] = studentise(f.res, p.Dim, s, q.Source, k)[k]
		if out.score[i] <= studentisedThreshold(p.Dim, len(idx), n) || f.res.LOO[k].Norm() < minFlagErrorUM {
			out.flagged[i] = false
			if hints != nil {
				// The retries after this one try other sets than the
				// prefetched ones: their searches start where this
				// retry's search left off.
				s.fits.setSmoothingHint(hints[pos])
				hints = nil
			}
			continue
		}
		scale := externalScale(f.res, p.Dim, k)
		cov := looCovariance(scale, f.res.LOOFactor[k], p.Dim)
		addPickNoise(&cov, s, f.res.Transform.Jacobian(q.Source[k]), p.Dim)
		out.loo[i], out.r95[i] = f.res.LOO[k], radii.Radius(cov)
		out.reason[i] = flagReason(f.res.LOO[k], cov, out.r95[i], p.Dim)
	}
	return out, nil
}

// worstLandmark is the landmark of idx with the highest score above
// threshold whose leave-one-out error is at least minFlagErrorUM (the first
// of equal ones), −1 for none. With rel > 0 the scores and errors are fast
// answers within a relative error rel of the fit's (transform.SubsetLOO);
// sure is then false unless every comparison is decided beyond that error,
// so that a sure answer is the one the fit's numbers give.
func worstLandmark(idx []int, scores []float64, loo []transform.Vec, threshold, rel float64) (worst int, sure bool) {
	worst, worstScore := -1, threshold
	for k, i := range idx {
		if scores[k] > worstScore && loo[k].Norm() >= minFlagErrorUM {
			worst, worstScore = i, scores[k]
		}
	}
	if rel == 0 {
		return worst, true
	}
	// A score is a squared error over a factor and a scale, each within
	// about rel: within 8·rel of the fit's.
	tol := func(x float64) float64 { return 8 * rel * math.Abs(x) }
	top := -1
	for k, i := range idx {
		sc, e := scores[k], loo[k].Norm()
		if math.IsNaN(sc) || math.IsInf(sc, 0) || math.IsNaN(e) {
			return -1, false
		}
		if math.Abs(sc-threshold) <= tol(sc) || math.Abs(e-minFlagErrorUM) <= rel*e+1e-12 {
			return -1, false
		}
		if i == worst {
			top = k
		}
	}
	if top >= 0 {
		for k := range idx {
			if k != top && scores[k] > threshold && loo[k].Norm() >= minFlagErrorUM &&
				scores[top]-scores[k] <= tol(scores[top])+tol(scores[k]) {
				return -1, false
			}
		}
	}
	return worst, true
}

// studentise scores every landmark of a fit (only landmark only, when
// only ≥ 0): r_iᵀC_i⁻¹r_i with C_i the predicted covariance of its
// leave-one-out error, the scale estimated without it, raised to the stated
// picking noise.
func studentise(res *transform.Result, dim int, s Settings, src []transform.Vec, only int) []float64 {
	out := make([]float64, len(res.LOO))
	total := axisSums(res, dim)
	for i := range res.LOO {
		if only >= 0 && i != only {
			continue
		}
		scale := withoutOne(total, res, dim, i)
		cov := looCovariance(scale, res.LOOFactor[i], dim)
		if s.SourceSD != nil || s.TargetSD != nil {
			addPickNoise(&cov, s, res.Transform.Jacobian(src[i]), dim)
		}
		out[i] = standardised(res.LOO[i], cov, dim)
	}
	return out
}

// externalScale is the per-axis scale without landmark i.
func externalScale(res *transform.Result, dim, i int) transform.Vec {
	return withoutOne(axisSums(res, dim), res, dim, i)
}

// axisSums are the per-axis sums of standardised squares of a fit.
func axisSums(res *transform.Result, dim int) transform.Vec {
	var t transform.Vec
	for i, r := range res.LOO {
		for k := range dim {
			t[k] += r[k] * r[k] / res.LOOFactor[i]
		}
	}
	return t
}

// withoutOne turns the sums into the mean without landmark i.
func withoutOne(total transform.Vec, res *transform.Result, dim, i int) transform.Vec {
	var sc transform.Vec
	n := float64(max(len(res.LOO)-1, 1))
	for k := range dim {
		r := res.LOO[i][k]
		sc[k] = math.Max(total[k]-r*r/res.LOOFactor[i], 0) / n
	}
	return floorScale(sc, dim)
}

// studentisedThreshold is the score above which a landmark looks wrong:
// the 1 − familyAlpha/N quantile of an externally studentised score of d
// axes, each axis's scale resting on the m−1 other landmarks in the set (N
// is the size of the whole set, for the Bonferroni correction over every
// landmark tested). Each axis's term is then F(1, m−1)-distributed; their sum
// has no closed form, so it is matched in mean and variance by a scaled χ²
// (Satterthwaite 1946, Biometrics Bulletin 2(6):110–114), which is accurate
// in the upper tail for m above about ten. With many landmarks the threshold
// tends to the χ²_d quantile.
func studentisedThreshold(dim, m, n int) float64 {
	p := 1 - familyAlpha/float64(n)
	nu := float64(m - 1)
	if nu <= 4.5 {
		// Too few landmarks for the variance of F to exist: fall back to
		// the common-denominator bound d·F(d, ν), which is larger.
		return float64(dim) * distuv.F{D1: float64(dim), D2: math.Max(nu, 1)}.Quantile(p)
	}
	d := float64(dim)
	mean := d * nu / (nu - 2)
	variance := d * 2 * nu * nu * (nu - 1) / ((nu - 2) * (nu - 2) * (nu - 4))
	c := variance / (2 * mean)
	return c * distuv.ChiSquared{K: mean / c}.Quantile(p)
}

// flagReason says in a few words what is wrong and what it may be.
func flagReason(loo transform.Vec, cov transform.Mat, r95 float64, dim int) string {
	reason := fmt.Sprintf("off by %.1f µm where 95 %% stay within %.1f µm", loo.Norm(), r95)
	if dim == 3 && cov[2][2] > 0 {
		total := standardised(loo, cov, dim)
		zOnly := loo[2] * loo[2] / cov[2][2]
		// Mostly along z in the standardised error, or in micrometres:
		// the error model may know x and y so well that their few
		// micrometres weigh more than the section's tens.
		if zOnly > 0.8*total || loo[2]*loo[2] > 0.8*loo.Dot(loo) {
			return reason + "; mostly in z: a wrong section?"
		}
	}
	return reason + "; a wrong correspondence or a typo?"
}

// addPickNoise raises a leave-one-out covariance to at least the picking
// noise stated with --source-sd and --target-sd, carried into the target
// through the Jacobian: a check may not call a landmark wrong for an error
// smaller than the user says the picks have.
func addPickNoise(cov *transform.Mat, s Settings, jac transform.Mat, dim int) {
	noise := pickNoise(s, jac)
	for k := range dim {
		cov[k][k] = math.Max(cov[k][k], noise[k][k])
	}
}

// pickNoise is J·Σ_source·Jᵀ + Σ_target from the sd flags (zero without).
func pickNoise(s Settings, jac transform.Mat) transform.Mat {
	var c transform.Mat
	if s.SourceSD != nil {
		var d transform.Mat
		for k := range 3 {
			d[k][k] = s.SourceSD[k] * s.SourceSD[k]
		}
		c = jac.Mul(d).Mul(jac.T())
	}
	if s.TargetSD != nil {
		for k := range 3 {
			c[k][k] += s.TargetSD[k] * s.TargetSD[k]
		}
	}
	return c
}

// subsetFits serves the smoothing searches of the sequential deletion and
// of the retries, whose sets are p without a few landmarks, from one
// reduction of p's spline system (transform.SubsetPath): each search costs
// a few matrix–vector products a smoothing instead of a factorisation, and
// chooses the very S that chooseSmoothing chooses (chooseSmoothingWith).
// It serves a spline with automatic smoothing and equal weights, without
// stated picking errors (whose noise needs the fit's Jacobian), with the
// fit cache on; fit returns nothing otherwise and the check fits as before.
type subsetFits struct {
	p       *Problem
	weights []float64
	s       Settings
	on      bool
	path    *transform.SubsetPath
	tried   bool
}

// subsetMinLandmarks is the fewest landmarks for which the reduction pays:
// below it the searches are cheap anyway.
const subsetMinLandmarks = 100

func newSubsetFits(p *Problem, model transform.Kind, weights []float64, s Settings) *subsetFits {
	on := model == transform.TPS && s.Smoothing.Auto && s.SourceSD == nil && s.TargetSD == nil &&
		s.fits != nil && !s.fits.off && p.Len() >= subsetMinLandmarks
	for _, w := range weights {
		on = on && w == weights[0]
	}
	return &subsetFits{p: p, weights: weights, s: s, on: on}
}

// fit searches the smoothing of the subset q (keep of p) unless the cache
// knows it, and returns the fast answer at the S chosen as a fit without a
// transform (LOO and LOOFactor only) with its relative error, or nil when
// there is none (the subset's fit is then fitModel's).
func (sf *subsetFits) fit(q *Problem, keep func(int) bool) (*fitted, float64, error) {
	if !sf.on {
		return nil, 0, nil
	}
	idx := indices(sf.p.Len(), keep)
	w := pick(sf.weights, idx)
	if _, ok := sf.s.fits.chosen(transform.TPS, q, w, sf.s); ok {
		return nil, 0, nil
	}
	opt := transform.Options{Weights: w, Context: sf.s.ctx}
	if transform.CheckSmoothingPath(q.Dim, q.Source, q.Target, opt) != nil {
		return nil, 0, nil
	}
	if !sf.tried {
		sf.tried = true
		path, err := transform.NewSubsetPath(sf.p.Dim, sf.p.Source, sf.p.Target,
			transform.Options{Weights: sf.weights, Context: sf.s.ctx})
		if err == nil {
			sf.path = path
		}
	}
	if sf.path == nil {
		return nil, 0, nil
	}
	mask := make([]bool, sf.p.Len())
	for _, i := range idx {
		mask[i] = true
	}
	sm, ans, err := chooseSmoothingWith(q, w, sf.s, func(sms []float64) []transform.SubsetLOO {
		return sf.path.LeaveOneOut(mask, sms)
	})
	if err != nil {
		return nil, 0, err
	}
	sf.s.fits.put(transform.TPS, q, w, sf.s, &fitted{kind: transform.TPS, smoothing: sm})
	progress.Of(sf.s.Progress).Add(1)
	if ans == nil {
		return nil, 0, nil
	}
	res := &transform.Result{LOO: ans.LOO, LOOFactor: ans.Factor}
	return &fitted{kind: transform.TPS, smoothing: sm, res: res}, ans.RelErr, nil
}

// prefetchRetries makes the retries' fits before flagLandmarks asks for
// them: their smoothing searches one after the other, as the retries make
// them, then the fits at the S chosen side by side on the cores
// (internal/parallel), each of them the fit the retry would make, which the
// retries then find in the fit cache. The sets are those of retries that
// clear no landmark; once one is cleared, the later retries try other sets
// and search them afresh, from the search hint after the clearing retry's
// own search, which the result gives for each retry (grid index, −1 for
// none). It does nothing, and returns nil, when the subset path is off.
func (sf *subsetFits) prefetchRetries(model transform.Kind, flagged []bool, setAside []int) []int {
	if !sf.on || len(setAside) == 0 {
		return nil
	}
	n := sf.p.Len()
	type retry struct {
		q *Problem
		w []float64
	}
	retries := make([]retry, len(setAside))
	hints := make([]int, len(setAside))
	for r, i := range setAside {
		keep := func(j int) bool { return j == i || !flagged[j] }
		q := sf.p.subset(keep)
		if _, _, err := sf.fit(q, keep); err != nil {
			return nil
		}
		retries[r] = retry{q: q, w: pick(sf.weights, indices(n, keep))}
		hints[r] = -1
		if k, has := sf.s.fits.smoothingHint(); has {
			hints[r] = k
		}
	}
	parallel.Blocks(len(retries), 1, func() struct{} { return struct{}{} }, func(_ struct{}, lo, hi int) {
		for r := lo; r < hi; r++ {
			// An error is met again, in its order, by the retry itself.
			_, _ = fitModel(retries[r].q, model, retries[r].w, sf.s)
		}
	})
	return hints
}
