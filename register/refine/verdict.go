package refine

import (
	"fmt"
	"math"
	"sort"

	"gonum.org/v1/gonum/stat/distuv"

	"ferry/transform"
)

// finish fills the result from the last fit.
func (r *refiner) finish(res *Result, fit *fitState) {
	nl := r.in.Landmarks.Len()
	res.Transform, res.Smoothing, res.SmoothingZ = fit.transform, fit.smoothing[0], fit.smoothing[1]
	res.Nodes, res.Targets, res.Weights = fit.src, fit.dst, fit.weights
	res.Scale, res.Uncertainty, res.HeldOut = fit.scale, fit.uncertainty, fit.heldOut
	for _, e := range fit.loo[:nl] {
		res.LandmarkAfter = append(res.LandmarkAfter, e.Norm())
	}
	res.Pairs = fit.pairs
	for _, pr := range res.Pairs {
		res.PairCalibration.N++
		if pr.LOO.Norm() <= pr.R95 {
			res.PairCalibration.Inside++
		}
	}
	// The flagged landmarks are left out of the comparison: predicting a
	// wrong landmark worse is no fault.
	var before, after []float64
	for i, l := range r.a.Landmarks {
		if l.Flag == "" {
			before = append(before, res.LandmarkBefore[i])
			after = append(after, res.LandmarkAfter[i])
		}
	}
	res.Worse, res.WorseReason = worse(before, after)
	if !res.Worse {
		res.Worse, res.WorseReason = pairBias(res.Pairs, r.dim)
	}
}

// pairBiasUM is the mean offset (µm, along any axis) of the pairs'
// leave-one-out errors from which pairBias refuses, when it is also beyond
// pairBiasSEs standard errors of that mean.
const (
	pairBiasUM  = 1.0
	pairBiasSEs = 4.0
)

// pairBias refuses a refinement whose pairs disagree with the fit as a
// whole: their held-out errors (candidate minus the prediction without the
// pair) should scatter about zero; a common offset along an axis says the
// candidates are offset from the landmarks (two exports placed apart, a
// nucleus centre taken off its soma's) and the pairs were found at that
// offset rather than confirming the landmarks' map.
func pairBias(pairs []Pair, dim int) (bool, string) {
	var sum, sq transform.Vec
	n := 0
	for _, pr := range pairs {
		if !pr.Node {
			continue
		}
		n++
		for a := range dim {
			sum[a] += pr.LOO[a]
			sq[a] += pr.LOO[a] * pr.LOO[a]
		}
	}
	if n < minPairsForScale {
		return false, ""
	}
	var mean transform.Vec
	biased := false
	for a := range dim {
		mean[a] = sum[a] / float64(n)
		v := (sq[a] - float64(n)*mean[a]*mean[a]) / float64(n-1)
		se := math.Sqrt(math.Max(v, 0) / float64(n))
		if math.Abs(mean[a]) > pairBiasUM && math.Abs(mean[a]) > pairBiasSEs*se {
			biased = true
		}
	}
	if !biased {
		return false, ""
	}
	return true, fmt.Sprintf("the pairs fit the refined transform worse than noise allows: their leave-one-out errors are offset by (%.2f, %.2f, %.2f) µm on average over %d pairs, so the candidates sit apart from where the landmarks put the somata (a shift between the exports, or candidate centres off the somata's)",
		mean[0], mean[1], mean[2], n)
}

// worse compares the landmarks' leave-one-out errors before and after by
// the paired difference of their squares: the refinement is worse when the
// mean square grew by more than one standard error of that difference, the
// margin of the one-standard-error rule that chose the landmark model.
func worse(before, after []float64) (bool, string) {
	if len(before) != len(after) || len(before) == 0 {
		return false, ""
	}
	d := make([]float64, len(before))
	mean := 0.0
	for i := range d {
		d[i] = after[i]*after[i] - before[i]*before[i]
		mean += d[i]
	}
	mean /= float64(len(d))
	ss := 0.0
	for _, x := range d {
		ss += (x - mean) * (x - mean)
	}
	se := math.Inf(1)
	if len(d) > 1 {
		se = math.Sqrt(ss / float64(len(d)-1) / float64(len(d)))
	}
	if mean > 0 && mean > se {
		return true, fmt.Sprintf("the refined transform predicts the landmarks worse: leave-one-out RMS %.2f µm against %.2f µm from the landmarks alone (the mean squared error grew by %.2f µm², more than its standard error %.2f µm²)",
			rmsOf(after), rmsOf(before), mean, se)
	}
	// The mean square follows the few largest errors; a refinement that
	// pulls the map off the landmarks a little everywhere (nuclei offset
	// from the somata, say) shows instead as most landmarks predicted
	// worse. The sign test (Dixon & Mood 1946) asks whether more of them
	// grew than chance allows, one-sided at signTestLevel.
	grew, shrank := 0, 0
	for _, x := range d {
		switch {
		case x > 0:
			grew++
		case x < 0:
			shrank++
		}
	}
	if n := grew + shrank; n > 0 && grew > shrank {
		p := distuv.Binomial{N: float64(n), P: 0.5}.Survival(float64(grew - 1))
		if p < signTestLevel {
			sort.Float64s(before)
			sort.Float64s(after)
			return true, fmt.Sprintf("the refined transform predicts the landmarks worse: %d of %d landmarks are predicted worse (sign test p = %.2g), median leave-one-out error %.2f µm against %.2f µm from the landmarks alone",
				grew, n, p, median(after), median(before))
		}
	}
	return false, ""
}

// signTestLevel is the one-sided level of worse's sign test: strict, since
// a refinement refused wrongly loses its gains, and most refinements move
// every landmark's prediction a little either way.
const signTestLevel = 0.01

func median(sorted []float64) float64 {
	n := len(sorted)
	if n%2 == 1 {
		return sorted[n/2]
	}
	return (sorted[n/2-1] + sorted[n/2]) / 2
}

func rms(v []transform.Vec) float64 {
	s := 0.0
	for _, x := range v {
		s += x.Dot(x)
	}
	return math.Sqrt(s / float64(max(len(v), 1)))
}

func rmsOf(v []float64) float64 {
	s := 0.0
	for _, x := range v {
		s += x * x
	}
	return math.Sqrt(s / float64(max(len(v), 1)))
}
