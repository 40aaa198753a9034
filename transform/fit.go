package transform

import (
	"fmt"
	"math"

	"ferry/internal/errkind"
)

// Fit fits a model of the given kind that maps src[i] to dst[i] in dim
// dimensions (2 or 3). Coordinates are in micrometres. It returns an error,
// never a panic, for inputs from which the model cannot be fitted: too few
// pairs, points on a line or a plane where the model needs them spread,
// duplicate source points for an interpolating spline, non-finite numbers.
func Fit(kind Kind, dim int, src, dst []Vec, opt Options) (*Result, error) {
	if err := checkPairs(dim, src, dst, opt); err != nil {
		return nil, err
	}
	need := MinPairs(kind, dim)
	if opt.LeaveOneOut {
		need++
	}
	if len(src) < need {
		what := "a fit"
		if opt.LeaveOneOut {
			what = "a fit with leave-one-out"
		}
		return nil, errkind.New(ErrTooFewPairs, "%s model in %d-D needs at least %d landmark pairs for %s, have %d", kind, dim, need, what, len(src))
	}
	switch kind {
	case Translation, Rigid, Similarity, Affine:
		return fitLinear(kind, dim, src, dst, opt)
	case TPS:
		return fitSpline(dim, src, dst, opt)
	}
	return nil, fmt.Errorf("cannot fit model %q", kind)
}

// checkPairs refuses malformed input before any model sees it.
func checkPairs(dim int, src, dst []Vec, opt Options) error {
	if dim != 2 && dim != 3 {
		return fmt.Errorf("dimension %d: want 2 or 3", dim)
	}
	if len(src) != len(dst) {
		return fmt.Errorf("%d source points but %d target points", len(src), len(dst))
	}
	if opt.Weights != nil && len(opt.Weights) != len(src) {
		return fmt.Errorf("%d weights for %d pairs", len(opt.Weights), len(src))
	}
	for i := range src {
		if !src[i].IsFinite() || !dst[i].IsFinite() {
			return fmt.Errorf("pair %d has a coordinate that is not a finite number", i)
		}
		if dim == 2 && (src[i][2] != 0 || dst[i][2] != 0) {
			return fmt.Errorf("pair %d has a z coordinate in a 2-D fit", i)
		}
		if opt.Weights != nil {
			w := opt.Weights[i]
			if !(w > 0) || math.IsInf(w, 0) {
				return fmt.Errorf("pair %d has weight %v: want a positive finite number", i, w)
			}
		}
	}
	if !(opt.Smoothing >= 0) || math.IsInf(opt.Smoothing, 0) {
		return fmt.Errorf("smoothing %v: want a finite number ≥ 0", opt.Smoothing)
	}
	return nil
}
