package imaging

import (
	"encoding/binary"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
)

// Float32Stack is a multi-channel float32 volume: Channels values per voxel
// (a displacement's components, say), Depth planes of Width × Height.
// Data[((k·Channels)+c)·Width·Height + j·Width + i] is channel c of voxel
// (i, j, k): the page order of an ImageJ hyperstack (channels vary fastest).
type Float32Stack struct {
	Width, Height, Depth, Channels int
	Data                           []float32
	// VoxelUM is the voxel size in µm along x, y and z; OriginUM is the
	// position of voxel (0, 0, 0) in µm. Both are recorded in the file.
	VoxelUM, OriginUM [3]float64
	// Description is added to the ImageJ description as a comment line.
	Description string
}

// WriteFloat32TIFF writes s as a classic little-endian TIFF of
// Depth·Channels uncompressed 32-bit IEEE floating-point grey pages
// (SampleFormat 3), each in one strip, in the page order of an ImageJ
// hyperstack: for each plane k, its channels in order. The voxel size is
// recorded as XResolution and YResolution (pixels per µm) and in the ImageJ
// description on the first page (images, channels, slices, hyperstack,
// unit=micron, spacing, and xorigin, yorigin, zorigin in voxels, the way
// ImageJ stores a calibration's origin), so that ImageJ and tifffile
// find the hyperstack's shape and scale by themselves.
//
// It writes to w; callers that write files go through outfile.
func WriteFloat32TIFF(w io.Writer, s *Float32Stack) error {
	if s.Width <= 0 || s.Height <= 0 || s.Depth <= 0 || s.Channels <= 0 {
		return fmt.Errorf("imaging: a float32 stack of %d × %d × %d with %d channels holds nothing", s.Width, s.Height, s.Depth, s.Channels)
	}
	plane := int64(s.Width) * int64(s.Height)
	pages := int64(s.Depth) * int64(s.Channels)
	if int64(len(s.Data)) != plane*pages {
		return fmt.Errorf("imaging: float32 stack of %d values for %d pages of %d × %d", len(s.Data), pages, s.Width, s.Height)
	}
	for k := range 3 {
		if !(s.VoxelUM[k] > 0) || math.IsInf(s.VoxelUM[k], 0) || math.IsNaN(s.OriginUM[k]) || math.IsInf(s.OriginUM[k], 0) {
			return fmt.Errorf("imaging: float32 stack with voxel size %v µm and origin %v µm: want positive finite sizes and a finite origin", s.VoxelUM, s.OriginUM)
		}
	}
	for i, v := range s.Data {
		if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) {
			return fmt.Errorf("imaging: float32 stack: value %d is %v, not finite", i, v)
		}
	}
	desc := []byte(hyperstackDescription(s))
	if len(desc)%2 == 1 {
		desc = append(desc, 0) // the next directory starts on a word boundary
	}
	// Each page: its directory, then its out-of-line values: two rationals
	// (16 bytes) and, on the first page only, the description.
	const rationalBytes = 16
	entries := func(p int64) int64 {
		if p == 0 {
			return 15
		}
		return 14
	}
	dirBytes := func(p int64) int64 {
		n := 2 + 12*entries(p) + 4 + rationalBytes
		if p == 0 {
			n += int64(len(desc))
		}
		return n
	}
	pageBytes := plane * 4
	dataEnd := 8 + pages*pageBytes
	ifdAt := func(p int64) int64 {
		if p == 0 {
			return dataEnd
		}
		return dataEnd + dirBytes(0) + (p-1)*dirBytes(1)
	}
	if total := ifdAt(pages); total > 1<<32-1 {
		return fmt.Errorf("imaging: %d bytes exceed the 4 GiB of a classic TIFF: use a coarser grid", total)
	}
	le := binary.LittleEndian
	header := []byte{'I', 'I', 42, 0, 0, 0, 0, 0}
	le.PutUint32(header[4:], uint32(ifdAt(0)))
	if _, err := w.Write(header); err != nil {
		return err
	}
	buf := make([]byte, pageBytes)
	for p := range pages {
		for i, v := range s.Data[p*plane : (p+1)*plane] {
			le.PutUint32(buf[4*i:], math.Float32bits(v))
		}
		if _, err := w.Write(buf); err != nil {
			return err
		}
	}
	var xres, yres [2]uint32
	xres[0], xres[1] = rational(1 / s.VoxelUM[0])
	yres[0], yres[1] = rational(1 / s.VoxelUM[1])
	for p := range pages {
		at := ifdAt(p)
		n := entries(p)
		dir := make([]byte, dirBytes(p))
		le.PutUint16(dir, uint16(n))
		filled := &ifdEntries{dir: dir}
		put := filled.put
		rationals := uint32(at + 2 + 12*n + 4)
		// Entries in ascending tag order, as TIFF 6.0 requires.
		put(254, tiffLong, 1, 0) // NewSubfileType: a full-resolution image
		put(256, tiffLong, 1, uint32(s.Width))
		put(257, tiffLong, 1, uint32(s.Height))
		put(258, tiffShort, 1, 32) // BitsPerSample
		put(259, tiffShort, 1, 1)  // Compression: none
		put(262, tiffShort, 1, 1)  // PhotometricInterpretation: black is zero
		if p == 0 {
			put(270, tiffASCII, uint32(len(desc)), rationals+rationalBytes) // ImageDescription
		}
		put(273, tiffLong, 1, uint32(8+p*pageBytes)) // StripOffsets
		put(277, tiffShort, 1, 1)                    // SamplesPerPixel
		put(278, tiffLong, 1, uint32(s.Height))      // RowsPerStrip
		put(279, tiffLong, 1, uint32(pageBytes))     // StripByteCounts
		put(282, tiffRational, 1, rationals)         // XResolution, pixels per µm
		put(283, tiffRational, 1, rationals+8)       // YResolution
		put(296, tiffShort, 1, 1)                    // ResolutionUnit: none; the unit is in the description
		put(339, tiffShort, 1, 3)                    // SampleFormat: IEEE floating point
		if int64(filled.slot) != n {
			return fmt.Errorf("imaging: float32 TIFF directory of %d entries, %d written", n, filled.slot)
		}
		next := uint32(0)
		if p+1 < pages {
			next = uint32(ifdAt(p + 1))
		}
		le.PutUint32(dir[2+12*n:], next)
		r := dir[2+12*n+4:]
		le.PutUint32(r, xres[0])
		le.PutUint32(r[4:], xres[1])
		le.PutUint32(r[8:], yres[0])
		le.PutUint32(r[12:], yres[1])
		if p == 0 {
			copy(r[rationalBytes:], desc)
		}
		if _, err := w.Write(dir); err != nil {
			return err
		}
	}
	return nil
}

// TIFF field types.
const (
	tiffASCII    = 2
	tiffShort    = 3
	tiffLong     = 4
	tiffRational = 5
)

// ifdEntries fills the 12-byte entries of one little-endian image file
// directory in order, from its third byte (after the entry count).
type ifdEntries struct {
	dir  []byte
	slot int
}

// put writes the next entry: a single SHORT value sits in the first two
// bytes of the value field, anything else as a LONG value or offset.
func (d *ifdEntries) put(tag, typ uint16, count, value uint32) {
	e := d.dir[2+12*d.slot:]
	d.slot++
	le := binary.LittleEndian
	le.PutUint16(e, tag)
	le.PutUint16(e[2:], typ)
	le.PutUint32(e[4:], count)
	if typ == tiffShort && count == 1 {
		le.PutUint16(e[8:], uint16(value))
	} else {
		le.PutUint32(e[8:], value)
	}
}

// hyperstackDescription is the ImageJ hyperstack description of s (channels
// and slices, where imageJDescription knows only slices), NUL terminated as
// TIFF ASCII fields are.
func hyperstackDescription(s *Float32Stack) string {
	var b strings.Builder
	b.WriteString("ImageJ=1.11a\n")
	fmt.Fprintf(&b, "images=%d\n", s.Depth*s.Channels)
	if s.Channels > 1 {
		fmt.Fprintf(&b, "channels=%d\n", s.Channels)
	}
	if s.Depth > 1 {
		fmt.Fprintf(&b, "slices=%d\n", s.Depth)
	}
	if s.Channels > 1 && s.Depth > 1 {
		b.WriteString("hyperstack=true\nmode=grayscale\n")
	}
	b.WriteString("unit=micron\n")
	fmt.Fprintf(&b, "spacing=%s\n", strconv.FormatFloat(s.VoxelUM[2], 'g', -1, 64))
	for k, axis := range []string{"x", "y", "z"} {
		v := -s.OriginUM[k] / s.VoxelUM[k]
		if v == 0 {
			v = 0 // not "-0"
		}
		fmt.Fprintf(&b, "%sorigin=%s\n", axis, strconv.FormatFloat(v, 'g', -1, 64))
	}
	if s.Description != "" {
		fmt.Fprintf(&b, "ferry=%s\n", strings.ReplaceAll(s.Description, "\n", " "))
	}
	b.WriteByte(0)
	return b.String()
}
