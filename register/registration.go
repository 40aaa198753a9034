package register

import (
	"context"
	"encoding/json"
	"errors"

	"ferry/transform"
)

// Registration is a fitted registration: the transform from source to
// target micrometres with its leave-one-out check, the uncertainty model
// that map and match need, the voxel sizes the landmarks were given in, and
// the landmark file it was fitted from. It is what the registration file
// (transform.json) holds: WriteTo writes it, ReadRegistration reads it back
// byte for byte the same (docs/formats.md).
type Registration struct {
	// Program is the version of the program that fitted it.
	Program string
	// Transform maps source micrometres to target micrometres.
	Transform transform.Transform
	// Smoothing is the thin-plate-spline S used (0 for the other models).
	Smoothing float64
	// Voxels, when set, say that the landmark coordinates were voxel
	// indices of that size in micrometres; cells are read in them too.
	Voxels Voxels
	// Landmarks names the landmark file the transform was fitted from and
	// the ids left out of it.
	Landmarks LandmarkSource
	// Check is the leave-one-out check of the landmarks, nil when the file
	// holds none.
	Check *CheckJSON
	// Uncertainty is the model of the prediction error, nil when the file
	// holds none (NewMapper then refuses it).
	Uncertainty *UncertaintyModel
	// Refinement, when set, is the record of a refinement with
	// correspondences beyond the landmarks (ferry refine) as package refine
	// encodes it; NewMapper takes its held-out predictions from it.
	Refinement json.RawMessage

	// read is the file it was read from with the SHA-256 of the bytes
	// read, for provenance; zero when it was made in memory.
	read Input
}

// Input is the file the registration was read from, with the SHA-256 of
// the bytes read, as a Provenance lists it; the zero Input when it was made
// in memory.
func (r *Registration) Input() Input { return r.read }

// LandmarkSource names the landmark file behind a registration: its path as
// given, the SHA-256 of the bytes read, and the ids left out of the fit.
type LandmarkSource struct {
	Path     string   `json:"path"`
	SHA256   string   `json:"sha256"`
	Excluded []string `json:"excluded_ids"`
}

// NewRegistration is the registration of a checked fit: a's transform with
// its check (its provenance line from prov), the uncertainty model made
// with s, and the landmark file and voxel sizes of p (PrepareLandmarks).
func NewRegistration(p *Problem, a *Assessment, s Settings, prov Provenance) *Registration {
	check := a.JSON()
	check.Provenance = prov.Line()
	from := p.From
	from.Excluded = append([]string{}, from.Excluded...)
	return &Registration{
		Program:     "ferry " + Version,
		Transform:   a.Result.Transform,
		Smoothing:   a.Smoothing,
		Voxels:      p.Voxels,
		Landmarks:   from,
		Check:       &check,
		Uncertainty: NewUncertaintyModel(p, a, s),
	}
}

// Fit checks the landmarks of p by exact leave-one-out, fits the model the
// check chooses (or the one s asks for), and returns the registration with
// the assessment it was made from. prov is recorded with the check.
func Fit(ctx context.Context, p *Problem, s Settings, prov Provenance) (*Registration, *Assessment, error) {
	a, err := AssessContext(ctx, p, s)
	if err != nil {
		return nil, nil, err
	}
	return NewRegistration(p, a, s, prov), a, nil
}

// Dim is the dimension of the registration's transform, 2 or 3.
func (r *Registration) Dim() int { return r.Transform.Dim() }

// checkUncertainty refuses a registration without a usable uncertainty
// model, with the words the file's reader uses.
func (r *Registration) checkUncertainty() error {
	if r.Uncertainty == nil {
		return errors.New("the transform file has no uncertainty model")
	}
	return r.Uncertainty.check(r.Transform.Dim())
}
