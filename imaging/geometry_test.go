package imaging

import (
	"math"
	"path/filepath"
	"testing"

	"ferry/transform"
)

// TestReadGeometry reads the voxel size and origin that other writers
// recorded: tifffile's ImageJ mode (make_images.py writes imagej16.tif with
// resolution 4 and 2 pixels per µm, spacing 2 µm, xorigin 4 and zorigin −3
// pixels) and plain centimetre resolution tags (res_cm8.tif, 40000 pixels
// per cm), and finds nothing where nothing is recorded.
func TestReadGeometry(t *testing.T) {
	for _, tt := range []struct {
		file          string
		voxel, origin transform.Vec
		hasOrigin     [3]bool
		from          string
	}{
		{"imagej16.tif", transform.Vec{0.25, 0.5, 2}, transform.Vec{-1, 0, 6}, [3]bool{true, true, true}, "ImageJ metadata"},
		{"res_cm8.tif", transform.Vec{0.25, 0.25, 0}, transform.Vec{}, [3]bool{}, "TIFF resolution tags"},
		{"stack8_le.tif", transform.Vec{}, transform.Vec{}, [3]bool{}, ""},
		{"go_written16.tif", goldenGeometry.VoxelUM, goldenGeometry.OriginUM, [3]bool{true, true, true}, "ImageJ metadata"},
	} {
		t.Run(tt.file, func(t *testing.T) {
			s, err := ReadStack(filepath.Join(testdata, tt.file))
			if err != nil {
				t.Fatal(err)
			}
			g := s.Geometry
			for a := range 3 {
				if math.Abs(g.VoxelUM[a]-tt.voxel[a]) > 1e-12 || math.Abs(g.OriginUM[a]-tt.origin[a]) > 1e-12 {
					t.Fatalf("voxel %v, origin %v; want %v, %v", g.VoxelUM, g.OriginUM, tt.voxel, tt.origin)
				}
			}
			if g.HasOrigin != tt.hasOrigin || g.From != tt.from {
				t.Errorf("HasOrigin %v from %q, want %v from %q", g.HasOrigin, g.From, tt.hasOrigin, tt.from)
			}
		})
	}
}

func TestCalibrationRules(t *testing.T) {
	for _, tt := range []struct {
		name string
		c    tiffCalibration
		want transform.Vec
	}{
		{"72 dpi is a display default", tiffCalibration{xres: 72, yres: 72, resUnit: resUnitInch}, transform.Vec{}},
		{"no unit tag means inch, and is ignored", tiffCalibration{xres: 3, yres: 3}, transform.Vec{}},
		{"12700 per inch is 2 µm", tiffCalibration{xres: 12700, yres: 12700, resUnit: resUnitInch}, transform.Vec{2, 2, 0}},
		{"ImageJ in nm", tiffCalibration{xres: 0.25, yres: 0.2, resUnit: resUnitNone, description: "ImageJ=1.54\nunit=nm\nspacing=40\n"}, transform.Vec{0.004, 0.005, 0.04}},
		{"ImageJ uncalibrated", tiffCalibration{xres: 1, yres: 1, description: "ImageJ=1.54\nimages=3\nslices=3\n"}, transform.Vec{}},
	} {
		t.Run(tt.name, func(t *testing.T) {
			got := tt.c.geometry().VoxelUM
			for a := range 3 {
				if math.Abs(got[a]-tt.want[a]) > 1e-12 {
					t.Fatalf("voxel %v µm, want %v", got, tt.want)
				}
			}
		})
	}
}

func TestRational(t *testing.T) {
	for _, x := range []float64{1, 1.0 / 3, 250, 4, 0.1, 1.0 / 0.004, 1e-6, 12345.678} {
		n, d := rational(x)
		if got := float64(n) / float64(d); math.Abs(got-x) > 1e-9*x {
			t.Errorf("rational(%g) = %d/%d = %g", x, n, d, got)
		}
	}
}
