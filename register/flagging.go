package register

import (
	"fmt"
	"math"
	"sort"

	"gonum.org/v1/gonum/stat/distuv"

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
	var setAside []int
	for {
		keep := func(i int) bool { return !out.flagged[i] }
		idx := indices(n, keep)
		f, err := fitModel(p.subset(keep), model, pick(weights, idx), s)
		if err != nil {
			return nil, err
		}
		scores := studentise(f.res, p.Dim, s, p.subset(keep).Source, -1)
		threshold := studentisedThreshold(p.Dim, len(idx), n)
		worst, worstScore := -1, threshold
		for k, i := range idx {
			out.score[i] = scores[k]
			if scores[k] > worstScore && f.res.LOO[k].Norm() >= minFlagErrorUM {
				worst, worstScore = i, scores[k]
			}
		}
		if worst < 0 || len(setAside) >= limit {
			break
		}
		out.flagged[worst] = true
		setAside = append(setAside, worst)
	}
	// Try each set-aside landmark again against the clean set.
	for _, i := range setAside {
		keep := func(j int) bool { return j == i || !out.flagged[j] }
		idx := indices(n, keep)
		q := p.subset(keep)
		f, err := fitModel(q, model, pick(weights, idx), s)
		if err != nil {
			return nil, err
		}
		k := sort.SearchInts(idx, i)
		out.score[i] = studentise(f.res, p.Dim, s, q.Source, k)[k]
		if out.score[i] <= studentisedThreshold(p.Dim, len(idx), n) || f.res.LOO[k].Norm() < minFlagErrorUM {
			out.flagged[i] = false
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
		addPickNoise(&cov, s, res.Transform.Jacobian(src[i]), dim)
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
