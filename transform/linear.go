package transform

import (
	"errors"
	"fmt"
	"math"

	"ferry/internal/errkind"
)

// Linear is the map p ↦ A·p + T: a translation, a rigid motion (a rotation,
// with a reflection where Mirrored), a similarity (a rigid motion and one
// scale) or a general affine map. In 2-D, A[2][2] is 1 and T[2] is 0, so the
// z coordinate passes through unchanged.
type Linear struct {
	Model Kind `json:"model"`
	D     int  `json:"dim"`
	// A is the linear part, dimensionless for every model but the affine
	// one, where it may also stretch and shear.
	A Mat `json:"matrix"`
	// T is the offset in micrometres.
	T Vec `json:"offset"`
	// Scale is the factor of a similarity, 1 for a translation or a rigid
	// motion and absent (zero) for an affine map, which has no single scale.
	Scale float64 `json:"scale,omitempty"`
	// Mirrored reports that A reverses handedness (det A < 0).
	Mirrored bool `json:"mirrored"`
}

// Kind names the model.
func (l *Linear) Kind() Kind { return l.Model }

// Dim is 2 or 3.
func (l *Linear) Dim() int { return l.D }

// Apply returns A·p + T.
func (l *Linear) Apply(p Vec) Vec { return l.A.MulVec(p).Add(l.T) }

// Jacobian is A everywhere.
func (l *Linear) Jacobian(Vec) Mat { return l.A }

// Invert returns A⁻¹·(q − T), or an error when A is singular.
func (l *Linear) Invert(q Vec) (Vec, error) {
	inv, ok := l.A.Inverse()
	if !ok {
		return Vec{}, errkind.New(ErrSingular, "%s transform has a singular matrix and cannot be inverted", l.Model)
	}
	return inv.MulVec(q.Sub(l.T)), nil
}

// Tolerances of the linear fits. Each is relative to the size or the spread
// of the points, never absolute, so that coordinates of 1e5 µm (EM voxels
// times their size) are judged like coordinates near the origin.
const (
	// coincideTol: points whose RMS distance from their centroid is below
	// this fraction of the centroid's distance from the origin cannot be
	// told apart in float64 after centring.
	coincideTol = 1e-9
	// flatTol: a point cloud whose RMS extent along its thinnest direction
	// is below this fraction of that along its widest is a line or a plane.
	// 1e-6 of a millimetre is a nanometre, far below any landmark's
	// localisation error, so no real landmark set is refused by it.
	flatTol = 1e-6
	// leverageTol: a pair whose affine leverage is within this of 1 alone
	// fixes a direction of the fit, and its leave-one-out prediction is
	// undefined.
	leverageTol = 1e-9
	// orthoTol bounds |AᵀA/s² − I| for a decoded rigid or similarity matrix.
	orthoTol = 1e-9
)

// validate checks a decoded Linear: a known model, 2 or 3 dimensions, finite
// numbers, the 2-D shape (z passes through), an invertible matrix whose
// handedness agrees with Mirrored, and the structure the model implies (the
// identity for a translation, a scaled orthogonal matrix for a rigid motion
// or a similarity).
func (l *Linear) validate() error {
	if l == nil {
		return errors.New("linear transform is missing")
	}
	switch l.Model {
	case Translation, Rigid, Similarity, Affine:
	default:
		return fmt.Errorf("linear transform has model %q (want translation, rigid, similarity or affine)", l.Model)
	}
	if l.D != 2 && l.D != 3 {
		return fmt.Errorf("%s transform has dimension %d: want 2 or 3", l.Model, l.D)
	}
	for i := range 3 {
		for j := range 3 {
			if !finite(l.A[i][j]) {
				return fmt.Errorf("%s transform: matrix entry (%d,%d) is %v", l.Model, i, j, l.A[i][j])
			}
		}
	}
	if !l.T.IsFinite() {
		return fmt.Errorf("%s transform: offset %v µm is not finite", l.Model, l.T)
	}
	if !finite(l.Scale) {
		return fmt.Errorf("%s transform: scale is %v", l.Model, l.Scale)
	}
	if l.D == 2 && (l.A[0][2] != 0 || l.A[1][2] != 0 || l.A[2][0] != 0 || l.A[2][1] != 0 || l.A[2][2] != 1 || l.T[2] != 0) {
		return fmt.Errorf("2-D %s transform must leave z alone: want matrix row and column 3 of the identity and offset z 0", l.Model)
	}
	if _, ok := l.A.Inverse(); !ok {
		return fmt.Errorf("%s transform has a singular matrix", l.Model)
	}
	if det := l.A.Det(); (det < 0) != l.Mirrored {
		return fmt.Errorf("%s transform: mirrored is %t but the matrix determinant is %g", l.Model, l.Mirrored, det)
	}
	switch l.Model {
	case Translation:
		if l.Scale != 0 && l.Scale != 1 {
			return fmt.Errorf("translation has scale %g: want 1", l.Scale)
		}
		if d := maxAbsDiff(l.A, Identity()); d > orthoTol {
			return fmt.Errorf("translation matrix differs from the identity by %g", d)
		}
	case Rigid:
		if l.Scale != 0 && math.Abs(l.Scale-1) > orthoTol {
			return fmt.Errorf("rigid transform has scale %g: want 1", l.Scale)
		}
		if d := maxAbsDiff(l.A.T().Mul(l.A), Identity()); d > orthoTol {
			return fmt.Errorf("rigid transform matrix is not orthogonal (|AᵀA − I| = %g)", d)
		}
	case Similarity:
		if !(l.Scale > 0) {
			return fmt.Errorf("similarity has scale %g: want a positive number", l.Scale)
		}
		s2 := l.Scale * l.Scale
		g := l.A.T().Mul(l.A)
		for i := range l.D {
			for j := range l.D {
				g[i][j] /= s2
			}
		}
		if d := maxAbsDiff(g, Identity()); d > orthoTol {
			return fmt.Errorf("similarity matrix is not %g times an orthogonal matrix (|AᵀA/s² − I| = %g)", l.Scale, d)
		}
	case Affine:
		if l.Scale != 0 {
			return fmt.Errorf("affine transform has scale %g: an affine map has no single scale", l.Scale)
		}
	}
	return nil
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

func maxAbsDiff(a, b Mat) float64 {
	d := 0.0
	for i := range 3 {
		for j := range 3 {
			d = math.Max(d, math.Abs(a[i][j]-b[i][j]))
		}
	}
	return d
}
