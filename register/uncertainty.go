package register

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/spatial/kdtree"

	"ferry/internal/sample"
	"ferry/landmarks"
	"ferry/transform"
)

// UncertaintyModel is what map and match need, beyond the transform, to give
// each mapped point its covariance. It is stored in the transform file.
//
// The covariance of a point mapped from source position x is
//
//	P(x) = diag(√s)·(F(x) + ν·I)·diag(√s)
//
// the predictive covariance of a new landmark at x: F is the fitted model's
// prediction factor (transform.Predictor), s the per-axis scale estimated
// from the landmarks' leave-one-out errors, ν the noise factor of a pair of
// unit weight (1 for the linear models, the smoothing S for the spline).
// This is the quantity the leave-one-out errors calibrate. A cell whose own
// localisation error is given (--cell-sd) has the landmarks' picking noise
// taken out and its own carried through the Jacobian put in; see Covariance.
type UncertaintyModel struct {
	Method string `json:"method"`
	// Scale is s, per target axis (µm²).
	Scale       transform.Vec `json:"axis_scale_um2"`
	NoiseFactor float64       `json:"noise_factor"`
	// SourceSD and TargetSD are the picking errors of the landmarks when
	// the user stated them (µm).
	SourceSD *transform.Vec `json:"source_sd_um,omitempty"`
	TargetSD *transform.Vec `json:"target_sd_um,omitempty"`
	// Source and Weights are the landmarks the transform was fitted to
	// (source µm) and their weights, from which the predictor, the hull and
	// the distances to the nearest landmark are rebuilt.
	Source  []transform.Vec `json:"landmarks_source_um"`
	Weights []float64       `json:"weights"`
	// Spacing is the median distance from a landmark to its nearest
	// neighbour (µm): a point farther than isolatedSpacings times this from
	// every landmark is isolated.
	Spacing float64 `json:"landmark_spacing_um"`
	// Calibration is the check's share of leave-one-out errors inside their
	// 95 % radius.
	CalibrationInside int `json:"calibration_inside"`
	CalibrationN      int `json:"calibration_n"`
	// Field is the fitted error model (field.go) when the method is
	// fieldMethodName: map's variances then come from it, and Kinds are
	// the landmarks' kinds, CellNoise the relative noise D of a mapped
	// cell. Scale and NoiseFactor remain the per-axis calibration of the
	// fitted model's own kriging variance, which suggest conditions on.
	Field     *FieldParams     `json:"field,omitempty"`
	Kinds     []landmarks.Kind `json:"landmark_kinds,omitempty"`
	CellNoise float64          `json:"cell_noise,omitempty"`
	// Warnings are the check's standing warnings about the fit (flagged
	// landmarks kept in, too few landmarks), repeated by every command
	// that reads the transform file.
	Warnings []string `json:"warnings,omitempty"`
}

const (
	methodName = "leave-one-out calibrated predictive covariance"
	// isolatedSpacings: how many typical landmark spacings from the nearest
	// landmark make a point isolated.
	isolatedSpacings = 2.5
)

// NewUncertaintyModel builds the uncertainty model of an assessment.
func NewUncertaintyModel(p *Problem, a *Assessment, s Settings) *UncertaintyModel {
	u := &UncertaintyModel{
		Method: methodName, Scale: a.Scale, NoiseFactor: 1,
		SourceSD: s.SourceSD, TargetSD: s.TargetSD,
		Source: append([]transform.Vec(nil), p.Source...), Weights: append([]float64(nil), a.Weights...),
		Spacing:           nearestSpacing(p.Source),
		CalibrationInside: a.Calibration.Inside, CalibrationN: a.Calibration.N,
	}
	if a.Chosen == transform.TPS {
		u.NoiseFactor = a.Smoothing
	}
	u.Warnings = a.Warnings
	if a.Field != nil {
		u.Method, u.Field = fieldMethodName, a.Field
		u.Kinds = append([]landmarks.Kind(nil), p.Kinds...)
		u.CellNoise = cellNoiseOf(p.Kinds, a.Field)
	}
	return u
}

// WithoutField is u with the leave-one-out calibrated predictive covariance
// in place of the error model: for a transform whose nodes are not the
// landmarks the model was fitted to (refine adds soma pairs, and calibrates
// the per-axis scale on them itself).
func (u UncertaintyModel) WithoutField() UncertaintyModel {
	u.Method, u.Field, u.Kinds, u.CellNoise = methodName, nil, nil, 0
	return u
}

// Marshal encodes the model for the transform file.
func (u *UncertaintyModel) Marshal() (json.RawMessage, error) { return json.Marshal(u) }

// parseUncertaintyModel decodes and checks the model of a registration
// file, for ReadRegistration.
func parseUncertaintyModel(raw json.RawMessage, dim int) (*UncertaintyModel, error) {
	if len(raw) == 0 {
		return nil, errors.New("the transform file has no uncertainty model")
	}
	var u UncertaintyModel
	if err := json.Unmarshal(raw, &u); err != nil {
		return nil, fmt.Errorf("uncertainty model: %v", err)
	}
	if err := u.check(dim); err != nil {
		return nil, err
	}
	return &u, nil
}

// check refuses a model whose numbers cannot be used: a model read from a
// file, or one put into a Registration by hand.
func (u *UncertaintyModel) check(dim int) error {
	if u.Method != methodName && u.Method != fieldMethodName {
		return fmt.Errorf("uncertainty model %q is not one this program knows", u.Method)
	}
	if len(u.Source) == 0 || len(u.Weights) != len(u.Source) {
		return fmt.Errorf("uncertainty model: %d landmarks with %d weights", len(u.Source), len(u.Weights))
	}
	for k := range dim {
		if !(u.Scale[k] > 0) || math.IsInf(u.Scale[k], 0) {
			return fmt.Errorf("uncertainty model: axis scale %v is not positive", u.Scale)
		}
	}
	if !(u.NoiseFactor >= 0) || math.IsInf(u.NoiseFactor, 0) || !(u.Spacing >= 0) {
		return errors.New("uncertainty model: noise factor or spacing is not a finite number ≥ 0")
	}
	for i, p := range u.Source {
		if !p.IsFinite() || !(u.Weights[i] > 0) {
			return fmt.Errorf("uncertainty model: landmark %d is not finite or has no weight", i+1)
		}
	}
	if u.Method == fieldMethodName {
		if err := u.checkField(dim); err != nil {
			return err
		}
	}
	return nil
}

// checkField checks the error model's parameters as read from a file.
func (u *UncertaintyModel) checkField(dim int) error {
	f := u.Field
	if f == nil {
		return errors.New("uncertainty model: the error model's parameters are missing")
	}
	if f.Smoothness != 0.5 && f.Smoothness != 1.5 && f.Smoothness != 2.5 {
		return fmt.Errorf("uncertainty model: smoothness %v is not 0.5, 1.5 or 2.5", f.Smoothness)
	}
	if !(f.Length > 0) || math.IsInf(f.Length, 0) || !(u.CellNoise > 0) || math.IsInf(u.CellNoise, 0) {
		return errors.New("uncertainty model: the field's length or the cells' noise is not a positive finite number")
	}
	for k := range dim {
		if !(f.Amplitude[k] >= 0) || math.IsInf(f.Amplitude[k], 0) || !(f.Noise[k] >= 0) || math.IsInf(f.Noise[k], 0) {
			return fmt.Errorf("uncertainty model: field amplitude %v or noise %v is not a finite number ≥ 0", f.Amplitude, f.Noise)
		}
	}
	for k, d := range f.Kinds {
		if !(d > 0) || math.IsInf(d, 0) {
			return fmt.Errorf("uncertainty model: the noise of kind %q is not a positive finite number", k)
		}
	}
	if len(u.Kinds) != len(u.Source) {
		return fmt.Errorf("uncertainty model: %d landmarks with %d kinds", len(u.Source), len(u.Kinds))
	}
	return nil
}

// nearestSpacing is the median nearest-neighbour distance of points.
func nearestSpacing(points []transform.Vec) float64 {
	if len(points) < 2 {
		return 0
	}
	tree := newPointTree(points)
	d := make([]float64, len(points))
	for i, p := range points {
		keep := kdtree.NewNKeeper(2)
		tree.NearestSet(keep, kdtree.Point(p[:]))
		for _, c := range keep.Heap {
			if c.Comparable != nil && c.Dist > 0 {
				d[i] = math.Sqrt(c.Dist)
			}
		}
	}
	return sample.Median(d)
}

func newPointTree(points []transform.Vec) *kdtree.Tree {
	pts := make(kdtree.Points, len(points))
	for i, p := range points {
		pts[i] = kdtree.Point{p[0], p[1], p[2]}
	}
	return kdtree.New(pts, false)
}
