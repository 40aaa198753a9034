package imaging

import (
	"bytes"
	"context"
	"errors"
	"image"
	"image/color"
	"image/png"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	xtiff "golang.org/x/image/tiff"

	"ferry/transform"
)

// goldenGeometry is the voxel size and origin recorded in go_written16.tif.
var goldenGeometry = Geometry{VoxelUM: transform.Vec{0.3, 0.4, 2.5}, OriginUM: transform.Vec{12, -6, 100}, HasOrigin: [3]bool{true, true, true}}

// checkGeometry compares a geometry read back with what was meant, to
// nine significant digits (a TIFF RATIONAL's precision for these values).
func checkGeometry(t *testing.T, got Geometry, voxel, origin transform.Vec) {
	t.Helper()
	for a := range 3 {
		if math.Abs(got.VoxelUM[a]-voxel[a]) > 1e-9*voxel[a] || math.Abs(got.OriginUM[a]-origin[a]) > 1e-9*(1+math.Abs(origin[a])) {
			t.Fatalf("geometry read back as voxel %v µm, origin %v µm (from %q); want voxel %v, origin %v", got.VoxelUM, got.OriginUM, got.From, voxel, origin)
		}
	}
}

// patternStack is a stack filled with make_images.py's pattern of its depth.
func patternStack(t testing.TB, width, height, depth, bits int) *Stack {
	t.Helper()
	s, err := NewStack(width, height, depth, bits)
	if err != nil {
		t.Fatal(err)
	}
	f := pattern16
	if bits == 8 {
		f = pattern8
	}
	for k := range depth {
		for j := range height {
			for i := range width {
				s.Set(i, j, k, f(i, j, k))
			}
		}
	}
	return s
}

func TestWriteTIFFRoundTrip(t *testing.T) {
	dir := t.TempDir()
	for _, tt := range []struct{ w, h, d, bits int }{
		{13, 7, 3, 8}, {13, 7, 4, 16}, {1, 1, 1, 8}, {4, 3, 2, 16}, {5, 5, 1, 8},
	} {
		s := patternStack(t, tt.w, tt.h, tt.d, tt.bits)
		path := filepath.Join(dir, "out.tif")
		if err := WriteTIFF(path, s); err != nil {
			t.Fatal(err)
		}
		got, err := ReadStack(path)
		if err != nil {
			t.Fatal(err)
		}
		if got.Width != tt.w || got.Height != tt.h || got.Depth != tt.d || got.Bits != tt.bits {
			t.Fatalf("read back %d × %d × %d of %d bits, want %d × %d × %d of %d", got.Width, got.Height, got.Depth, got.Bits, tt.w, tt.h, tt.d, tt.bits)
		}
		want := pattern16
		if tt.bits == 8 {
			want = pattern8
		}
		checkPattern(t, got, want)

		// An independent decoder agrees on page 0.
		data, _ := os.ReadFile(path)
		img, err := xtiff.Decode(bytes.NewReader(data))
		if err != nil {
			t.Fatalf("x/image/tiff cannot read what WriteTIFF wrote: %v", err)
		}
		grey, _ := greyPixels(img, tt.bits)
		for n, v := range grey {
			if v != got.Data[n] {
				t.Fatalf("x/image/tiff reads pixel %d as %d, we wrote %d", n, v, got.Data[n])
			}
		}
	}
}

// TestGoldenFiles keeps the files that make_images.py --verify checks with
// tifffile and Pillow in step with the writers: WriteTIFF must reproduce
// the committed TIFF files byte for byte, and the committed PNG must hold
// what WritePNG writes. Set FERRY_UPDATE_GOLDEN=1 to rewrite them.
func TestGoldenFiles(t *testing.T) {
	update := os.Getenv("FERRY_UPDATE_GOLDEN") == "1"
	for _, g := range []struct {
		name    string
		w, h, d int
		bits    int
		geom    Geometry
	}{
		// make_images.py --verify checks with tifffile that these record
		// their geometry (.ci/run passes it these values), and reads the
		// 8-bit one's odd-sized pages through tifffile's ImageJ path,
		// which takes the pages as one block.
		{"go_written8.tif", 13, 7, 3, 8, Geometry{VoxelUM: transform.Vec{0.5, 0.5, 1}, HasOrigin: [3]bool{true, true, true}}},
		{"go_written16.tif", 13, 7, 4, 16, goldenGeometry},
		{"go_written16.png", 13, 7, 1, 16, Geometry{}},
		{"go_written8.png", 13, 7, 1, 8, Geometry{}},
	} {
		t.Run(g.name, func(t *testing.T) {
			s := patternStack(t, g.w, g.h, g.d, g.bits)
			s.Geometry = g.geom
			golden := filepath.Join(testdata, g.name)
			out := filepath.Join(t.TempDir(), g.name)
			if update {
				out = golden
			}
			var err error
			if strings.HasSuffix(g.name, ".png") {
				err = WritePNG(out, s.Image(0))
			} else {
				err = WriteTIFF(out, s)
			}
			if err != nil {
				t.Fatal(err)
			}
			read, err := ReadStack(golden)
			if err != nil {
				t.Fatal(err)
			}
			checkPattern(t, read, map[int]func(i, j, k int) uint16{8: pattern8, 16: pattern16}[g.bits])
			if g.geom.HasVoxel() {
				checkGeometry(t, read.Geometry, g.geom.VoxelUM, g.geom.OriginUM)
			}
			if strings.HasSuffix(g.name, ".tif") {
				a, _ := os.ReadFile(out)
				b, _ := os.ReadFile(golden)
				if !bytes.Equal(a, b) {
					t.Errorf("WriteTIFF no longer writes %s byte for byte; rerun with FERRY_UPDATE_GOLDEN=1 and make_images.py --verify", golden)
				}
			}
		})
	}
}

func TestWritePNG(t *testing.T) {
	dir := t.TempDir()
	rgba := image.NewRGBA(image.Rect(0, 0, 3, 2))
	rgba.Set(1, 1, color.RGBA{230, 159, 0, 255})
	path := filepath.Join(dir, "o.png")
	if err := WritePNG(path, rgba); err != nil {
		t.Fatal(err)
	}
	f, _ := os.Open(path)
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatal(err)
	}
	if r, g, b, _ := img.At(1, 1).RGBA(); r>>8 != 230 || g>>8 != 159 || b>>8 != 0 {
		t.Errorf("pixel (1, 1) = %d %d %d, want 230 159 0", r>>8, g>>8, b>>8)
	}
	if err := WritePNG(filepath.Join(dir, "empty.png"), image.NewRGBA(image.Rectangle{})); err == nil {
		t.Error("an empty image was written")
	}
}

// TestWriteWholeOrNothing checks that a failed write leaves the old file
// untouched and no temporary file behind.
func TestWriteWholeOrNothing(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "keep.tif")
	if err := os.WriteFile(path, []byte("old"), 0o644); err != nil {
		t.Fatal(err)
	}
	boom := errors.New("disk on fire")
	err := writeAtomic(context.Background(), path, func(w io.Writer) error {
		w.Write([]byte("half a file"))
		return boom
	})
	if !errors.Is(err, boom) || !strings.Contains(err.Error(), "keep.tif") {
		t.Errorf("error %v: want the cause and the file name", err)
	}
	if b, _ := os.ReadFile(path); string(b) != "old" {
		t.Errorf("the old file now holds %q", b)
	}
	entries, _ := os.ReadDir(dir)
	if len(entries) != 1 {
		t.Errorf("%d files in the folder after a failed write, want 1", len(entries))
	}
	if err := WriteTIFF(filepath.Join(dir, "no", "such", "folder.tif"), patternStack(t, 2, 2, 1, 8)); err == nil {
		t.Error("no error writing into a missing folder")
	}
	if err := WriteTIFF(dir, patternStack(t, 2, 2, 1, 8)); err == nil {
		t.Error("no error writing over a folder")
	}
}

func TestWriteRefusesOwnInput(t *testing.T) {
	path := filepath.Join(t.TempDir(), "in.tif")
	if err := WriteTIFF(path, patternStack(t, 3, 2, 2, 16)); err != nil {
		t.Fatal(err)
	}
	s, err := ReadStack(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := WriteTIFF(path, s); err == nil || !strings.Contains(err.Error(), "write over") {
		t.Errorf("writing over the input: error %v", err)
	}
	bad := &Stack{Width: 3, Height: 2, Depth: 1, Bits: 12, Data: make([]uint16, 6)}
	if err := WriteTIFF(filepath.Join(t.TempDir(), "x.tif"), bad); err == nil {
		t.Error("a 12-bit stack was written")
	}
}

// A float32 stack records its origin in voxels as ImageJ does, a zero
// origin as 0 (not -0, which readers may take for text).
func TestFloat32TIFFOrigin(t *testing.T) {
	for _, tc := range []struct {
		origin [3]float64
		want   string
	}{
		{[3]float64{0, 0, 0}, "xorigin=0\nyorigin=0\nzorigin=0\n"},
		{[3]float64{-4, 6, 10}, "xorigin=2\nyorigin=-3\nzorigin=-2\n"},
	} {
		s := &Float32Stack{Width: 2, Height: 1, Depth: 2, Channels: 1, Data: make([]float32, 4),
			VoxelUM: [3]float64{2, 2, 5}, OriginUM: tc.origin}
		var buf bytes.Buffer
		if err := WriteFloat32TIFF(&buf, s); err != nil {
			t.Fatal(err)
		}
		if !bytes.Contains(buf.Bytes(), []byte(tc.want)) {
			t.Errorf("origin %v: the description lacks %q", tc.origin, tc.want)
		}
	}
}
