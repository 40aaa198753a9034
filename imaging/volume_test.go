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

// Crops of the outside-written test stacks (tifffile: strips of several
// rows, tiles, LZW, Deflate, PackBits, both byte orders; a folder of
// planes) agree with the stacks read whole.
func TestVolumeCropSamples(t *testing.T) {
	dir := filepath.Join("..", "testdata", "images")
	for _, name := range []string{"stack8_le.tif", "stack16_be.tif", "stack16_deflate.tif", "stack16_tiled.tif", "stack8_deflate_be.tif", "stack8_lzw.tif", "stack8_packbits.tif", "miniswhite8.tif", "planes", "plane16.png"} {
		path := filepath.Join(dir, name)
		whole, err := ReadStack(path)
		if err != nil {
			t.Fatal(err)
		}
		v, err := OpenVolume(path)
		if err != nil {
			t.Fatal(err)
		}
		w, h, d := whole.Width, whole.Height, whole.Depth
		for _, box := range [][6]int{{0, 0, 0, w, h, d}, {w / 3, h / 4, d / 2, w / 2, h / 3, 1}, {-2, h - 3, 0, 5, 6, d + 1}} {
			c, err := v.Crop(box[0], box[1], box[2], box[3], box[4], box[5])
			if err != nil {
				t.Fatalf("%s: %v", name, err)
			}
			for k := range box[5] {
				for j := range box[4] {
					for i := range box[3] {
						if got, want := c.At(i, j, k), whole.At(box[0]+i, box[1]+j, box[2]+k); got != want {
							t.Fatalf("%s, box %v: voxel (%d, %d, %d) %d, want %d", name, box, i, j, k, got, want)
						}
					}
				}
			}
		}
		v.Close()
	}
}

// countingReader counts the bytes read through it.
type countingReader struct {
	r interface {
		ReadAt([]byte, int64) (int, error)
	}
	n int64
}

func (c *countingReader) ReadAt(p []byte, off int64) (int, error) {
	n, err := c.r.ReadAt(p, off)
	c.n += int64(n)
	return n, err
}

// A crop reads only the pages and the strips or tiles it needs.
func TestVolumeReadsOnlyWhatItNeeds(t *testing.T) {
	checked := 0
	for _, name := range []string{"stack16_tiled.tif", "stack8_lzw.tif", "stack8_le.tif"} {
		v, err := OpenVolume(filepath.Join("..", "testdata", "images", name))
		if err != nil {
			t.Fatal(err)
		}
		if len(v.pages[0].offsets) < 4 {
			v.Close()
			t.Logf("%s: %d blocks a page, too few to tell", name, len(v.pages[0].offsets))
			continue
		}
		checked++
		c := &countingReader{r: v.tiff.r}
		v.tiff.r = c
		if _, err := v.Crop(0, 0, 0, v.Width, v.Height, v.Depth); err != nil {
			t.Fatal(err)
		}
		all := c.n
		c.n = 0
		if _, err := v.Crop(1, 1, 1, 2, 2, 1); err != nil {
			t.Fatal(err)
		}
		if 4*c.n > all/int64(v.Depth) {
			t.Errorf("%s: a 2 × 2 crop of one page read %d bytes, the whole stack %d", name, c.n, all)
		}
		v.Close()
	}
	if checked == 0 {
		t.Fatal("no sample stack has enough blocks a page")
	}
}
