package imaging

import (
	"bytes"
	"errors"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"testing"

	xtiff "golang.org/x/image/tiff"
)

// testdata is the folder written by testdata/images/make_images.py.
const testdata = "../testdata/images"

// The value patterns of make_images.py.
func pattern8(i, j, k int) uint16  { return uint16((7*i + 11*j + 37*k + 3) % 256) }
func pattern16(i, j, k int) uint16 { return uint16((263*i + 4099*j + 16411*k + 12345) % 65536) }

// colour8 is make_images.py's colour plane: channels R, G, B at (i, j).
func colour8(i, j int) (r, g, b uint32) {
	v := uint32(pattern8(i, j, 0))
	return v, (3*v + 50) % 256, 255 - v
}

// checkPattern compares every voxel of s with want.
func checkPattern(t *testing.T, s *Stack, want func(i, j, k int) uint16) {
	t.Helper()
	bad := 0
	for k := range s.Depth {
		for j := range s.Height {
			for i := range s.Width {
				if got, w := s.At(i, j, k), want(i, j, k); got != w {
					if bad < 5 {
						t.Errorf("%s: voxel (%d, %d, %d) = %d, want %d", s.Path, i, j, k, got, w)
					}
					bad++
				}
			}
		}
	}
	if bad > 0 {
		t.Errorf("%s: %d voxels differ", s.Path, bad)
	}
}

func TestReadStack(t *testing.T) {
	tests := []struct {
		file                 string
		width, height, depth int
		bits                 int
		want                 func(i, j, k int) uint16
	}{
		{"stack8_le.tif", 13, 7, 3, 8, pattern8},
		{"stack16_be.tif", 13, 7, 4, 16, pattern16},
		{"stack16_deflate.tif", 13, 7, 4, 16, pattern16},
		{"stack8_deflate_be.tif", 13, 7, 3, 8, pattern8},
		{"stack8_packbits.tif", 13, 7, 3, 8, pattern8},
		{"stack8_lzw.tif", 13, 7, 3, 8, pattern8},
		{"stack16_tiled.tif", 37, 21, 2, 16, pattern16},
		{"miniswhite8.tif", 13, 7, 1, 8, pattern8},
		{"plane16.tif", 13, 7, 1, 16, pattern16},
		{"plane8.png", 13, 7, 1, 8, pattern8},
		{"plane16.png", 13, 7, 1, 16, pattern16},
		{"planes", 13, 7, 3, 16, pattern16},
	}
	for _, tt := range tests {
		t.Run(tt.file, func(t *testing.T) {
			s, err := ReadStack(filepath.Join(testdata, tt.file))
			if err != nil {
				t.Fatal(err)
			}
			if s.Width != tt.width || s.Height != tt.height || s.Depth != tt.depth || s.Bits != tt.bits {
				t.Fatalf("got %d × %d × %d of %d bits, want %d × %d × %d of %d bits",
					s.Width, s.Height, s.Depth, s.Bits, tt.width, tt.height, tt.depth, tt.bits)
			}
			if s.Colour {
				t.Errorf("a grey file reported as colour")
			}
			checkPattern(t, s, tt.want)
		})
	}
}

// TestReadColour checks that colour planes become the BT.601 luma of their
// channels, the same from TIFF and PNG, and are flagged.
func TestReadColour(t *testing.T) {
	for _, file := range []string{"rgb8.tif", "rgb8.png"} {
		t.Run(file, func(t *testing.T) {
			s, err := ReadPlane(filepath.Join(testdata, file))
			if err != nil {
				t.Fatal(err)
			}
			if !s.Colour || s.Bits != 8 || s.Depth != 1 {
				t.Fatalf("Colour %v, %d bits, depth %d: want a colour-flagged 8-bit plane", s.Colour, s.Bits, s.Depth)
			}
			checkPattern(t, s, func(i, j, _ int) uint16 {
				r, g, b := colour8(i, j)
				// 0.299 R + 0.587 G + 0.114 B, rounded; the fixed-point
				// weights may differ from rounding the real product by one.
				want := (299*r + 587*g + 114*b + 500) / 1000
				got := luma(r*0x101, g*0x101, b*0x101, 8)
				if d := int(got) - int(want); d < -1 || d > 1 {
					t.Fatalf("luma(%d, %d, %d) = %d, want %d ± 1", r, g, b, got, want)
				}
				return got
			})
		})
	}
}

// TestReadAgreesWithXImage decodes page 0 of every test TIFF that
// golang.org/x/image/tiff reads as well, and compares the pixels.
func TestReadAgreesWithXImage(t *testing.T) {
	files, _ := filepath.Glob(filepath.Join(testdata, "*.tif"))
	compared := 0
	for _, file := range files {
		data, err := os.ReadFile(file)
		if err != nil {
			t.Fatal(err)
		}
		img, xerr := xtiff.Decode(bytes.NewReader(data))
		s, err := ReadStack(file)
		if xerr != nil || err != nil {
			t.Logf("%s: not compared: ours %v, x/image/tiff %v", file, err, xerr)
			continue
		}
		want, _ := greyPixels(img, s.Bits)
		got := s.PageData(0)
		for n := range want {
			if got[n] != want[n] {
				t.Errorf("%s: pixel %d: read %d, x/image/tiff %d", file, n, got[n], want[n])
				break
			}
		}
		compared++
	}
	if compared < 10 {
		t.Errorf("compared %d files with x/image/tiff, want at least 10 (run make_images.py?)", compared)
	}
}

func TestReadErrors(t *testing.T) {
	tests := []struct {
		path  string
		plane bool
		want  []string // substrings of the message
	}{
		{"bigtiff.tif", false, []string{"bigtiff.tif", "BigTIFF"}},
		{"mixed_size", false, []string{"a2.png", "12 × 7", "a1.png is 13 × 7"}},
		{"mixed_bits", false, []string{"b2.png", "16 bits", "b1.png"}},
		{"stack8_le.tif", true, []string{"stack8_le.tif", "3 pages"}},
		{"planes", true, []string{"planes", "folder"}},
		{"planes/notes.txt", false, []string{"notes.txt", "neither a TIFF nor a PNG"}},
		{"no_such_file.tif", false, []string{"no_such_file.tif"}},
	}
	for _, tt := range tests {
		t.Run(tt.path, func(t *testing.T) {
			read := ReadStack
			if tt.plane {
				read = ReadPlane
			}
			_, err := read(filepath.Join(testdata, tt.path))
			if err == nil {
				t.Fatal("no error")
			}
			for _, w := range tt.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q does not mention %q", err, w)
				}
			}
		})
	}
}

func TestNaturalOrder(t *testing.T) {
	names := []string{"z10.png", "z2.png", "z1.png", "a.png", "z01.png", "z1b.png", "Z3.png", "z002.png"}
	sorted := append([]string(nil), names...)
	for i := range sorted {
		for j := i + 1; j < len(sorted); j++ {
			if naturalCompare(sorted[j], sorted[i]) < 0 {
				sorted[i], sorted[j] = sorted[j], sorted[i]
			}
		}
	}
	want := "Z3.png a.png z01.png z1.png z1b.png z002.png z2.png z10.png"
	if got := strings.Join(sorted, " "); got != want {
		t.Errorf("natural order\n got %s\nwant %s", got, want)
	}
}

// A file that is not there is named first, as the table readers name
// theirs, and the error still says that it does not exist.
func TestOpenErrorNamesTheFile(t *testing.T) {
	missing := filepath.Join(t.TempDir(), "nothere.tif")
	for name, open := range map[string]func(string) error{
		"ReadStack": func(p string) error { _, err := ReadStack(p); return err },
		"ReadPlane": func(p string) error { _, err := ReadPlane(p); return err },
		"OpenPages": func(p string) error { _, err := OpenPages(p); return err },
	} {
		err := open(missing)
		if err == nil || err.Error() != missing+": cannot open: no such file or directory" || !errors.Is(err, fs.ErrNotExist) {
			t.Errorf("%s: error %v, want %q that is fs.ErrNotExist", name, err, missing+": cannot open: no such file or directory")
		}
	}
}
