package transform

import (
	"context"
	"errors"
	"fmt"
	"math"

	"ferry/internal/parallel"
)

// Vec is a position or a displacement in micrometres.
type Vec [3]float64

// Mat is a 3×3 matrix, row-major: Mat[i][j] is row i, column j.
type Mat [3][3]float64

// Kind names a transform model.
type Kind string

// The models, from the fewest parameters to the most.
const (
	Translation Kind = "translation"
	Rigid       Kind = "rigid"
	Similarity  Kind = "similarity"
	Affine      Kind = "affine"
	TPS         Kind = "tps"
	// ChainKind is a sequence of transforms applied in turn.
	ChainKind Kind = "chain"
)

// Kinds returns the fittable models from the simplest to the most flexible.
func Kinds() []Kind { return []Kind{Translation, Rigid, Similarity, Affine, TPS} }

// ParseKind returns the model named s, or an error naming the known ones.
func ParseKind(s string) (Kind, error) {
	for _, k := range Kinds() {
		if string(k) == s {
			return k, nil
		}
	}
	return "", fmt.Errorf("unknown model %q (want translation, rigid, similarity, affine or tps)", s)
}

// MinPairs is the fewest point pairs from which kind can be fitted in dim
// dimensions (and, for leave-one-out, one more is needed).
func MinPairs(kind Kind, dim int) int {
	switch kind {
	case Translation:
		return 1
	case Rigid, Similarity:
		return dim // 2 in 2-D, 3 (not on a line) in 3-D
	case Affine, TPS:
		return dim + 1
	}
	return 0
}

// Transform maps source positions to target positions.
type Transform interface {
	// Kind names the model.
	Kind() Kind
	// Dim is 2 or 3.
	Dim() int
	// Apply maps one source position to the target.
	Apply(p Vec) Vec
	// Jacobian is the derivative of Apply at p: J[i][j] = ∂target_i/∂source_j.
	Jacobian(p Vec) Mat
	// Invert returns the source position that maps to q, or an error where
	// there is none to be found (a spline whose Newton iteration fails).
	Invert(q Vec) (Vec, error)
}

// ErrNoConvergence is wrapped by Invert when an iterative inverse fails.
var ErrNoConvergence = errors.New("inverse did not converge")

// ErrSingular is matched (errors.Is) by the error of Invert for a linear
// map whose matrix is singular: it has no inverse anywhere.
var ErrSingular = errors.New("singular matrix: no inverse")

// ErrTooFewPairs is matched (errors.Is) by the error of a fit given fewer
// landmark pairs than its model needs (MinPairs, one more for leave-one-out).
var ErrTooFewPairs = errors.New("too few landmark pairs")

// Result is a fitted transform with its residuals.
type Result struct {
	Transform Transform
	// Residuals[i] is target_i − Transform(source_i): zero for an
	// interpolating spline.
	Residuals []Vec
	// LOO[i] is target_i minus the prediction of source_i by the same model
	// fitted to all the other pairs, computed exactly. Nil unless asked for.
	LOO []Vec
	// Mirrored reports that the fitted map reverses handedness.
	Mirrored bool
	// LOOFactor[i] is the variance of each axis of LOO[i] in units of the
	// model's per-axis scale s_k (µm²): Var(LOO[i]_k) = s_k·LOOFactor[i].
	// For the linear models s_k is the noise variance of a pair of unit
	// weight and LOOFactor[i] = 1/(w_i(1−h_ii)) with h the (linearised) hat
	// matrix; for the spline s_k is the scale of its Gaussian-process prior
	// and LOOFactor[i] = 1/(M⁻¹)_ii. Nil unless LOO is.
	LOOFactor []float64
}

// Predictor gives the uncertainty of a fitted transform's prediction at any
// source point, in the same units as Result.LOOFactor: the covariance of the
// predicted target position at p, as an estimate of the true map at p, is
// diag(√s)·Factor(p)·diag(√s) for the model's per-axis scale s (µm²). It
// leaves out the error of p itself, which the caller carries through the
// Jacobian.
type Predictor interface {
	Factor(p Vec) Mat
}

// BatchPredictor is a Predictor that computes many points faster together
// than one by one, as the spline's does.
type BatchPredictor interface {
	Predictor
	// FactorAll sets dst[i] = Factor(ps[i]) for every point.
	FactorAll(ps []Vec, dst []Mat)
}

// Options steer a fit.
type Options struct {
	// Weights, when not nil, give each pair a relative weight (its
	// precision); nil means equal weights. Only ratios matter.
	Weights []float64
	// Smoothing is the thin-plate-spline S ≥ 0 of docs/methods.md, in the
	// units of the kernel evaluated in micrometres. Ignored by the other
	// models.
	Smoothing float64
	// NoMirror forbids rigid and similarity fits from reflecting.
	NoMirror bool
	// LeaveOneOut asks for Result.LOO.
	LeaveOneOut bool
	// Context, when not nil, is looked at between the stages of a
	// spline's fit (the factorisation, the solution, the leave-one-out):
	// once it is cancelled the fit stops with its error. One stage, a
	// dense factorisation, cannot itself be cut short.
	Context context.Context
}

// cancelled is the error of opt's context, if any.
func (opt Options) cancelled() error {
	if opt.Context == nil {
		return nil
	}
	return opt.Context.Err()
}

// ApplyAll maps every point of src into dst (which may be src itself), on all
// cores. dst must be as long as src.
func ApplyAll(t Transform, dst, src []Vec) {
	if len(dst) != len(src) {
		panic("transform: ApplyAll with dst and src of different lengths")
	}
	parallel.Ranges(len(src), 2048, func(lo, hi int) {
		for i := lo; i < hi; i++ {
			dst[i] = t.Apply(src[i])
		}
	})
}

// Det is the determinant of m.
func (m Mat) Det() float64 {
	return m[0][0]*(m[1][1]*m[2][2]-m[1][2]*m[2][1]) -
		m[0][1]*(m[1][0]*m[2][2]-m[1][2]*m[2][0]) +
		m[0][2]*(m[1][0]*m[2][1]-m[1][1]*m[2][0])
}

// Mul is the matrix product m·n.
func (m Mat) Mul(n Mat) Mat {
	var r Mat
	for i := range 3 {
		for j := range 3 {
			r[i][j] = m[i][0]*n[0][j] + m[i][1]*n[1][j] + m[i][2]*n[2][j]
		}
	}
	return r
}

// MulVec is m·v.
func (m Mat) MulVec(v Vec) Vec {
	return Vec{
		m[0][0]*v[0] + m[0][1]*v[1] + m[0][2]*v[2],
		m[1][0]*v[0] + m[1][1]*v[1] + m[1][2]*v[2],
		m[2][0]*v[0] + m[2][1]*v[1] + m[2][2]*v[2],
	}
}

// T is the transpose of m.
func (m Mat) T() Mat {
	var r Mat
	for i := range 3 {
		for j := range 3 {
			r[i][j] = m[j][i]
		}
	}
	return r
}

// Inverse is m⁻¹, or false when m is singular to working precision.
func (m Mat) Inverse() (Mat, bool) {
	d := m.Det()
	scale := 0.0
	for i := range 3 {
		for j := range 3 {
			scale = math.Max(scale, math.Abs(m[i][j]))
		}
	}
	if d == 0 || math.IsNaN(d) || math.Abs(d) <= 1e-13*scale*scale*scale {
		return Mat{}, false
	}
	var r Mat
	r[0][0] = (m[1][1]*m[2][2] - m[1][2]*m[2][1]) / d
	r[0][1] = (m[0][2]*m[2][1] - m[0][1]*m[2][2]) / d
	r[0][2] = (m[0][1]*m[1][2] - m[0][2]*m[1][1]) / d
	r[1][0] = (m[1][2]*m[2][0] - m[1][0]*m[2][2]) / d
	r[1][1] = (m[0][0]*m[2][2] - m[0][2]*m[2][0]) / d
	r[1][2] = (m[0][2]*m[1][0] - m[0][0]*m[1][2]) / d
	r[2][0] = (m[1][0]*m[2][1] - m[1][1]*m[2][0]) / d
	r[2][1] = (m[0][1]*m[2][0] - m[0][0]*m[2][1]) / d
	r[2][2] = (m[0][0]*m[1][1] - m[0][1]*m[1][0]) / d
	return r, true
}

// Identity is the 3×3 identity matrix.
func Identity() Mat { return Mat{{1, 0, 0}, {0, 1, 0}, {0, 0, 1}} }

// Add is v+w.
func (v Vec) Add(w Vec) Vec { return Vec{v[0] + w[0], v[1] + w[1], v[2] + w[2]} }

// Sub is v−w.
func (v Vec) Sub(w Vec) Vec { return Vec{v[0] - w[0], v[1] - w[1], v[2] - w[2]} }

// Scale is s·v.
func (v Vec) Scale(s float64) Vec { return Vec{s * v[0], s * v[1], s * v[2]} }

// Dot is v·w.
func (v Vec) Dot(w Vec) float64 { return v[0]*w[0] + v[1]*w[1] + v[2]*w[2] }

// Norm is |v|.
func (v Vec) Norm() float64 { return math.Sqrt(v.Dot(v)) }

// IsFinite reports whether no coordinate is NaN or infinite.
func (v Vec) IsFinite() bool {
	for _, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return false
		}
	}
	return true
}
