package imaging

import (
	"path/filepath"
	"testing"
)

// A crop read through Volume holds the same voxels as the stack read whole,
// zero outside, for TIFF files in strips and for folders of planes.
func TestVolumeCrop(t *testing.T) {
	dir := t.TempDir()
	for _, bits := range []int{8, 16} {
		s := patternStack(t, 37, 29, 5, bits)
		path := filepath.Join(dir, "s.tif")
		if err := WriteTIFF(path, s); err != nil {
			t.Fatal(err)
		}
		v, err := OpenVolume(path)
		if err != nil {
			t.Fatal(err)
		}
		if v.Width != 37 || v.Height != 29 || v.Depth != 5 || v.Bits != bits {
			t.Fatalf("volume %d × %d × %d of %d bits", v.Width, v.Height, v.Depth, v.Bits)
		}
		for _, box := range [][6]int{{0, 0, 0, 37, 29, 5}, {5, 7, 1, 10, 6, 2}, {-3, -2, -1, 8, 9, 3}, {30, 25, 4, 12, 10, 4}, {100, 0, 0, 3, 3, 1}} {
			c, err := v.Crop(box[0], box[1], box[2], box[3], box[4], box[5])
			if err != nil {
				t.Fatal(err)
			}
			for k := range box[5] {
				for j := range box[4] {
					for i := range box[3] {
						if got, want := c.At(i, j, k), s.At(box[0]+i, box[1]+j, box[2]+k); got != want {
							t.Fatalf("%d bits, box %v: voxel (%d, %d, %d) %d, want %d", bits, box, i, j, k, got, want)
						}
					}
				}
			}
		}
		v.Close()
	}
}
