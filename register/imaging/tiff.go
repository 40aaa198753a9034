package imaging

import (
	"bytes"
	"compress/zlib"
	"encoding/binary"
	"errors"
	"fmt"
	"image"
	"io"
	"strings"

	"golang.org/x/image/tiff/lzw"
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

// parseIFD reads the directory at off and checks everything the decoder
// will rely on.
func (f *tiffFile) parseIFD(k int, off int64) (tiffPage, int64, error) {
	p := tiffPage{index: k}
	if off < 8 || off+2 > f.size {
		return p, 0, f.pageError(k, "directory offset %d lies outside the file (%d bytes)", off, f.size)
	}
	var nb [2]byte
	if err := f.readAt(nb[:], off); err != nil {
		return p, 0, f.pageError(k, "reading the directory: %v", err)
	}
	n := int64(f.order.Uint16(nb[:]))
	if n == 0 {
		return p, 0, f.pageError(k, "the directory at offset %d has no entries", off)
	}
	length := 2 + 12*n + 4
	if off+length > f.size {
		return p, 0, f.pageError(k, "the directory at offset %d (%d entries) runs past the end of the file (%d bytes)", off, n, f.size)
	}
	if !f.claim(length) {
		return p, 0, f.pageError(k, "the directories claim more bytes than the file holds; the file is damaged")
	}
	buf := make([]byte, 12*n+4)
	if err := f.readAt(buf, off+2); err != nil {
		return p, 0, f.pageError(k, "reading the directory: %v", err)
	}
	next := int64(f.order.Uint32(buf[12*n:]))

	entries := make(map[uint16]entry)
	for i := range n {
		b := buf[12*i:]
		e := entry{tag: f.order.Uint16(b), typ: f.order.Uint16(b[2:]), count: f.order.Uint32(b[4:])}
		copy(e.value[:], b[8:12])
		if _, dup := entries[e.tag]; !dup {
			entries[e.tag] = e
		}
	}
	// first returns the first value of a tag, or def when it is absent.
	first := func(tag uint16, def int64) (int64, error) {
		e, ok := entries[tag]
		if !ok {
			return def, nil
		}
		v, err := f.ints(k, e, 1)
		if err != nil {
			return 0, err
		}
		return v[0], nil
	}
	var err error
	get := func(tag uint16, def int64) int64 {
		if err != nil {
			return 0
		}
		var v int64
		v, err = first(tag, def)
		return v
	}
	width := get(tagImageWidth, 0)
	height := get(tagImageLength, 0)
	bits := get(tagBitsPerSample, 1)
	samples := get(tagSamplesPerPixel, 1)
	p.compression = int(get(tagCompression, compNone))
	p.photometric = int(get(tagPhotometric, photoBlackIsZero))
	_, hasPhotometric := entries[tagPhotometric]
	p.photometricAssumed = !hasPhotometric
	p.predictor = int(get(tagPredictor, 1))
	planar := get(tagPlanarConfig, 1)
	format := get(tagSampleFormat, 1)
	if err != nil {
		return p, 0, err
	}
	if width < 1 || height < 1 {
		return p, 0, f.pageError(k, "size %d × %d pixels: want at least 1 × 1", width, height)
	}
	if width > 1<<24 || height > 1<<24 {
		return p, 0, f.pageError(k, "size %d × %d pixels is too large", width, height)
	}
	p.width, p.height = int(width), int(height)
	if bits != 8 && bits != 16 {
		return p, 0, f.pageError(k, "%d-bit samples: want 8 or 16", bits)
	}
	p.bits = int(bits)
	if samples < 1 || samples > 16 {
		return p, 0, f.pageError(k, "%d samples per pixel: want 1 to 16", samples)
	}
	p.samples = int(samples)
	if e, ok := entries[tagBitsPerSample]; ok && int64(e.count) >= samples {
		all, err := f.ints(k, e, samples)
		if err != nil {
			return p, 0, err
		}
		for _, b := range all {
			if b != bits {
				return p, 0, f.pageError(k, "samples of %d and %d bits in one pixel: want one bit depth", bits, b)
			}
		}
	}
	switch format {
	case 1:
	case 2:
		return p, 0, f.pageError(k, "signed integer samples (SampleFormat 2): want unsigned 8- or 16-bit grey")
	case 3:
		return p, 0, f.pageError(k, "floating-point samples (SampleFormat 3): want unsigned 8- or 16-bit grey")
	default:
		return p, 0, f.pageError(k, "SampleFormat %d: want 1 (unsigned integer)", format)
	}
	switch p.photometric {
	case photoWhiteIsZero, photoBlackIsZero:
	case photoRGB:
		if samples < 3 {
			return p, 0, f.pageError(k, "RGB colour with %d samples per pixel: want at least 3", samples)
		}
	case photoPalette:
		return p, 0, f.pageError(k, "palette colour is not read: save the image as grey")
	default:
		return p, 0, f.pageError(k, "photometric interpretation %d is not read: want grey (0 or 1) or RGB (2)", p.photometric)
	}
	if planar != 1 && samples > 1 {
		return p, 0, f.pageError(k, "colour samples stored in separate planes (PlanarConfiguration %d) are not read", planar)
	}
	switch p.compression {
	case compNone, compLZW, compDeflate, compDeflateOld, compPackBits:
	default:
		return p, 0, f.pageError(k, "compression %d is not read: want none (1), LZW (5), Deflate (8 or 32946) or PackBits (32773)", p.compression)
	}
	if p.predictor != 1 && p.predictor != 2 {
		return p, 0, f.pageError(k, "predictor %d is not read: want none (1) or horizontal differencing (2)", p.predictor)
	}

	offTag, countTag := uint16(tagStripOffsets), uint16(tagStripByteCounts)
	p.blockW, p.blockH = p.width, p.height
	across, down := int64(1), int64(1)
	if _, ok := entries[tagTileWidth]; ok {
		p.tiled = true
		offTag, countTag = tagTileOffsets, tagTileByteCounts
		tw := get(tagTileWidth, 0)
		th := get(tagTileLength, 0)
		if err != nil {
			return p, 0, err
		}
		if tw < 1 || th < 1 || tw > 1<<16 || th > 1<<16 {
			return p, 0, f.pageError(k, "tile size %d × %d pixels: want 1 to 65536 a side", tw, th)
		}
		p.blockW, p.blockH = int(tw), int(th)
		across = (width + tw - 1) / tw
		down = (height + th - 1) / th
	} else {
		rows := get(tagRowsPerStrip, height)
		if err != nil {
			return p, 0, err
		}
		if rows < 1 || rows > height {
			rows = height
		}
		p.blockH = int(rows)
		down = (height + rows - 1) / rows
	}
	blocks := across * down
	e, ok := entries[offTag]
	if !ok {
		return p, 0, f.pageError(k, "the page has no strip or tile offsets (tag %d)", offTag)
	}
	if int64(e.count) < blocks {
		return p, 0, f.pageError(k, "%d strip or tile offsets for %d strips or tiles", e.count, blocks)
	}
	if p.offsets, err = f.ints(k, e, blocks); err != nil {
		return p, 0, err
	}
	bytesPer := int64(p.bits/8) * samples
	// blockBytes is the decoded size of block b: full tiles, or the rows a
	// strip actually covers.
	blockBytes := func(b int64) int64 {
		if p.tiled {
			return int64(p.blockW) * int64(p.blockH) * bytesPer
		}
		rows := min(int64(p.blockH), height-b*int64(p.blockH))
		return rows * width * bytesPer
	}
	if e, ok := entries[countTag]; ok {
		if int64(e.count) < blocks {
			return p, 0, f.pageError(k, "%d strip or tile byte counts for %d strips or tiles", e.count, blocks)
		}
		if p.counts, err = f.ints(k, e, blocks); err != nil {
			return p, 0, err
		}
	} else if p.compression == compNone {
		// Some old writers leave the counts out of uncompressed files.
		p.counts = make([]int64, blocks)
		for b := range blocks {
			p.counts[b] = blockBytes(b)
		}
	} else {
		return p, 0, f.pageError(k, "a compressed page without strip or tile byte counts (tag %d)", countTag)
	}
	if k == 0 {
		p.calibration = f.calibration(entries)
	}
	what := "strip"
	if p.tiled {
		what = "tile"
	}
	var claim int64
	for b := range blocks {
		off, n, want := p.offsets[b], p.counts[b], blockBytes(b)
		if off+n > f.size {
			return p, 0, f.pageError(k, "%s %d (%d bytes at offset %d) runs past the end of the file (%d bytes)", what, b, n, off, f.size)
		}
		if p.compression == compNone {
			if n < want {
				return p, 0, f.pageError(k, "%s %d holds %d bytes, want %d", what, b, n, want)
			}
			claim += want
		} else {
			if n < 1 || want > maxExpansion*n+1024 {
				return p, 0, f.pageError(k, "%s %d: %d compressed bytes cannot hold %d bytes of pixels; the file is damaged", what, b, n, want)
			}
			claim += (want + maxExpansion - 1) / maxExpansion
		}
	}
	if !f.claim(claim) {
		return p, 0, f.pageError(k, "the pages claim more pixel data than the file holds; the file is damaged")
	}
	return p, next, nil
}

// maxDescription bounds the ImageDescription read for its metadata: ImageJ's
// keys come first, and a longer text is someone's notes.
const maxDescription = 1 << 16

// calibration reads the tags that record page 0's geometry. They are
// optional and informative: a damaged or odd one is skipped, not an error,
// and the user is asked for the voxel size as if it were absent.
func (f *tiffFile) calibration(entries map[uint16]entry) tiffCalibration {
	var c tiffCalibration
	if e, ok := entries[tagDescription]; ok && e.typ == 2 && e.count > 0 {
		n := min(int64(e.count), maxDescription)
		raw := e.value[:min(n, 4)]
		if e.count > 4 {
			off := int64(f.order.Uint32(e.value[:]))
			if off+n <= f.size && f.claim(n) {
				raw = make([]byte, n)
				if f.readAt(raw, off) != nil {
					raw = nil
				}
			} else {
				raw = nil
			}
		}
		c.description = strings.TrimRight(string(raw), "\x00")
	}
	rat := func(tag uint16) float64 {
		e, ok := entries[tag]
		if !ok || e.typ != 5 || e.count < 1 {
			return 0
		}
		off := int64(f.order.Uint32(e.value[:]))
		var b [8]byte
		if off+8 > f.size || f.readAt(b[:], off) != nil {
			return 0
		}
		num, den := f.order.Uint32(b[:4]), f.order.Uint32(b[4:])
		if num == 0 || den == 0 {
			return 0
		}
		return float64(num) / float64(den)
	}
	c.xres, c.yres = rat(tagXResolution), rat(tagYResolution)
	if e, ok := entries[tagResolutionUnit]; ok && e.typ == 3 && e.count == 1 {
		c.resUnit = int(f.order.Uint16(e.value[:2]))
	}
	return c
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

// pageDecoder holds the scratch buffers reused from one strip to the next.
type pageDecoder struct {
	raw, block []byte
	samples    []uint16
}

// grow returns b resliced or reallocated to length n.
func grow[T any](b []T, n int) []T {
	if cap(b) < n {
		return make([]T, n)
	}
	return b[:n]
}

// decode decodes page p into dst (width·height grey samples) and reports
// whether any pixel was in colour.
func (d *pageDecoder) decode(f *tiffFile, p *tiffPage, dst []uint16) (colour bool, err error) {
	return d.decodeWindow(f, p, dst, image.Rect(0, 0, p.width, p.height))
}

// decodeWindow decodes the pixels of page p inside win (clipped to the
// page) into dst, win.Dx()·win.Dy() samples row by row, reading only the
// strips or tiles that meet win, and reports whether any pixel read was in
// colour.
func (d *pageDecoder) decodeWindow(f *tiffFile, p *tiffPage, dst []uint16, win image.Rectangle) (colour bool, err error) {
	what := "strip"
	if p.tiled {
		what = "tile"
	}
	across := (p.width + p.blockW - 1) / p.blockW
	bytesPer := p.bits / 8
	rowSamples := p.blockW * p.samples
	rowBytes := rowSamples * bytesPer
	maxValue := uint16(1<<p.bits - 1)
	d.samples = grow(d.samples, rowSamples)
	for b := range p.offsets {
		bx, by := (b%across)*p.blockW, (b/across)*p.blockH
		rows := p.blockH
		if !p.tiled {
			rows = min(p.blockH, p.height-by)
		}
		if !image.Rect(bx, by, bx+p.blockW, by+rows).Overlaps(win) {
			continue
		}
		want := rows * rowBytes
		n := int(p.counts[b])
		if p.compression == compNone {
			n = want
		}
		d.raw = grow(d.raw, n)
		if err := f.readAt(d.raw, p.offsets[b]); err != nil {
			return false, f.pageError(p.index, "%s %d: reading %d bytes at offset %d: %v", what, b, n, p.offsets[b], err)
		}
		block, err := d.inflate(p.compression, want)
		if err != nil {
			return false, f.pageError(p.index, "%s %d: %v", what, b, err)
		}
		// The block's columns inside the window: x0 ≤ x < x1, from the
		// block's left edge.
		x0, x1 := max(0, win.Min.X-bx), min(p.blockW, p.width-bx, win.Max.X-bx)
		for y := range min(rows, p.height-by) {
			if by+y < win.Min.Y || by+y >= win.Max.Y {
				continue
			}
			row := block[y*rowBytes : (y+1)*rowBytes]
			s := d.samples
			if bytesPer == 1 {
				for x, v := range row {
					s[x] = uint16(v)
				}
			} else {
				for x := range s {
					s[x] = f.order.Uint16(row[2*x:])
				}
			}
			if p.predictor == 2 {
				// Horizontal differencing (TIFF 6.0, section 14): each
				// sample is stored as its difference from the same sample
				// of the pixel to its left, modulo the bit depth.
				for x := p.samples; x < len(s); x++ {
					s[x] = (s[x] + s[x-p.samples]) & maxValue
				}
			}
			// dst[base+x] is the pixel of column bx + x; base may be
			// negative when the block starts left of the window.
			base := (by+y-win.Min.Y)*win.Dx() + bx - win.Min.X
			switch p.photometric {
			case photoBlackIsZero:
				for x := x0; x < x1; x++ {
					dst[base+x] = s[x*p.samples]
				}
			case photoWhiteIsZero:
				for x := x0; x < x1; x++ {
					dst[base+x] = maxValue - s[x*p.samples]
				}
			case photoRGB:
				for x := x0; x < x1; x++ {
					r, g, bl := s[x*p.samples], s[x*p.samples+1], s[x*p.samples+2]
					if r != g || g != bl {
						colour = true
					}
					if p.bits == 8 {
						dst[base+x] = luma(uint32(r)*0x101, uint32(g)*0x101, uint32(bl)*0x101, 8)
					} else {
						dst[base+x] = luma(uint32(r), uint32(g), uint32(bl), 16)
					}
				}
			}
		}
	}
	return colour, nil
}

// inflate decompresses d.raw into a block of want bytes.
func (d *pageDecoder) inflate(compression, want int) ([]byte, error) {
	if compression == compNone {
		return d.raw[:want], nil
	}
	d.block = grow(d.block, want)
	var r io.Reader
	switch compression {
	case compLZW:
		lr := lzw.NewReader(bytes.NewReader(d.raw), lzw.MSB, 8)
		defer lr.Close()
		r = lr
	case compDeflate, compDeflateOld:
		zr, err := zlib.NewReader(bytes.NewReader(d.raw))
		if err != nil {
			return nil, fmt.Errorf("deflate: %v", err)
		}
		defer zr.Close()
		r = zr
	case compPackBits:
		if err := unpackBits(d.block, d.raw); err != nil {
			return nil, err
		}
		return d.block, nil
	}
	// Only the bytes the block needs are read: trailing garbage or a
	// missing end code after them do not matter.
	if got, err := io.ReadFull(r, d.block); err != nil {
		if err == io.ErrUnexpectedEOF || err == io.EOF {
			return nil, fmt.Errorf("decompresses to %d bytes, want %d", got, want)
		}
		return nil, fmt.Errorf("decompressing: %v", err)
	}
	return d.block, nil
}

// unpackBits decodes PackBits (the Macintosh run-length code; TIFF 6.0,
// section 9) from src until dst is full.
func unpackBits(dst, src []byte) error {
	n := 0
	for n < len(dst) {
		if len(src) == 0 {
			return fmt.Errorf("PackBits data decode to %d bytes, want %d", n, len(dst))
		}
		c := int(int8(src[0]))
		src = src[1:]
		switch {
		case c >= 0: // c+1 literal bytes
			m := c + 1
			if len(src) < m {
				return fmt.Errorf("PackBits data end inside a literal run")
			}
			copy(dst[n:], src[:m])
			n += m
			src = src[m:]
		case c > -128: // 1−c copies of the next byte
			if len(src) == 0 {
				return fmt.Errorf("PackBits data end inside a repeat run")
			}
			m := min(1-c, len(dst)-n)
			for i := range m {
				dst[n+i] = src[0]
			}
			n += m
			src = src[1:]
		}
	}
	return nil
}

// luma is the grey value of an RGB colour given in 16-bit channels, with the
// weights 0.299, 0.587 and 0.114 of ITU-R BT.601 (recalled from memory) in
// the 16-bit fixed point that the standard library's color.GrayModel uses,
// so that TIFF and PNG colour planes turn into the same grey. bits is the
// depth of the result.
func luma(r, g, b uint32, bits int) uint16 {
	y := 19595*r + 38470*g + 7471*b + 1<<15
	if bits == 8 {
		return uint16(y >> 24)
	}
	return uint16(y >> 16)
}
