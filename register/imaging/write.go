package imaging

import (
	"context"
	"encoding/binary"
	"fmt"
	"image"
	"image/png"
	"io"
	"os"

	"ferry/register/outfile"
)

// WriteTIFF writes s as a classic little-endian multi-page TIFF: one
// uncompressed grey page (black is zero) of s.Bits bits per voxel page, each
// page in one strip. The file appears whole or not at all: it is written to
// a temporary file in the same folder and renamed over path only when
// complete. It refuses to write over the file s was read from.
func WriteTIFF(path string, s *Stack) error { return WriteTIFFContext(context.Background(), path, s) }

// WriteTIFFContext is WriteTIFF with the run's context, whose output tracker
// (register/outfile) learns of the temporary file, so that a signal handler
// can remove it. The write is not cut short by a cancelled ctx: a caller
// checks for an interrupt before it starts.
func WriteTIFFContext(ctx context.Context, path string, s *Stack) error {
	if err := s.check(); err != nil {
		return err
	}
	if err := refuseOwnInput(path, s.Path); err != nil {
		return err
	}
	bytesPer := int64(s.Bits / 8)
	plane := int64(s.Width) * int64(s.Height) * bytesPer
	padded := plane + plane%2 // directories start on a word boundary
	const entries = 11
	const ifdSize = 2 + 12*entries + 4
	total := 8 + int64(s.Depth)*(padded+ifdSize)
	if total > 1<<32-1 {
		return fmt.Errorf("imaging: %s: %d bytes exceed the 4 GiB of a classic TIFF; write a folder of planes instead", path, total)
	}
	return writeAtomic(ctx, path, func(bw io.Writer) error {
		le := binary.LittleEndian
		header := []byte{'I', 'I', 42, 0, 0, 0, 0, 0}
		le.PutUint32(header[4:], uint32(8+padded)) // the first directory follows page 0
		if _, err := bw.Write(header); err != nil {
			return err
		}
		buf := make([]byte, padded)
		ifd := make([]byte, ifdSize)
		for k := range s.Depth {
			page := s.PageData(k)
			if s.Bits == 8 {
				for i, v := range page {
					buf[i] = uint8(min(v, 0xff))
				}
			} else {
				for i, v := range page {
					le.PutUint16(buf[2*i:], v)
				}
			}
			if _, err := bw.Write(buf); err != nil {
				return err
			}
			dataAt := 8 + int64(k)*(padded+ifdSize)
			next := uint32(0)
			if k+1 < s.Depth {
				next = uint32(dataAt + padded + ifdSize + padded)
			}
			// Entries in ascending tag order, as TIFF 6.0 requires.
			le.PutUint16(ifd, entries)
			put := func(n int, tag, typ uint16, value uint32) {
				e := ifd[2+12*n:]
				le.PutUint16(e, tag)
				le.PutUint16(e[2:], typ)
				le.PutUint32(e[4:], 1)
				if typ == 3 {
					le.PutUint32(e[8:], 0)
					le.PutUint16(e[8:], uint16(value))
				} else {
					le.PutUint32(e[8:], value)
				}
			}
			const short, long = 3, 4
			put(0, 254, long, 0) // NewSubfileType: a full-resolution image
			put(1, tagImageWidth, long, uint32(s.Width))
			put(2, tagImageLength, long, uint32(s.Height))
			put(3, tagBitsPerSample, short, uint32(s.Bits))
			put(4, tagCompression, short, compNone)
			put(5, tagPhotometric, short, photoBlackIsZero)
			put(6, tagStripOffsets, long, uint32(dataAt))
			put(7, tagSamplesPerPixel, short, 1)
			put(8, tagRowsPerStrip, long, uint32(s.Height))
			put(9, tagStripByteCounts, long, uint32(plane))
			put(10, tagSampleFormat, short, 1)
			le.PutUint32(ifd[2+12*entries:], next)
			if _, err := bw.Write(ifd); err != nil {
				return err
			}
		}
		return nil
	})
}

// WritePNG writes img as a PNG file: an image.Gray or image.Gray16 (a
// Stack's Image) as grey, an image.RGBA (an Overlay) as colour. Like
// WriteTIFF it writes whole or not at all.
func WritePNG(path string, img image.Image) error {
	return WritePNGContext(context.Background(), path, img)
}

// WritePNGContext is WritePNG with the run's context, as WriteTIFFContext.
func WritePNGContext(ctx context.Context, path string, img image.Image) error {
	if img == nil || img.Bounds().Empty() {
		return fmt.Errorf("imaging: %s: no image to write", path)
	}
	enc := png.Encoder{CompressionLevel: png.DefaultCompression}
	return writeAtomic(ctx, path, func(w io.Writer) error {
		return enc.Encode(w, img)
	})
}

// refuseOwnInput refuses to write path when it is the file input came from.
func refuseOwnInput(path, input string) error {
	if input == "" {
		return nil
	}
	out, err := os.Stat(path)
	if err != nil {
		return nil // nothing there yet: nothing to overwrite
	}
	in, err := os.Stat(input)
	if err == nil && os.SameFile(in, out) {
		return fmt.Errorf("imaging: %s: is the input the stack was read from; refusing to write over it", path)
	}
	return nil
}

// writeAtomic writes a file through fill, whole or not at all, by the one
// output path every ferry command takes (register/outfile), which buffers
// fill's writes. A write of an image takes well under a second, so it is not
// cancelled with ctx (a caller checks for an interrupt before it starts);
// ctx only carries the output tracker.
func writeAtomic(ctx context.Context, path string, fill func(io.Writer) error) error {
	return outfile.Write(context.WithoutCancel(ctx), path, fill)
}
