package transform

import (
	"errors"
	"fmt"
)

// NewPredictor returns the uncertainty of t's predictions, built from the
// source landmarks and the weights t was fitted with (nil weights: equal).
// It must be given the same pairs, in any order, as the fit; it cannot tell
// when it is not.
//
// Weights are scaled to a mean of 1 before use, as for Result.LOOFactor, so
// the per-axis scale s that Factor is multiplied by is the noise variance
// (µm²) of the target position of a landmark of average weight; with equal
// weights that is every landmark.
func NewPredictor(t Transform, src []Vec, weights []float64) (Predictor, error) {
	switch t := t.(type) {
	case nil:
		return nil, errors.New("no transform to predict with")
	case *Linear:
		lp, err := newLinearPredictor(t, src, weights)
		if err != nil {
			return nil, err
		}
		return lp, nil
	case *Spline:
		sp, err := newSplinePredictor(t, src, weights)
		if err != nil {
			return nil, err
		}
		return sp, nil
	case *Chain:
		// Each step was fitted to its own landmarks; the error of an early
		// step would have to be carried through the later steps'
		// Jacobians and added to theirs, which this package does not do.
		return nil, errors.New("no predictor for a chain of fitted transforms: each step was fitted to landmarks of its own and their uncertainties are not combined; build a predictor for each step")
	}
	return nil, fmt.Errorf("no predictor for a %s transform", t.Kind())
}
