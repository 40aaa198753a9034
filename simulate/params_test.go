package simulate

import (
	"math"
	"strings"
	"testing"

	"ferry/transform"
)

func TestValidateAcceptsPresets(t *testing.T) {
	for name, p := range map[string]Params{"default": DefaultParams(), "small": SmallParams()} {
		if err := p.Validate(); err != nil {
			t.Errorf("%s params: %v", name, err)
		}
	}
}

func TestValidateRefuses(t *testing.T) {
	tests := []struct {
		name   string
		modify func(*Params)
		want   string
	}{
		{"zero field depth", func(p *Params) { p.FieldUM[2] = 0 }, "field size along z"},
		{"NaN offset", func(p *Params) { p.OffsetUM[0] = math.NaN() }, "offset along x"},
		{"large rotation", func(p *Params) { p.RotationDeg[2] = 90 }, "rotation about z"},
		{"negative shrink", func(p *Params) { p.LateralShrink[1] = -0.9 }, "lateral shrink along y"},
		{"zero compression", func(p *Params) { p.ZCompressionBottom = 0 }, "z compression at the bottom"},
		{"steep warp", func(p *Params) { p.WarpWidthUM = 5 }, "too steep"},
		{"reversed amplitude", func(p *Params) { p.WarpAmplitudeUM = [2]float64{8, 4} }, "lower end exceeds"},
		{"capillary wider than root", func(p *Params) { p.CapillaryRadiusUM = 10 }, "capillary radius"},
		{"branch probability above one", func(p *Params) { p.BranchProbability = 1.5 }, "branch probability"},
		{"packed too dense", func(p *Params) { p.SomaDensityPerMM3 = 1e6 }, "too dense"},
		{"layer 1 below the field", func(p *Params) { p.Layer1DepthUM = 500 }, "layer 1 depth"},
		{"plane outside the field", func(p *Params) { p.ImagingPlanesUM = []float64{120, 450} }, "imaging plane 1"},
		{"no planes", func(p *Params) { p.ImagingPlanesUM = nil }, "no imaging planes"},
		{"zero coverage", func(p *Params) { p.EMCoverage = 0 }, "EM coverage"},
		{"glia spacing above soma spacing", func(p *Params) { p.GliaMinSpacingUM = 20 }, "glia minimum spacing"},
		{"too many wrong", func(p *Params) { p.WrongLandmarks = 100 }, "wrong landmarks"},
		{"negative wrong", func(p *Params) { p.WrongLandmarks = -1 }, "wrong landmarks is -1"},
		{"vessel landmarks without vessels", func(p *Params) { p.Vessels = 0 }, "no vessels"},
		{"half a voxel size", func(p *Params) { p.TargetVoxelUM = transform.Vec{0.1, 0.1, 0} }, "target voxel size along z"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			p := DefaultParams()
			tt.modify(&p)
			err := p.Validate()
			if err == nil {
				t.Fatalf("Validate accepted %s", tt.name)
			}
			if !strings.Contains(err.Error(), tt.want) {
				t.Errorf("error %q does not mention %q", err, tt.want)
			}
			if _, err := Generate(p, 1); err == nil {
				t.Errorf("Generate accepted %s", tt.name)
			}
		})
	}
}
