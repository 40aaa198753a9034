package landmarks

import (
	"errors"
	"fmt"
	"math"
	"strconv"

	"gonum.org/v1/gonum/mat"

	"ferry/transform"
)

// Tolerances of CheckSpread.
const (
	// flatTolerance is the largest ratio of the spread along a principal
	// axis to the spread along the first at which the points still count
	// as lying on a line or a plane: one nanometre across a millimetre.
	// Landmarks are picked to a tenth of a micrometre at best, so a set this
	// flat was put on a line or plane on purpose or by a slip (a constant
	// column, a pasted value), and a fit on it would amplify rounding
	// errors by a million or more.
	flatTolerance = 1e-6
	// sameTolerance is the spread, relative to the largest coordinate, at
	// or below which all points count as one position: a few thousand
	// times the rounding error of centring them.
	sameTolerance = 1e-12
)

// CheckSpread reports, in plain words, when points in dim dimensions (2 or
// 3) fail to spread over need dimensions: for need 1 when they are all at one
// position, for need 2 when they lie on a line, for need 3 when they lie on a
// plane. need is what the model to be fitted asks for (an affine map in 3-D
// needs 3, a translation 0). It returns nil when the points spread enough.
//
// The test uses the singular values s₁ ≥ s₂ ≥ s₃ of the coordinates centred
// on their mean: s_k/√n is the root-mean-square distance of the points from
// their centre along the k-th principal axis. The points spread in k
// dimensions when s_k exceeds 10⁻⁶ times s₁ (a nanometre across a
// millimetre); they are at one position when s₁ is at most 10⁻¹² times the
// largest coordinate times √n.
func CheckSpread(points []transform.Vec, dim, need int) error {
	if dim != 2 && dim != 3 {
		return fmt.Errorf("dimension %d: want 2 or 3", dim)
	}
	if need < 0 || need > dim {
		return fmt.Errorf("cannot ask %d-D landmarks to spread in %d dimensions", dim, need)
	}
	if need == 0 {
		return nil
	}
	n := len(points)
	if n < need+1 {
		switch need {
		case 1:
			return fmt.Errorf("need at least 2 landmarks at different positions, have %d", n)
		case 2:
			return fmt.Errorf("need at least 3 landmarks not on one line, have %d", n)
		default:
			return fmt.Errorf("need at least 4 landmarks not on one plane, have %d", n)
		}
	}
	var mean transform.Vec
	largest := 0.0
	for i, p := range points {
		if !p.IsFinite() {
			return fmt.Errorf("landmark %d has a coordinate that is not a finite number", i+1)
		}
		for a := range dim {
			mean[a] += p[a]
			largest = math.Max(largest, math.Abs(p[a]))
		}
	}
	mean = mean.Scale(1 / float64(n))
	centred := mat.NewDense(n, dim, nil)
	for i, p := range points {
		for a := range dim {
			d := p[a] - mean[a]
			if math.IsInf(d, 0) || math.IsNaN(d) {
				// The sum behind the mean overflowed: coordinates near
				// the largest float64.
				return errors.New("the landmark coordinates are too large to measure their spread")
			}
			centred.Set(i, a, d)
		}
	}
	var svd mat.SVD
	if !svd.Factorize(centred, mat.SVDNone) {
		return errors.New("cannot measure the spread of the landmarks: the singular value decomposition failed")
	}
	s := svd.Values(nil)
	rms := func(k int) float64 { return s[k] / math.Sqrt(float64(n)) }
	if s[0] <= sameTolerance*largest*math.Sqrt(float64(n)) {
		return fmt.Errorf("all %d landmarks are at the same position: a model needs them spread out", n)
	}
	if need >= 2 && s[1] <= flatTolerance*s[0] {
		off := s[1]
		if dim == 3 {
			off = math.Hypot(s[1], s[2])
		}
		off /= math.Sqrt(float64(n))
		return fmt.Errorf("the %d landmarks lie on a straight line (%s RMS distance from it, against %s RMS along it): the model needs them spread over a plane; add landmarks off that line",
			n, formatMicrometres(off), formatMicrometres(rms(0)))
	}
	if need >= 3 && s[2] <= flatTolerance*s[0] {
		return fmt.Errorf("the %d landmarks lie on a plane (%s RMS distance from it, against %s RMS across it): the model needs them spread in depth too; add landmarks above or below that plane",
			n, formatMicrometres(rms(2)), formatMicrometres(rms(0)))
	}
	return nil
}

// formatMicrometres writes a length for a message, to three significant
// digits; lengths below a nanometre, rounding noise in micrometre
// coordinates, read as such rather than as 1.81e-16 µm.
func formatMicrometres(x float64) string {
	if x < 0.0005 {
		return "less than 0.001 µm"
	}
	return strconv.FormatFloat(x, 'g', 3, 64) + " µm"
}
