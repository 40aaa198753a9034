package simulate

import (
	"errors"
	"fmt"
	"math"

	"ferry/transform"
)

// Params holds every knob of the scenario. Lengths are micrometres, angles
// degrees, densities per cubic millimetre. Source space is the in vivo
// two-photon field: x and y lateral, z depth below the pia (z = 0 at the
// pia, growing downwards). Target space is the EM dataset.
type Params struct {
	// FieldUM is the size of the in vivo field; it spans [0, FieldUM] on
	// each axis.
	FieldUM transform.Vec `json:"field_um"`

	// Mirror flips the source x axis: the EM block was imaged from its far
	// face, so the target is the mirror image of the in vivo view.
	Mirror bool `json:"mirror"`
	// RotationDeg holds small rotations about the x, y and z axes, applied
	// in that order (the block was cut and mounted slightly askew).
	RotationDeg transform.Vec `json:"rotation_deg"`
	// LateralShrink is the isotropic-in-plane tissue shrinkage along x and
	// y from fixation, staining and embedding (1 = none).
	LateralShrink [2]float64 `json:"lateral_shrink"`
	// ZCompressionTop and ZCompressionBottom are the local compression of
	// depth (∂z_target/∂z_source before rotation) at the pia and at the
	// bottom of the field; it changes linearly in between.
	ZCompressionTop    float64 `json:"z_compression_top"`
	ZCompressionBottom float64 `json:"z_compression_bottom"`
	// WarpBumps is the number of broad Gaussian displacement bumps of the
	// smooth nonlinear warp, each of width WarpWidthUM (standard deviation)
	// and displacement length drawn from WarpAmplitudeUM.
	WarpBumps       int        `json:"warp_bumps"`
	WarpWidthUM     float64    `json:"warp_width_um"`
	WarpAmplitudeUM [2]float64 `json:"warp_amplitude_um"`
	// OffsetUM is where the centre of the in vivo field lands in the EM
	// dataset, before the warp.
	OffsetUM transform.Vec `json:"offset_um"`

	// Vessels is the number of penetrating vessels that descend from the
	// pia and branch.
	Vessels int `json:"vessels"`
	// VesselRootRadiusUM is the range of radii at the pia.
	VesselRootRadiusUM [2]float64 `json:"vessel_root_radius_um"`
	// CapillaryRadiusUM is the least radius: the capillaries keep it as
	// they branch on.
	CapillaryRadiusUM float64 `json:"capillary_radius_um"`
	// SegmentLengthUM is the range of lengths of one straight segment.
	SegmentLengthUM [2]float64 `json:"segment_length_um"`
	// BranchProbability is the chance that a side branch leaves at the end
	// of a segment.
	BranchProbability float64 `json:"branch_probability"`
	// BranchAngleDeg is the range of angles between a side branch and its
	// parent.
	BranchAngleDeg [2]float64 `json:"branch_angle_deg"`
	// MaxBranchOrder bounds the branching: the trunk is order 0.
	MaxBranchOrder int `json:"max_branch_order"`
	// MaxSideSegments bounds the length of a side branch, in segments.
	MaxSideSegments int `json:"max_side_segments"`

	// SomaDensityPerMM3 is the density of neuronal somata below layer 1.
	SomaDensityPerMM3 float64 `json:"soma_density_per_mm3"`
	// Layer1DepthUM is the depth of the cell-sparse layer 1, where the
	// density is SomaDensityPerMM3·Layer1DensityFactor.
	Layer1DepthUM       float64 `json:"layer1_depth_um"`
	Layer1DensityFactor float64 `json:"layer1_density_factor"`
	// SomaMinSpacingUM is the least centre-to-centre distance of somata.
	SomaMinSpacingUM float64 `json:"soma_min_spacing_um"`
	// SomaRadiusUM keeps soma centres this far from any vessel wall.
	SomaRadiusUM float64 `json:"soma_radius_um"`

	// ImagedCells is the number of functionally characterised cells.
	ImagedCells int `json:"imaged_cells"`
	// ImagingPlanesUM are the depths of the in vivo imaging planes; a cell
	// can be imaged when its centre lies within PlaneHalfThicknessUM of one.
	ImagingPlanesUM      []float64 `json:"imaging_planes_um"`
	PlaneHalfThicknessUM float64   `json:"plane_half_thickness_um"`
	// CellSDUM is the in vivo localisation noise of the imaged cells, one
	// standard deviation per axis.
	CellSDUM transform.Vec `json:"cell_sd_um"`

	// EMCoverage is the share of imaged cells whose true target lies inside
	// the EM block; the block is cut to match it.
	EMCoverage float64 `json:"em_coverage"`
	// EMCutShareX is how much of the cut comes off the target x side of the
	// block; the rest comes off the y side.
	EMCutShareX float64 `json:"em_cut_share_x"`

	// NucleusOffsetSDUM is the offset, per axis, from a soma's centre to
	// its nucleus centroid in EM.
	NucleusOffsetSDUM float64 `json:"nucleus_offset_sd_um"`
	// EMPickSDUM is the picking noise of a nucleus centroid in EM, per axis.
	EMPickSDUM float64 `json:"em_pick_sd_um"`
	// NonNeuronalShare is the number of non-neuronal nuclei (glia,
	// endothelial cells) as a share of the neuronal candidates.
	NonNeuronalShare float64 `json:"non_neuronal_share"`
	// EndothelialShare is the share of the non-neuronal nuclei that sit on
	// a vessel wall.
	EndothelialShare float64 `json:"endothelial_share"`
	// GliaMinSpacingUM is the least distance from a non-neuronal nucleus to
	// any other nucleus.
	GliaMinSpacingUM float64 `json:"glia_min_spacing_um"`

	// VesselLandmarks and SomaLandmarks are the numbers of landmark pairs
	// of each kind, all inside the EM block.
	VesselLandmarks int `json:"vessel_landmarks"`
	SomaLandmarks   int `json:"soma_landmarks"`
	// LandmarkMinSpacingUM keeps landmarks apart in source space.
	LandmarkMinSpacingUM float64 `json:"landmark_min_spacing_um"`
	// LandmarkDepthScaleUM makes shallow landmarks likelier: in vivo images
	// are sharper near the surface, so users pick there more (a weight
	// exp(−z/scale)).
	LandmarkDepthScaleUM float64 `json:"landmark_depth_scale_um"`
	// Picking noise, one standard deviation per axis in source space, and
	// per axis (the same on all three) in target space.
	VesselSourceSDUM transform.Vec `json:"vessel_source_sd_um"`
	SomaSourceSDUM   transform.Vec `json:"soma_source_sd_um"`
	VesselTargetSDUM float64       `json:"vessel_target_sd_um"`
	SomaTargetSDUM   float64       `json:"soma_target_sd_um"`
	// WrongLandmarks is the number of wrong pairs, alternately a wrong
	// correspondence (the target of another branch point at least
	// WrongMinDistanceUM away in source space) and a wrong slice (the
	// target z off by a distance drawn from WrongSliceUM, either sign).
	WrongLandmarks     int        `json:"wrong_landmarks"`
	WrongMinDistanceUM float64    `json:"wrong_min_distance_um"`
	WrongSliceUM       [2]float64 `json:"wrong_slice_um"`

	// TargetVoxelUM, when not zero, writes landmark targets and candidates
	// as voxel indices of this size (micrometres per voxel).
	TargetVoxelUM transform.Vec `json:"target_voxel_um"`
}

// DefaultParams is the scenario of `ferry demo`: a 600 × 600 × 400 µm field
// of mouse visual cortex and the EM block that holds most of it.
func DefaultParams() Params {
	return Params{
		FieldUM: transform.Vec{600, 600, 400},

		Mirror:             true,
		RotationDeg:        transform.Vec{1.5, -1.0, 4.0},
		LateralShrink:      [2]float64{0.88, 0.92},
		ZCompressionTop:    0.80,
		ZCompressionBottom: 0.72,
		WarpBumps:          4,
		WarpWidthUM:        150,
		WarpAmplitudeUM:    [2]float64{4, 8},
		OffsetUM:           transform.Vec{300, 300, 180},

		Vessels:            8,
		VesselRootRadiusUM: [2]float64{4, 7},
		CapillaryRadiusUM:  2,
		SegmentLengthUM:    [2]float64{20, 50},
		BranchProbability:  0.4,
		BranchAngleDeg:     [2]float64{35, 75},
		MaxBranchOrder:     4,
		MaxSideSegments:    5,

		// Recalled from memory of the anatomical literature: mouse cortex
		// holds on the order of 1e5 neurons per mm³, far fewer in layer 1.
		SomaDensityPerMM3:   9e4,
		Layer1DepthUM:       90,
		Layer1DensityFactor: 0.15,
		SomaMinSpacingUM:    12,
		SomaRadiusUM:        6,

		ImagedCells:          400,
		ImagingPlanesUM:      []float64{120, 170, 220, 270, 320},
		PlaneHalfThicknessUM: 6,
		CellSDUM:             transform.Vec{0.8, 0.8, 3},

		EMCoverage:  0.83,
		EMCutShareX: 0.6,

		NucleusOffsetSDUM: 1,
		EMPickSDUM:        0.3,
		NonNeuronalShare:  0.3,
		EndothelialShare:  0.3,
		GliaMinSpacingUM:  8,

		VesselLandmarks:      40,
		SomaLandmarks:        15,
		LandmarkMinSpacingUM: 30,
		LandmarkDepthScaleUM: 200,
		VesselSourceSDUM:     transform.Vec{1, 1, 3},
		SomaSourceSDUM:       transform.Vec{1.5, 1.5, 4},
		VesselTargetSDUM:     0.3,
		SomaTargetSDUM:       1,
		WrongLandmarks:       2,
		WrongMinDistanceUM:   15,
		WrongSliceUM:         [2]float64{20, 30},
	}
}

// SmallParams is a 200 × 200 × 150 µm field with a few hundred candidates,
// for fast tests. The map is the default one with a warp scaled to the
// smaller field.
func SmallParams() Params {
	p := DefaultParams()
	p.FieldUM = transform.Vec{200, 200, 150}
	p.WarpBumps = 3
	p.WarpWidthUM = 70
	p.Vessels = 6
	p.SegmentLengthUM = [2]float64{12, 30}
	p.BranchProbability = 0.5
	p.Layer1DepthUM = 40
	p.ImagedCells = 60
	p.ImagingPlanesUM = []float64{60, 90, 120}
	p.VesselLandmarks = 12
	p.SomaLandmarks = 5
	p.LandmarkMinSpacingUM = 18
	p.LandmarkDepthScaleUM = 100
	return p
}

// Validate reports the first knob that cannot make a scenario.
func (p Params) Validate() error {
	positive := func(name string, v float64) error {
		if !(v > 0) || math.IsInf(v, 0) {
			return fmt.Errorf("%s is %v: want a positive finite number", name, v)
		}
		return nil
	}
	nonNegative := func(name string, v float64) error {
		if !(v >= 0) || math.IsInf(v, 0) {
			return fmt.Errorf("%s is %v: want a finite number ≥ 0", name, v)
		}
		return nil
	}
	share := func(name string, v float64, open bool) error {
		if !(v >= 0 && v <= 1) || (open && v == 0) {
			return fmt.Errorf("%s is %v: want a share in (0, 1]", name, v)
		}
		return nil
	}
	span := func(name string, r [2]float64) error {
		if err := positive(name+"[0]", r[0]); err != nil {
			return err
		}
		if err := positive(name+"[1]", r[1]); err != nil {
			return err
		}
		if r[0] > r[1] {
			return fmt.Errorf("%s is [%v, %v]: the lower end exceeds the upper", name, r[0], r[1])
		}
		return nil
	}
	var errs []error
	add := func(err error) {
		if err != nil {
			errs = append(errs, err)
		}
	}
	for i, axis := range "xyz" {
		add(positive(fmt.Sprintf("field size along %c (µm)", axis), p.FieldUM[i]))
		add(nonNegative(fmt.Sprintf("cell localisation sd along %c (µm)", axis), p.CellSDUM[i]))
		add(nonNegative(fmt.Sprintf("vessel landmark source sd along %c (µm)", axis), p.VesselSourceSDUM[i]))
		add(nonNegative(fmt.Sprintf("soma landmark source sd along %c (µm)", axis), p.SomaSourceSDUM[i]))
		if math.IsNaN(p.OffsetUM[i]) || math.IsInf(p.OffsetUM[i], 0) {
			add(fmt.Errorf("offset along %c is %v µm: want a finite number", axis, p.OffsetUM[i]))
		}
		if r := p.RotationDeg[i]; !(math.Abs(r) <= 45) {
			add(fmt.Errorf("rotation about %c is %v°: want a small angle within ±45°", axis, r))
		}
	}
	add(positive("lateral shrink along x", p.LateralShrink[0]))
	add(positive("lateral shrink along y", p.LateralShrink[1]))
	add(positive("z compression at the top", p.ZCompressionTop))
	add(positive("z compression at the bottom", p.ZCompressionBottom))
	if p.WarpBumps < 0 {
		add(fmt.Errorf("warp bumps is %d: want ≥ 0", p.WarpBumps))
	}
	if p.WarpBumps > 0 {
		add(positive("warp width (µm)", p.WarpWidthUM))
		add(span("warp amplitude (µm)", p.WarpAmplitudeUM))
		// The steepest slope of one bump is amplitude/(width·√e); the warp
		// stays one-to-one while all bumps together stay well below the
		// weakest linear scale.
		slope := float64(p.WarpBumps) * p.WarpAmplitudeUM[1] / (p.WarpWidthUM * math.Sqrt(math.E))
		weakest := math.Min(math.Min(p.LateralShrink[0], p.LateralShrink[1]), math.Min(p.ZCompressionTop, p.ZCompressionBottom))
		if slope > 0.5*weakest {
			add(fmt.Errorf("warp of %d bumps of up to %v µm over %v µm is too steep to stay one-to-one: widen it or lower the amplitude", p.WarpBumps, p.WarpAmplitudeUM[1], p.WarpWidthUM))
		}
	}

	if p.Vessels < 0 {
		add(fmt.Errorf("vessels is %d: want ≥ 0", p.Vessels))
	}
	if p.Vessels > 0 {
		add(span("vessel root radius (µm)", p.VesselRootRadiusUM))
		add(positive("capillary radius (µm)", p.CapillaryRadiusUM))
		if p.CapillaryRadiusUM > p.VesselRootRadiusUM[0] {
			add(fmt.Errorf("capillary radius %v µm exceeds the smallest root radius %v µm", p.CapillaryRadiusUM, p.VesselRootRadiusUM[0]))
		}
		add(span("segment length (µm)", p.SegmentLengthUM))
		add(share("branch probability", p.BranchProbability, false))
		add(span("branch angle (°)", p.BranchAngleDeg))
		if p.BranchAngleDeg[1] >= 180 {
			add(fmt.Errorf("branch angle up to %v°: want less than 180°", p.BranchAngleDeg[1]))
		}
		if p.MaxBranchOrder < 0 || p.MaxSideSegments < 1 {
			add(fmt.Errorf("max branch order %d and max side segments %d: want ≥ 0 and ≥ 1", p.MaxBranchOrder, p.MaxSideSegments))
		}
	}

	add(positive("soma density (per mm³)", p.SomaDensityPerMM3))
	add(nonNegative("layer 1 depth (µm)", p.Layer1DepthUM))
	add(nonNegative("layer 1 density factor", p.Layer1DensityFactor))
	if p.Layer1DepthUM >= p.FieldUM[2] {
		add(fmt.Errorf("layer 1 depth %v µm reaches the bottom of the %v µm field", p.Layer1DepthUM, p.FieldUM[2]))
	}
	add(positive("soma minimum spacing (µm)", p.SomaMinSpacingUM))
	add(nonNegative("soma radius (µm)", p.SomaRadiusUM))
	if p.SomaDensityPerMM3 > 0 && p.SomaMinSpacingUM > 0 {
		// Random sequential addition of hard spheres jams near a packing
		// fraction of 0.38 (recalled from memory); stop well short of it so
		// that dart throwing ends quickly.
		fraction := p.SomaDensityPerMM3 * 1e-9 * math.Pi / 6 * math.Pow(p.SomaMinSpacingUM, 3)
		if fraction > 0.25 {
			add(fmt.Errorf("soma density %v per mm³ with a minimum spacing of %v µm packs %.2f of the volume: too dense for dart throwing (keep it under 0.25)", p.SomaDensityPerMM3, p.SomaMinSpacingUM, fraction))
		}
	}

	if p.ImagedCells < 0 {
		add(fmt.Errorf("imaged cells is %d: want ≥ 0", p.ImagedCells))
	}
	if p.ImagedCells > 0 && len(p.ImagingPlanesUM) == 0 {
		add(errors.New("imaged cells asked for but no imaging planes given"))
	}
	for i, z := range p.ImagingPlanesUM {
		if !(z >= 0 && z <= p.FieldUM[2]) {
			add(fmt.Errorf("imaging plane %d at depth %v µm lies outside the field (0 to %v µm)", i, z, p.FieldUM[2]))
		}
	}
	add(positive("plane half thickness (µm)", p.PlaneHalfThicknessUM))

	add(share("EM coverage", p.EMCoverage, true))
	add(share("EM cut share along x", p.EMCutShareX, false))

	add(nonNegative("nucleus offset sd (µm)", p.NucleusOffsetSDUM))
	add(nonNegative("EM picking sd (µm)", p.EMPickSDUM))
	add(nonNegative("non-neuronal share", p.NonNeuronalShare))
	if p.NonNeuronalShare > 2 {
		add(fmt.Errorf("non-neuronal share is %v: want at most 2", p.NonNeuronalShare))
	}
	add(share("endothelial share", p.EndothelialShare, false))
	add(positive("glia minimum spacing (µm)", p.GliaMinSpacingUM))
	if p.GliaMinSpacingUM > p.SomaMinSpacingUM {
		add(fmt.Errorf("glia minimum spacing %v µm exceeds the soma minimum spacing %v µm", p.GliaMinSpacingUM, p.SomaMinSpacingUM))
	}

	if p.VesselLandmarks < 0 || p.SomaLandmarks < 0 {
		add(fmt.Errorf("landmark counts %d (vessel) and %d (soma): want ≥ 0", p.VesselLandmarks, p.SomaLandmarks))
	}
	if p.VesselLandmarks > 0 && p.Vessels == 0 {
		add(fmt.Errorf("%d vessel landmarks asked for but there are no vessels", p.VesselLandmarks))
	}
	add(nonNegative("landmark minimum spacing (µm)", p.LandmarkMinSpacingUM))
	add(positive("landmark depth scale (µm)", p.LandmarkDepthScaleUM))
	add(nonNegative("vessel landmark target sd (µm)", p.VesselTargetSDUM))
	add(nonNegative("soma landmark target sd (µm)", p.SomaTargetSDUM))
	if p.WrongLandmarks < 0 {
		add(fmt.Errorf("wrong landmarks is %d: want ≥ 0", p.WrongLandmarks))
	}
	if p.WrongLandmarks > 0 {
		correspondences := (p.WrongLandmarks + 1) / 2
		if correspondences > p.VesselLandmarks {
			add(fmt.Errorf("%d wrong landmarks need %d wrong correspondences among the vessel landmarks, but there are only %d", p.WrongLandmarks, correspondences, p.VesselLandmarks))
		}
		if p.WrongLandmarks > p.VesselLandmarks+p.SomaLandmarks {
			add(fmt.Errorf("%d wrong landmarks but only %d landmarks", p.WrongLandmarks, p.VesselLandmarks+p.SomaLandmarks))
		}
		add(nonNegative("wrong correspondence minimum distance (µm)", p.WrongMinDistanceUM))
		add(span("wrong slice offset (µm)", p.WrongSliceUM))
	}

	zero := p.TargetVoxelUM == transform.Vec{}
	if !zero {
		for i, axis := range "xyz" {
			add(positive(fmt.Sprintf("target voxel size along %c (µm per voxel)", axis), p.TargetVoxelUM[i]))
		}
	}
	if len(errs) > 0 {
		return fmt.Errorf("simulation parameters: %w", errs[0])
	}
	return nil
}
