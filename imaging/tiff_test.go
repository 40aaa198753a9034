package imaging

import (
	"bytes"
	"encoding/binary"
	"os"
	"path/filepath"
	"strings"
	"testing"

	xtiff "golang.org/x/image/tiff"
)

// The layout WriteTIFF gives a 13 × 7 8-bit stack: page data of 91 bytes
// padded to 92, then a directory of 11 entries (138 bytes).
const (
	craftPlane = 91
	craftIFD   = 138
)

// craftedTIFF returns the bytes WriteTIFF writes for a 13 × 7 × 3 8-bit stack.
func craftedTIFF(t testing.TB) []byte {
	t.Helper()
	path := filepath.Join(t.TempDir(), "c.tif")
	if err := WriteTIFF(path, patternStack(t, 13, 7, 3, 8)); err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// ifdAt is the offset of page k's directory in a crafted file: the
// directories follow the three pages' pixels.
func ifdAt(k int) int { return 8 + 3*craftPlane + 1 + k*craftIFD } // one pad byte

// setEntry overwrites the value of entry n of page k (SHORT or LONG).
func setEntry(b []byte, k, n int, v uint32) {
	e := b[ifdAt(k)+2+12*n:]
	if binary.LittleEndian.Uint16(e[2:]) == 3 {
		binary.LittleEndian.PutUint16(e[8:], uint16(v))
		return
	}
	binary.LittleEndian.PutUint32(e[8:], v)
}

// Entry positions in WriteTIFF's directories.
const (
	entWidth = 1 + iota
	entHeight
	entBits
	entCompression
	entPhotometric
	entStripOffsets
	entSamples
	entRowsPerStrip
	entStripCounts
	entSampleFormat
)

func TestReadDamaged(t *testing.T) {
	tests := []struct {
		name  string
		patch func(b []byte) []byte
		want  []string
	}{
		{"loop", func(b []byte) []byte {
			binary.LittleEndian.PutUint32(b[ifdAt(2)+2+12*11:], uint32(ifdAt(0)))
			return b
		}, []string{"page 3", "loops back"}},
		{"self loop", func(b []byte) []byte {
			binary.LittleEndian.PutUint32(b[ifdAt(0)+2+12*11:], uint32(ifdAt(0)))
			return b
		}, []string{"page 1", "loops back"}},
		{"first directory past the end", func(b []byte) []byte {
			binary.LittleEndian.PutUint32(b[4:], uint32(len(b)+100))
			return b
		}, []string{"page 0", "outside the file"}},
		{"directory runs past the end", func(b []byte) []byte { return b[:ifdAt(2)+50] }, []string{"page 2", "runs past the end"}},
		{"no entries", func(b []byte) []byte {
			binary.LittleEndian.PutUint16(b[ifdAt(1):], 0)
			return b
		}, []string{"page 1", "no entries"}},
		{"absurd width", func(b []byte) []byte { setEntry(b, 0, entWidth, 1<<24); return b }, []string{"page 0", "strip 0 holds 91 bytes, want 117440512"}},
		{"huge width", func(b []byte) []byte { setEntry(b, 0, entWidth, 1<<30); return b }, []string{"page 0", "too large"}},
		{"zero height", func(b []byte) []byte { setEntry(b, 1, entHeight, 0); return b }, []string{"page 1", "at least 1 × 1"}},
		{"strip past the end", func(b []byte) []byte { setEntry(b, 2, entStripOffsets, uint32(len(b)-10)); return b }, []string{"page 2", "strip 0", "past the end"}},
		{"strip count past the end", func(b []byte) []byte { setEntry(b, 0, entStripCounts, 1<<31); return b }, []string{"page 0", "strip 0", "past the end"}},
		{"12 bits", func(b []byte) []byte { setEntry(b, 0, entBits, 12); return b }, []string{"page 0", "12-bit"}},
		{"JPEG", func(b []byte) []byte { setEntry(b, 1, entCompression, 7); return b }, []string{"page 1", "compression 7"}},
		{"signed", func(b []byte) []byte { setEntry(b, 0, entSampleFormat, 2); return b }, []string{"page 0", "signed"}},
		{"float", func(b []byte) []byte { setEntry(b, 0, entSampleFormat, 3); return b }, []string{"page 0", "floating-point"}},
		{"palette", func(b []byte) []byte { setEntry(b, 0, entPhotometric, 3); return b }, []string{"page 0", "palette"}},
		{"RGB with one sample", func(b []byte) []byte { setEntry(b, 0, entPhotometric, 2); return b }, []string{"page 0", "RGB", "1 samples"}},
		{"pages differ", func(b []byte) []byte { setEntry(b, 1, entWidth, 12); return b }, []string{"page 1", "12 × 7", "page 0 is 13 × 7", "must agree"}},
		{"compressed strip too small", func(b []byte) []byte {
			setEntry(b, 0, entCompression, compDeflate)
			setEntry(b, 0, entWidth, 1<<24-1)
			return b
		}, []string{"page 0", "cannot hold"}},
		{"deflate garbage", func(b []byte) []byte { setEntry(b, 0, entCompression, compDeflate); return b }, []string{"page 0", "strip 0", "deflate"}},
		{"LZW garbage", func(b []byte) []byte { setEntry(b, 0, entCompression, compLZW); return b }, []string{"page 0", "strip 0"}},
		{"shared pixel data", func(b []byte) []byte {
			for k := range 3 {
				setEntry(b, k, entStripOffsets, 8)
			}
			// Each page now claims the same 91 bytes; make them claim
			// more than the file holds together.
			for k := range 3 {
				setEntry(b, k, entHeight, 7)
				setEntry(b, k, entStripCounts, uint32(len(b)-8))
				setEntry(b, k, entWidth, uint32((len(b)-8)/7))
			}
			return b
		}, []string{"claim more pixel data than the file holds"}},
		{"BigTIFF", func(b []byte) []byte { b[2] = 43; return b }, []string{"BigTIFF"}},
		{"bad version", func(b []byte) []byte { b[2] = 41; return b }, []string{"version 41"}},
		{"short", func(b []byte) []byte { return b[:7] }, []string{"too short"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			b := tt.patch(craftedTIFF(t))
			_, err := decode(bytes.NewReader(b), int64(len(b)), "crafted.tif", false)
			if err == nil {
				t.Fatal("no error")
			}
			for _, w := range append(tt.want, "crafted.tif") {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q does not mention %q", err, w)
				}
			}
		})
	}
}

// TestReadTruncated cuts a file at every length: each must fail, naming
// the file, and none may panic.
func TestReadTruncated(t *testing.T) {
	for _, file := range []string{"stack16_deflate.tif", "stack8_lzw.tif", "stack8_packbits.tif", "stack16_tiled.tif", "plane16.png"} {
		full, err := os.ReadFile(filepath.Join(testdata, file))
		if err != nil {
			t.Fatal(err)
		}
		for n := range len(full) {
			b := full[:n]
			s, err := decode(bytes.NewReader(b), int64(n), file, false)
			if err == nil {
				// Trailing bytes that no page needs may go.
				checkPattern(t, s, map[bool]func(i, j, k int) uint16{true: pattern16, false: pattern8}[s.Bits == 16])
				continue
			}
			if !strings.Contains(err.Error(), file) {
				t.Fatalf("cut at %d bytes: error %q does not name the file", n, err)
			}
		}
	}
}

func TestUnpackBits(t *testing.T) {
	tests := []struct {
		src  []byte
		n    int
		want []byte
		ok   bool
	}{
		// The example of TIFF 6.0, section 9.
		{[]byte{0xFE, 0xAA, 0x02, 0x80, 0x00, 0x2A, 0xFD, 0xAA, 0x03, 0x80, 0x00, 0x2A, 0x22, 0xF7, 0xAA},
			24, []byte{0xAA, 0xAA, 0xAA, 0x80, 0x00, 0x2A, 0xAA, 0xAA, 0xAA, 0xAA, 0x80, 0x00, 0x2A, 0x22, 0xAA, 0xAA, 0xAA, 0xAA, 0xAA, 0xAA, 0xAA, 0xAA, 0xAA, 0xAA}, true},
		{[]byte{0x80, 0x00, 0x07}, 1, []byte{0x07}, true}, // -128 is a no-op
		{[]byte{0x05, 1, 2}, 6, nil, false},               // literal run cut short
		{[]byte{0xF0}, 3, nil, false},                     // repeat run without its byte
		{[]byte{0x00, 9}, 2, nil, false},                  // too little data
		{[]byte{0x81, 5}, 4, []byte{5, 5, 5, 5}, true},    // a run longer than needed
	}
	for n, tt := range tests {
		dst := make([]byte, tt.n)
		err := unpackBits(dst, tt.src)
		if (err == nil) != tt.ok {
			t.Errorf("case %d: error %v, want ok %v", n, err, tt.ok)
			continue
		}
		if tt.ok && !bytes.Equal(dst, tt.want) {
			t.Errorf("case %d: got % x, want % x", n, dst, tt.want)
		}
	}
}

// FuzzReadTIFF feeds arbitrary bytes to the reader: it must never panic,
// every stack it returns must be consistent, and it may not hold more
// voxels than maxExpansion per byte of input (the allocation bound).
// Where x/image/tiff also decodes page 0 to grey, the two must agree.
func FuzzReadTIFF(f *testing.F) {
	files, _ := filepath.Glob(filepath.Join(testdata, "*.tif"))
	for _, file := range files {
		if b, err := os.ReadFile(file); err == nil {
			f.Add(b)
		}
	}
	f.Add(craftedTIFF(f))
	f.Fuzz(func(t *testing.T, data []byte) {
		s, err := decode(bytes.NewReader(data), int64(len(data)), "fuzz.tif", false)
		if err != nil {
			if !strings.Contains(err.Error(), "fuzz.tif") {
				t.Fatalf("error %q does not name the file", err)
			}
			return
		}
		if err := s.check(); err != nil {
			t.Fatal(err)
		}
		if len(s.Data) > maxExpansion*len(data) {
			t.Fatalf("%d voxels from %d bytes", len(s.Data), len(data))
		}
		for _, v := range s.Data {
			if v > s.MaxValue() {
				t.Fatalf("value %d in a %d-bit stack", v, s.Bits)
			}
		}
		img, err := xtiff.Decode(bytes.NewReader(data))
		if err != nil || s.Colour {
			return
		}
		// x/image/tiff takes a missing photometric tag for white-is-zero.
		tf, first, _ := openTIFF(bytes.NewReader(data), int64(len(data)), "fuzz.tif")
		if pages, err := tf.pages(first); err != nil || pages[0].photometricAssumed {
			return
		}
		switch img.(type) {
		case interface{ Opaque() bool }:
		default:
			return
		}
		if img.Bounds().Dx() != s.Width || img.Bounds().Dy() != s.Height {
			return
		}
		want, colour := greyPixels(img, s.Bits)
		if colour {
			return
		}
		for n, v := range want {
			if v != s.Data[n] {
				t.Fatalf("pixel %d: read %d, x/image/tiff %d", n, s.Data[n], v)
			}
		}
	})
}
