package imaging

import (
	"encoding/binary"
	"fmt"
	"io"
)

// tiffLayout is the shape of a grey TIFF that tiffWriter writes: pages of
// width × height samples of bits bits, and the geometry to record (nothing
// when its voxel size is not known).
type tiffLayout struct {
	width, height, depth, bits int
	geometry                   Geometry
}

// The file tiffWriter writes: the header, every page's pixels one after the
// other with no gap (one strip a page), a pad byte when needed so that the
// directories start on a word boundary, then one
// directory per page, then the values too long for a directory entry (the
// resolution, shared by every page, and page 0's ImageDescription).
// Contiguous pixels are the layout ImageJ reads fastest and the one it
// expects of a file whose description says images=N; the pixels come first
// so that a stack can be written page by page without knowing the rest.
const tiffHeaderSize = 8

func (l tiffLayout) calibrated() bool { return l.geometry.HasVoxel() }

func (l tiffLayout) planeBytes() int64 {
	return int64(l.width) * int64(l.height) * int64(l.bits/8)
}

// ifdStart is the offset of page 0's directory.
func (l tiffLayout) ifdStart() int64 {
	n := tiffHeaderSize + int64(l.depth)*l.planeBytes()
	return n + n%2
}

func (l tiffLayout) entries() int {
	if l.calibrated() {
		return 14 // + XResolution, YResolution, ResolutionUnit
	}
	return 11
}

func (l tiffLayout) ifdSize(k int) int64 {
	n := l.entries()
	if k == 0 && l.calibrated() {
		n++ // ImageDescription
	}
	return int64(2 + 12*n + 4)
}

func (l tiffLayout) description() []byte {
	if !l.calibrated() {
		return nil
	}
	d := []byte(imageJDescription(l.depth, l.geometry))
	return append(d, 0)
}

// size is the length of the file in bytes.
func (l tiffLayout) size() int64 {
	n := l.ifdStart() + l.ifdSize(0) + int64(l.depth-1)*l.ifdSize(1)
	if l.calibrated() {
		d := int64(len(l.description()))
		n += 16 + d + d%2
	}
	return n
}

// maxClassicTIFF is the largest file a classic TIFF's 32-bit offsets address.
const maxClassicTIFF = 1<<32 - 1

// check refuses a layout that classic TIFF cannot hold.
func (l tiffLayout) check(path string) error {
	if l.bits != 8 && l.bits != 16 {
		return fmt.Errorf("imaging: %s: %d-bit samples: want 8 or 16", path, l.bits)
	}
	if _, err := voxelCount(l.width, l.height, l.depth); err != nil {
		return fmt.Errorf("imaging: %s: %w", path, err)
	}
	if n := l.size(); n > maxClassicTIFF {
		return fmt.Errorf("imaging: %s: %d × %d × %d voxels of %d bits make %.1f GiB, more than the 4 GiB a classic TIFF addresses; choose a coarser voxel size or a smaller region",
			path, l.width, l.height, l.depth, l.bits, float64(n)/(1<<30))
	}
	return nil
}

// tiffWriter writes a grey multi-page TIFF page by page (see tiffLayout).
type tiffWriter struct {
	w   io.Writer
	l   tiffLayout
	k   int
	buf []byte
}

// newTIFFWriter writes the header; the caller has checked the layout.
func newTIFFWriter(w io.Writer, l tiffLayout) (*tiffWriter, error) {
	t := &tiffWriter{w: w, l: l, buf: make([]byte, l.planeBytes())}
	header := []byte{'I', 'I', 42, 0, 0, 0, 0, 0}
	binary.LittleEndian.PutUint32(header[4:], uint32(l.ifdStart()))
	if _, err := w.Write(header); err != nil {
		return nil, err
	}
	return t, nil
}

// writePage writes the next page, width·height samples.
func (t *tiffWriter) writePage(page []uint16) error {
	if t.k >= t.l.depth {
		return fmt.Errorf("imaging: writing page %d of a %d-page TIFF", t.k, t.l.depth)
	}
	if len(page) != t.l.width*t.l.height {
		return fmt.Errorf("imaging: page %d has %d samples, want %d", t.k, len(page), t.l.width*t.l.height)
	}
	le := binary.LittleEndian
	buf := t.buf
	if t.l.bits == 8 {
		for i, v := range page {
			buf[i] = uint8(min(v, 0xff))
		}
	} else {
		for i, v := range page {
			le.PutUint16(buf[2*i:], v)
		}
	}
	t.k++
	_, err := t.w.Write(buf)
	return err
}

// finish writes the directories and the long values after the last page.
func (t *tiffWriter) finish() error {
	l := t.l
	if t.k != l.depth {
		return fmt.Errorf("imaging: %d of %d pages written", t.k, l.depth)
	}
	le := binary.LittleEndian
	ifdAt := l.ifdStart()
	if ifdAt > tiffHeaderSize+int64(l.depth)*l.planeBytes() {
		if _, err := t.w.Write([]byte{0}); err != nil {
			return err
		}
	}
	extraAt := ifdAt
	for k := range l.depth {
		extraAt += l.ifdSize(k)
	}
	resAt := extraAt
	descAt := resAt + 16
	desc := l.description()
	at := ifdAt
	for k := range l.depth {
		size := l.ifdSize(k)
		n := (size - 6) / 12
		ifd := make([]byte, size)
		le.PutUint16(ifd, uint16(n))
		put := (&ifdEntries{dir: ifd}).put
		// Entries in ascending tag order, as TIFF 6.0 requires.
		put(254, tiffLong, 1, 0) // NewSubfileType: a full-resolution image
		put(tagImageWidth, tiffLong, 1, uint32(l.width))
		put(tagImageLength, tiffLong, 1, uint32(l.height))
		put(tagBitsPerSample, tiffShort, 1, uint32(l.bits))
		put(tagCompression, tiffShort, 1, compNone)
		put(tagPhotometric, tiffShort, 1, photoBlackIsZero)
		if k == 0 && l.calibrated() {
			put(tagDescription, tiffASCII, uint32(len(desc)), uint32(descAt))
		}
		put(tagStripOffsets, tiffLong, 1, uint32(tiffHeaderSize+int64(k)*l.planeBytes()))
		put(tagSamplesPerPixel, tiffShort, 1, 1)
		put(tagRowsPerStrip, tiffLong, 1, uint32(l.height))
		put(tagStripByteCounts, tiffLong, 1, uint32(l.planeBytes()))
		if l.calibrated() {
			put(tagXResolution, tiffRational, 1, uint32(resAt))
			put(tagYResolution, tiffRational, 1, uint32(resAt+8))
			// ImageJ's convention: no absolute unit here, the micron in
			// the description.
			put(tagResolutionUnit, tiffShort, 1, resUnitNone)
		}
		put(tagSampleFormat, tiffShort, 1, 1)
		next := uint32(0)
		if k+1 < l.depth {
			next = uint32(at + size)
		}
		le.PutUint32(ifd[size-4:], next)
		if _, err := t.w.Write(ifd); err != nil {
			return err
		}
		at += size
	}
	if !l.calibrated() {
		return nil
	}
	extra := make([]byte, 16, 16+len(desc)+1)
	xn, xd := rational(1 / l.geometry.VoxelUM[0])
	yn, yd := rational(1 / l.geometry.VoxelUM[1])
	le.PutUint32(extra, xn)
	le.PutUint32(extra[4:], xd)
	le.PutUint32(extra[8:], yn)
	le.PutUint32(extra[12:], yd)
	extra = append(extra, desc...)
	if len(desc)%2 == 1 {
		extra = append(extra, 0)
	}
	_, err := t.w.Write(extra)
	return err
}
