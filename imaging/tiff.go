package imaging

import (
	"encoding/binary"
	"errors"
	"fmt"
	"io"
)

// The TIFF reader walks the chain of image file directories (IFDs) itself and
// decodes every page's strips or tiles itself, because golang.org/x/image/tiff
// decodes the first page only. It reads the baseline TIFF 6.0 layout (Adobe,
// 1992, "TIFF Revision 6.0") with the compressions x/image/tiff also reads
// for 8- and 16-bit samples: none (1), LZW (5, through x/image/tiff/lzw),
// Deflate (8 and the older 32946, through compress/zlib) and PackBits
// (32773), with or without the horizontal-differencing predictor (2).
//
// Damaged or hostile files must fail with a message, never a panic, and must
// not make the reader allocate much more than the file could hold. So every
// directory, array and strip is checked against the file length before
// anything is allocated for it, and the pages together may claim no more
// bytes than the file has: uncompressed pixel data byte for byte, compressed
// data at most maxExpansion bytes of pixels per byte in the file.

// TIFF tags used here (TIFF 6.0, section 8 and the extension sections).
const (
	tagImageWidth      = 256
	tagImageLength     = 257
	tagBitsPerSample   = 258
	tagCompression     = 259
	tagPhotometric     = 262
	tagDescription     = 270
	tagStripOffsets    = 273
	tagSamplesPerPixel = 277
	tagRowsPerStrip    = 278
	tagStripByteCounts = 279
	tagXResolution     = 282
	tagYResolution     = 283
	tagPlanarConfig    = 284
	tagResolutionUnit  = 296
	tagPredictor       = 317
	tagTileWidth       = 322
	tagTileLength      = 323
	tagTileOffsets     = 324
	tagTileByteCounts  = 325
	tagSampleFormat    = 339
)

// Compression codes.
const (
	compNone       = 1
	compLZW        = 5
	compDeflate    = 8
	compDeflateOld = 32946
	compPackBits   = 32773
)

// Photometric interpretations.
const (
	photoWhiteIsZero = 0
	photoBlackIsZero = 1
	photoRGB         = 2
	photoPalette     = 3
)

// maxExpansion bounds how many bytes of pixels one byte of compressed data
// may stand for. LZW with 12-bit codes that each repeat a string of up to
// 4096 bytes reaches about 2730:1 and Deflate about 1032:1 (both figures
// worked out from the code formats, the second recalled from memory), so a
// strip that claims more than this is damaged.
const maxExpansion = 4096

// tiffFile is an open classic TIFF being parsed.
type tiffFile struct {
	r     io.ReaderAt
	size  int64
	order binary.ByteOrder
	name  string
	// claimed counts the bytes that directories, their arrays and the
	// pages' pixel data claim; it may not exceed the file length (see the
	// comment at the top of the file).
	claimed int64
}

// tiffPage is one parsed image file directory.
type tiffPage struct {
	index         int
	width, height int
	bits, samples int
	photometric   int
	// photometricAssumed reports that the page lacked the tag: TIFF 6.0
	// requires it, and black-is-zero grey is assumed, the reading a
	// microscope user expects.
	photometricAssumed bool
	compression        int
	predictor          int
	blockW, blockH     int // strip width × rows per strip, or tile size
	tiled              bool
	offsets            []int64
	counts             []int64
	// calibration is read from page 0 only, where ImageJ and most
	// writers put it.
	calibration tiffCalibration
}

// pageError is an error about one page of a file.
func (f *tiffFile) pageError(k int, format string, args ...any) error {
	return fmt.Errorf("%s: page %d: %s", f.name, k, fmt.Sprintf(format, args...))
}

// errBigTIFF is returned for BigTIFF files.
var errBigTIFF = errors.New("is a BigTIFF file, which ferry does not read; save the stack as classic TIFF (under 4 GiB) or as a folder of single-plane files")

// openTIFF checks the header and returns the file with the offset of the
// first directory.
func openTIFF(r io.ReaderAt, size int64, name string) (*tiffFile, int64, error) {
	var h [8]byte
	if size < 8 {
		return nil, 0, fmt.Errorf("%s: %d bytes is too short for a TIFF file", name, size)
	}
	if _, err := r.ReadAt(h[:], 0); err != nil {
		return nil, 0, fmt.Errorf("%s: reading the header: %w", name, err)
	}
	f := &tiffFile{r: r, size: size, name: name}
	switch string(h[:2]) {
	case "II":
		f.order = binary.LittleEndian
	case "MM":
		f.order = binary.BigEndian
	default:
		return nil, 0, fmt.Errorf("%s: not a TIFF file (the first bytes are neither II nor MM)", name)
	}
	switch f.order.Uint16(h[2:4]) {
	case 42:
	case 43:
		return nil, 0, fmt.Errorf("%s: %w", name, errBigTIFF)
	default:
		return nil, 0, fmt.Errorf("%s: not a TIFF file (version %d, want 42)", name, f.order.Uint16(h[2:4]))
	}
	return f, int64(f.order.Uint32(h[4:8])), nil
}

// claim charges n bytes against the file length.
func (f *tiffFile) claim(n int64) bool {
	if n < 0 || n > f.size-f.claimed {
		return false
	}
	f.claimed += n
	return true
}

// readAt reads exactly len(b) bytes at off, which the caller has checked.
func (f *tiffFile) readAt(b []byte, off int64) error {
	n, err := f.r.ReadAt(b, off)
	if n == len(b) {
		return nil
	}
	if err == nil || err == io.EOF {
		err = io.ErrUnexpectedEOF
	}
	return err
}

// pages walks the directory chain from offset first and parses every page.
func (f *tiffFile) pages(first int64) ([]tiffPage, error) {
	var pages []tiffPage
	seen := make(map[int64]bool)
	for off := first; off != 0; {
		k := len(pages)
		if seen[off] {
			return nil, f.pageError(k, "the chain of pages loops back to offset %d; the file is damaged", off)
		}
		seen[off] = true
		p, next, err := f.parseIFD(k, off)
		if err != nil {
			return nil, err
		}
		pages = append(pages, p)
		off = next
	}
	if len(pages) == 0 {
		return nil, fmt.Errorf("%s: the file holds no pages", f.name)
	}
	return pages, nil
}

// entry is one raw directory entry.
type entry struct {
	tag, typ uint16
	count    uint32
	value    [4]byte
}

// typeSize is the size in bytes of one value of a TIFF field type, 0 for an
// unknown type.
func typeSize(typ uint16) int64 {
	switch typ {
	case 1, 2, 6, 7: // BYTE, ASCII, SBYTE, UNDEFINED
		return 1
	case 3, 8: // SHORT, SSHORT
		return 2
	case 4, 9, 11, 13: // LONG, SLONG, FLOAT, IFD
		return 4
	case 5, 10, 12: // RATIONAL, SRATIONAL, DOUBLE
		return 8
	}
	return 0
}

// ints reads up to limit unsigned integer values of entry e (all of them
// when limit < 0). Arrays stored elsewhere in the file are checked against
// its length before they are read.
func (f *tiffFile) ints(k int, e entry, limit int64) ([]int64, error) {
	size := typeSize(e.typ)
	if e.typ != 1 && e.typ != 3 && e.typ != 4 {
		return nil, f.pageError(k, "tag %d has field type %d, want an unsigned integer (1, 3 or 4)", e.tag, e.typ)
	}
	n := int64(e.count)
	if n == 0 {
		return nil, f.pageError(k, "tag %d has no values", e.tag)
	}
	var raw []byte
	if n*size <= 4 {
		raw = e.value[:n*size]
	} else {
		off := int64(f.order.Uint32(e.value[:]))
		if off+n*size > f.size {
			return nil, f.pageError(k, "tag %d: %d values at offset %d run past the end of the file (%d bytes)", e.tag, n, off, f.size)
		}
		if limit >= 0 && n > limit {
			n = limit
		}
		if !f.claim(n * size) {
			return nil, f.pageError(k, "tag %d: the directories claim more bytes than the file holds; the file is damaged", e.tag)
		}
		raw = make([]byte, n*size)
		if err := f.readAt(raw, off); err != nil {
			return nil, f.pageError(k, "tag %d: reading %d values: %v", e.tag, n, err)
		}
	}
	if limit >= 0 && n > limit {
		n = limit
	}
	v := make([]int64, n)
	for i := range v {
		switch size {
		case 1:
			v[i] = int64(raw[i])
		case 2:
			v[i] = int64(f.order.Uint16(raw[2*i:]))
		default:
			v[i] = int64(f.order.Uint32(raw[4*i:]))
		}
	}
	return v, nil
}

// readTIFF reads every page of a classic TIFF into a stack. With onePlane it
// refuses files of more than one page.
func readTIFF(r io.ReaderAt, size int64, name string, onePlane bool) (*Stack, error) {
	f, first, err := openTIFF(r, size, name)
	if err != nil {
		return nil, err
	}
	pages, err := f.pages(first)
	if err != nil {
		return nil, err
	}
	if onePlane && len(pages) > 1 {
		return nil, fmt.Errorf("%s: holds %d pages where one plane was wanted", name, len(pages))
	}
	p0 := pages[0]
	for _, p := range pages[1:] {
		if p.width != p0.width || p.height != p0.height || p.bits != p0.bits {
			return nil, f.pageError(p.index, "is %d × %d pixels of %d bits but page 0 is %d × %d pixels of %d bits; all pages of a stack must agree",
				p.width, p.height, p.bits, p0.width, p0.height, p0.bits)
		}
	}
	n, err := voxelCount(p0.width, p0.height, len(pages))
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	s := &Stack{Width: p0.width, Height: p0.height, Depth: len(pages), Bits: p0.bits, Data: make([]uint16, n), Path: name,
		Geometry: p0.calibration.geometry()}
	var d pageDecoder
	for k := range pages {
		colour, err := d.decode(f, &pages[k], s.PageData(k))
		if err != nil {
			return nil, err
		}
		s.Colour = s.Colour || colour
	}
	return s, nil
}
