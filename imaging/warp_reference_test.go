package imaging

import (
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"testing"

	"ferry/transform"
)

// warpReference is testdata/reference/warp_reference.json, written by
// testdata/reference/warp_reference.py with SciPy's
// scipy.ndimage.map_coordinates (order 1, mode 'nearest': trilinear
// interpolation with the edge voxels extended) on positions it computes
// itself: numpy.linalg.solve for the affine case, RBFInterpolator for the
// spline, scipy.optimize.fsolve for the spline's inverse.
type warpReference struct {
	Scipy string `json:"scipy"`
	Cases []struct {
		Name          string        `json:"name"`
		Pattern       string        `json:"pattern"`
		StackSize     [3]int        `json:"stack_size"`
		StackVoxelUM  transform.Vec `json:"stack_voxel_um"`
		StackOriginUM transform.Vec `json:"stack_origin_um"`
		Matrix        *[3][3]float64
		Offset        transform.Vec
		Source        [][3]float64
		Target        [][3]float64
		OutOriginUM   transform.Vec `json:"out_origin_um"`
		OutVoxelUM    transform.Vec `json:"out_voxel_um"`
		OutSize       [3]int        `json:"out_size"`
		Inverse       bool          `json:"inverse"`
		Expected      []int         `json:"expected"`
	} `json:"cases"`
}

// TestWarpMatchesSciPy warps each reference stack with its transform onto
// the reference grid and wants every voxel within 1 (a rounding tie) of
// SciPy's value, outside voxels 0 included. Positions are mapped exactly
// (Exact) so that the comparison is of the interpolation and the inverse;
// for the affine case, where the adaptive grid is exact too, also without.
func TestWarpMatchesSciPy(t *testing.T) {
	b, err := os.ReadFile(filepath.Join("..", "testdata", "reference", "warp_reference.json"))
	if err != nil {
		t.Fatal(err)
	}
	var ref warpReference
	if err := json.Unmarshal(b, &ref); err != nil {
		t.Fatalf("warp_reference.json: %v", err)
	}
	if len(ref.Cases) != 3 {
		t.Fatalf("warp_reference.json has %d cases, want 3", len(ref.Cases))
	}
	for _, c := range ref.Cases {
		var tr transform.Transform
		if c.Matrix != nil {
			tr = &transform.Linear{Model: transform.Affine, D: 3, A: transform.Mat(*c.Matrix), T: c.Offset}
		} else {
			src, dst := make([]transform.Vec, len(c.Source)), make([]transform.Vec, len(c.Target))
			for i := range src {
				src[i], dst[i] = transform.Vec(c.Source[i]), transform.Vec(c.Target[i])
			}
			res, err := transform.Fit(transform.TPS, 3, src, dst, transform.Options{})
			if err != nil {
				t.Fatal(err)
			}
			tr = res.Transform
		}
		bits := 16
		f := pattern16
		if c.Pattern == "pattern8" {
			bits, f = 8, pattern8
		}
		s, err := NewStack(c.StackSize[0], c.StackSize[1], c.StackSize[2], bits)
		if err != nil {
			t.Fatal(err)
		}
		for k := range s.Depth {
			for j := range s.Height {
				for i := range s.Width {
					s.Set(i, j, k, f(i, j, k))
				}
			}
		}
		g := Geometry{VoxelUM: c.StackVoxelUM, OriginUM: c.StackOriginUM}
		grid := WarpGrid{Size: c.OutSize, VoxelUM: c.OutVoxelUM, OriginUM: c.OutOriginUM}
		for _, exact := range []bool{true, false} {
			if !exact && c.Matrix == nil {
				continue
			}
			name := c.Name
			if !exact {
				name += ", adaptive"
			}
			t.Run(name, func(t *testing.T) {
				path := filepath.Join(t.TempDir(), "warped.tif")
				opt := WarpOptions{VoxelUM: c.OutVoxelUM, Inverse: c.Inverse, Exact: exact}
				if _, err := Warp(context.Background(), path, tr, MemoryPages(s), g, grid, opt, nil); err != nil {
					t.Fatal(err)
				}
				got, err := ReadStack(path)
				if err != nil {
					t.Fatal(err)
				}
				if len(got.Data) != len(c.Expected) {
					t.Fatalf("%d voxels, want %d", len(got.Data), len(c.Expected))
				}
				compared, worst := 0, 0
				for n, want := range c.Expected {
					if want < 0 {
						continue // on the box's face: either is right
					}
					compared++
					d := int(got.Data[n]) - want
					if d < 0 {
						d = -d
					}
					worst = max(worst, d)
					if d > 1 {
						t.Fatalf("voxel %d (i=%d, j=%d, k=%d) is %d, SciPy says %d", n, n%grid.Size[0], n/grid.Size[0]%grid.Size[1], n/grid.Size[0]/grid.Size[1], got.Data[n], want)
					}
				}
				if compared < len(c.Expected)*9/10 {
					t.Fatalf("only %d of %d voxels compared", compared, len(c.Expected))
				}
				checkGeometry(t, got.Geometry, grid.VoxelUM, grid.OriginUM)
			})
		}
	}
}
