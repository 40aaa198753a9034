// The TIFF pixel decoder: strips and tiles, LZW, Deflate and PackBits, the
// predictor, colour to grey (the file's layout is read in tiff.go).

package imaging

import (
	"bytes"
	"compress/zlib"
	"fmt"
	"image"
	"io"

	"golang.org/x/image/tiff/lzw"
)

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
