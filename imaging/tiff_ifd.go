// Reading one TIFF image file directory, and the tags that record a page's
// geometry.

package imaging

import (
	"strings"
)

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
