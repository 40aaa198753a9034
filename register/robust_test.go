package register

import (
	"bytes"
	"math"
	"strings"
	"testing"

	"ferry/landmarks"
	"ferry/status"
	"ferry/transform"
)

// Coordinates beyond MaxCoordinateUM, as read or once voxel sizes are
// applied, are refused with the file, line and column.
func TestPrepareLandmarksRefusesHugeCoordinates(t *testing.T) {
	tests := []struct {
		name string
		rows string
		vox  Voxels
		want string
	}{
		{"near the largest float64", "b,vessel,1,2,1.7e308,4,5,6\n", Voxels{}, `pairs.csv:4: column "source_z": 1.7e+308 µm is beyond`},
		{"1e300 in the target", "b,vessel,1,2,3,4,-1e300,6\n", Voxels{}, `pairs.csv:4: column "target_y": -1e+300 µm is beyond`},
		{"large only in micrometres", "b,vessel,1,2,3,4,2e6,6\n", Voxels{Target: &transform.Vec{1, 1e4, 1}}, `pairs.csv:4: column "target_y": 2e+10 µm`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			text := "# test\nid,kind,source_x,source_y,source_z,target_x,target_y,target_z\na,vessel,0,0,0,1,1,1\n" + tc.rows + "c,soma,9,8,7,6,5,4\n"
			set, err := landmarks.ParsePairs("pairs.csv", strings.NewReader(text))
			if err != nil {
				t.Fatal(err)
			}
			_, err = PrepareLandmarks(set, nil, tc.vox)
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("error %v, want one saying %q", err, tc.want)
			}
		})
	}
}

// Landmarks at one position on either side, exactly or to a nanometre, or
// at coordinates so small that they are one position, are refused by every
// model, translation included.
func TestAssessRefusesCoincidentLandmarks(t *testing.T) {
	spread := []transform.Vec{{0, 0, 0}, {50, 0, 0}, {0, 60, 0}, {0, 0, 70}, {40, 40, 40}, {10, 80, 20}}
	same := func(at transform.Vec, jitter float64) []transform.Vec {
		out := make([]transform.Vec, len(spread))
		for i := range out {
			out[i] = at.Add(transform.Vec{jitter * float64(i%2), 0, 0})
		}
		return out
	}
	tiny := make([]transform.Vec, len(spread))
	for i, p := range spread {
		tiny[i] = p.Scale(1e-300)
	}
	tests := []struct {
		name           string
		source, target []transform.Vec
		want           string
	}{
		{"source all equal", same(transform.Vec{5, 5, 5}, 0), spread, "one source position"},
		{"target all equal", spread, same(transform.Vec{1, 2, 3}, 0), "one target position"},
		{"source within a nanometre", same(transform.Vec{5, 5, 5}, 5e-4), spread, "one source position"},
		{"coordinates near 1e-300", tiny, tiny, "one source position"},
	}
	for _, tc := range tests {
		for _, model := range []transform.Kind{"", transform.Translation, transform.Affine, transform.TPS} {
			p := &Problem{Dim: 3, Source: tc.source, Target: tc.target}
			for i := range tc.source {
				p.IDs = append(p.IDs, string(rune('a'+i)))
				p.Kinds = append(p.Kinds, landmarks.KindVessel)
			}
			_, err := Assess(p, Settings{Model: model, Smoothing: Smoothing{Auto: true}})
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("%s, model %q: error %v, want one saying %q", tc.name, model, err, tc.want)
			}
		}
	}
}

// Coordinates whose sums overflow make no model panic in the linear
// algebra: each either fits to a map that gives finite positions or says
// why not.
func TestAssessOverflowingCoordinates(t *testing.T) {
	p := &Problem{Dim: 3}
	for i := range 8 {
		f := float64(i)
		p.IDs = append(p.IDs, string(rune('a'+i)))
		p.Kinds = append(p.Kinds, landmarks.KindVessel)
		p.Source = append(p.Source, transform.Vec{1.7e308 - f*1e300, -1.7e308 + f*1e302, f * 1e306})
		p.Target = append(p.Target, p.Source[i])
	}
	for _, model := range []transform.Kind{"", transform.Translation, transform.Rigid, transform.Affine, transform.TPS} {
		a, err := Assess(p, Settings{Model: model, Smoothing: Smoothing{Auto: true}})
		if err != nil {
			continue
		}
		if y := a.Result.Transform.Apply(p.Source[3]); !y.IsFinite() {
			t.Errorf("model %q maps landmark d to %v", model, y)
		}
	}
}

func TestWriteMappedRefusesNonFinite(t *testing.T) {
	cells, err := landmarks.ParsePoints("cells.csv", "cells", strings.NewReader("id,x,y,z\nc1,1,2,3\n# note\nc2,4,5,6\n"))
	if err != nil {
		t.Fatal(err)
	}
	good := Mapped{Pos: transform.Vec{1, 2, 3}, SD: transform.Vec{1, 1, 1}, R95: 3, Status: status.OK}
	tests := []struct {
		name string
		bad  Mapped
		want string
	}{
		{"NaN position", Mapped{Pos: transform.Vec{1, math.NaN(), 3}, SD: good.SD, R95: 3, Status: status.OK}, `cells.csv:4: column "y": cell "c2"`},
		{"infinite sd", Mapped{Pos: good.Pos, SD: transform.Vec{1, 1, math.Inf(1)}, R95: 3, Status: status.OK}, `column "sd_z_um"`},
		{"NaN radius", Mapped{Pos: good.Pos, SD: good.SD, R95: math.NaN(), Status: status.Extrapolated}, `column "r95_um"`},
	}
	for _, tc := range tests {
		var buf bytes.Buffer
		err := WriteMapped(&buf, cells, []Mapped{good, tc.bad}, NewMappedLayout(cells, FrameTarget, nil), nil)
		if err == nil || !strings.Contains(err.Error(), tc.want) || !strings.Contains(err.Error(), "not a finite number") {
			t.Errorf("%s: error %v, want one saying %q", tc.name, err, tc.want)
		}
		if strings.Contains(strings.ToLower(buf.String()), "nan") || strings.Contains(strings.ToLower(buf.String()), "inf") {
			t.Errorf("%s: wrote %q", tc.name, buf.String())
		}
	}
}

func TestRadiusOfNonFiniteCovariance(t *testing.T) {
	for _, dim := range []int{2, 3} {
		for _, bad := range []float64{math.NaN(), math.Inf(1), math.Inf(-1)} {
			cov := transform.Mat{{1, 0, 0}, {0, bad, 0}, {0, 0, 1}}
			if r := Radius95(dim).Radius(cov); !math.IsNaN(r) {
				t.Errorf("%d-D radius of a covariance holding %v: %v, want NaN", dim, bad, r)
			}
		}
	}
}
